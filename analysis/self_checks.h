#pragma once
// Set-up self-checks: warnings, with numbers, that tell an engineer when the capture rate,
// the scale, the nominal drop height or the camera's/board's vertical is off, before any
// figure is trusted.
//
// 1. Gravity. The flight parabolas' acceleration (inverse-variance mean over the clip's
//    flights) against the expected gravity g (standard gravity 9.80665 m/s^2, 3rd CGPM 1901,
//    or the local value given with --gravity). A measured acceleration scales as
//    (metres per pixel) x (capture rate)^2, so a ratio r = measured / g means either
//      - a capture rate off by sqrt(1/r): the true rate is sqrt(1/r) times the rate used
//        ("rate looks 2x too low" when r is about 1/4, the usual mistake of a clip read at
//        a playback or half rate), or
//      - a scale off by 1/r: wrong square size at calibration, or the marker out of the
//        board's plane (metres per pixel scale with the distance to the camera: a marker at
//        distance D_m measured with a board at D_b gives r = D_b / D_m).
//    Flagged when |r - 1| exceeds both `gravity_tolerance` and 3 standard uncertainties.
// 2. Tilt. The same flights' acceleration vector (a_x, a_y) in the drop plane; its angle to
//    the rig's downward vertical, atan2(a_x, -a_y), is the tilt between gravity and the rig's
//    "up" (camera rolled against the board's up row, or the board itself not vertical). The
//    plane is the image mapped through the rig's homography, so this is the image check of
//    gravity's direction against the rig's vertical expressed in degrees in the plane.
//    Positive: gravity points towards +x_m. Flagged beyond `tilt_tolerance_deg` and 3 sd.
// 3. Drop height. The first impact's measured speed against sqrt(2 g h) for the nominal drop
//    height h (docs/methods.md §2; the nominal height is from the tread to the floor,
//    the fall to first contact). Faster: a higher drop or a push at release; slower: a lower
//    drop or a release that drags. Flagged beyond `impact_speed_tolerance` (fraction) and 3
//    sd. Only when the first contact in the clip has a falling flight (the clip is assumed to
//    begin before the first impact; say so when the flight begins with the clip and its
//    apex is higher than a release would explain).

#include <optional>
#include <string>
#include <vector>

#include "analysis/constants.h"
#include "analysis/impacts.h"

namespace dropfit::analysis {

struct SelfCheckOptions {
  double gravity_mps2 = kStandardGravityMps2;  // expected gravity [m/s^2], (0, 100]
  std::optional<double> capture_fps;           // rate used [frames/s], to word a rate correction
  std::optional<double> drop_height_m;         // nominal drop height [m], > 0
  double gravity_tolerance = 0.005;            // fraction; [0, 0.5]; local g is within about ±0.3 %
  double tilt_tolerance_deg = 1.0;             // degrees; [0, 45]
  double impact_speed_tolerance = 0.01;        // fraction (about 2 % in height); [0, 0.5]
};
std::optional<std::string> ValidateSelfCheckOptions(const SelfCheckOptions& options);

struct GravityCheckResult {
  Estimate flight_accel_mps2;  // measured, downward positive; NaN without a flight
  double expected_mps2 = kStandardGravityMps2;
  double ratio = 0.0;  // measured / expected
  int flights_used = 0;
  double rate_factor = 0.0;   // sqrt(expected / measured): true rate / rate used, if rate is the cause
  double scale_factor = 0.0;  // expected / measured: true / used metres per pixel, if scale is the cause
  bool flagged = false;
};

struct TiltCheckResult {
  Estimate tilt_deg;  // gravity's angle to the rig's down, positive towards +x_m
  bool flagged = false;
};

struct DropHeightCheckResult {
  Estimate impact_speed_mps;        // first impact, measured
  double expected_speed_mps = 0.0;  // sqrt(2 g h_nominal)
  double nominal_height_m = 0.0;
  double implied_height_m = 0.0;  // v^2 / (2 g)
  bool flagged = false;
};

struct SelfCheckReport {
  GravityCheckResult gravity;
  std::optional<TiltCheckResult> tilt;
  std::optional<DropHeightCheckResult> drop_height;
  std::vector<std::string> warnings;  // one sentence per flagged check, with numbers
};

// Throws std::invalid_argument for invalid options.
SelfCheckReport RunSelfChecks(const Segmentation& segmentation, const std::vector<ImpactFigures>& impacts,
                              const SelfCheckOptions& options);

}  // namespace dropfit::analysis
