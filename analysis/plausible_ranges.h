#pragma once
// Plausible ranges of what a user types for a drop in SI units. A value outside one was most
// often typed in millimetres (or grams): the manifest reader (cli/manifest.h) fails the row and
// `dropfit render` refuses the option, both with kMillimetresHint. The ranges are stated in the
// README ("The clip folder") and docs/formats.md ("manifest.csv"). They span lab drop tests of
// small castors up to aircraft tyres; common practice, no source.

namespace dropfit::analysis {

inline constexpr double kMinDropHeightM = 0.005, kMaxDropHeightM = 5.0;    // nominal drop height
inline constexpr double kMinMassKg = 0.01, kMaxMassKg = 2000.0;            // dropped mass
inline constexpr double kMinWheelLengthM = 0.005, kMaxWheelLengthM = 1.5;  // radii and tread width
inline constexpr const char* kMillimetresHint = "did you give millimetres?";

}  // namespace dropfit::analysis
