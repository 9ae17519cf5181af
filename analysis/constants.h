#pragma once
// Physical constants, defined once for the whole tool (docs/methods.md §1).

namespace dropfit::analysis {

// Standard acceleration of gravity [m/s^2], exact by definition (3rd CGPM 1901, CR p. 70). The
// default wherever a gravity is expected; a measured local value may replace it.
inline constexpr double kStandardGravityMps2 = 9.80665;

}  // namespace dropfit::analysis
