#pragma once
// Gravity as the ruler (docs/methods.md §20): the offset of the hub marker's plane from the
// calibrated plane that makes the clip's free flights fall at the local gravity.
//
// Why it works. Mapped through a plane that is not the marker's, every length is scaled by a
// constant about the foot of the camera's perpendicular (docs/methods.md §19): a marker d in front
// of the calibrated plane at camera distance D is read D / (D - d) times too large, and so is the
// flight acceleration, while time is exact (the capture rate is taken as exact: camera clocks are
// good to parts per million, and a playback-rate mistake is caught by the gravity self-check,
// analysis/self_checks.h). A flight parabola over 100 ms fixes its acceleration to about 1e-4
// relative, far better than a board fixes the marker's plane.
//
// Method.
// 1. Per flight window (the segmentation's flights), parabolas (degree 2) in y and in x by least
//    squares (analysis/flight_fit.h); the acceleration is the magnitude of the in-plane vector,
//    |a| = sqrt(a_x^2 + a_y^2), so that a tilt between gravity and the rig's vertical does not
//    enter; its variance (a_x^2 var a_x + a_y^2 var a_y) / |a|^2 (first-order propagation, GUM
//    eq. 10; the two fits are independent).
// 2. A flight the clip begins with (cut_by_clip_start) may hold the hub still before release:
//    when its fitted parabola's apex lies inside the window, the samples up to the apex plus
//    `release_margin_s` are left out (twice, the apex refitted in between): a held hub sits still
//    while a parabola through the apex would come down on both sides. Then the window's ends are
//    trimmed while the end sample's residual from the y parabola exceeds
//    `trim_sigmas` robust noise sds (1.4826 x the median absolute residual; Huber 1981, Robust
//    Statistics, §5.1, MAD scaled for the normal: FROM MEMORY): a hub held before release, or a
//    contact sample left inside a window, departs from the parabola at the window's ends. The
//    trimmed windows are fixed once, on the series at the start offset.
// 3. The flights are pooled by the inverse-variance weighted mean; when they scatter more than
//    their sds allow (Birge ratio R = sqrt(chi^2 / (n - 1)) > 1), the pooled sd is multiplied by R
//    (Birge 1932, Phys. Rev. 40, 207: the ratio; common practice).
// 4. The offset d solves a(d) = g, a(d) the pooled acceleration of the flights mapped onto the
//    plane d (`series_at`, exact ray-and-plane mapping supplied by the caller), by Newton's method
//    with a central-difference slope (step 1 mm), to 1e-9 m. Its sd is sd_a(d) / |da/dd|.
// 5. Clips of one specimen pool their offsets as in step 3.
// Policy (docs/formats.md, "Gravity ruler"): an estimate is applied, when no offset was given,
// only when |d| > `apply_sigmas` sd and |d| <= `max_offset_fraction` D; beyond that range it is not
// a marker offset but a wrong rate, unit or rig, and it is left to the plausibility checks.

#include <functional>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "analysis/constants.h"
#include "analysis/time_series.h"

namespace dropfit::analysis {

struct GravityRulerOptions {
  double gravity_mps2 = kStandardGravityMps2;  // local gravity [m/s^2], (0, 100]
  double trim_sigmas = 4.0;                    // end-trim threshold [robust sds], [2, 10]
  int min_flight_samples = 20;                 // fewest samples a trimmed flight keeps, [5, 10000]
  double release_margin_s = 0.005;             // left out after a release from rest [s], [0, 0.1]
  double apply_sigmas = 3.0;                   // policy: significance [sds], [0, 100]
  double max_offset_fraction = 0.10;           // policy: |d| / D at most, (0, 1)
};
// A message naming the offending field and its range, or nothing.
std::optional<std::string> ValidateGravityRulerOptions(const GravityRulerOptions& options);

// A flight window of the segmentation (analysis/impacts.h, FlightPhase).
struct FlightWindow {
  int first_index = 0;  // inclusive
  int last_index = -1;
  bool cut_by_clip_start = false;  // no contact before it in the clip
};

// One flight's acceleration magnitude over its trimmed window.
struct FlightAcceleration {
  int first_index = 0;  // trimmed window, inclusive
  int last_index = -1;
  int samples = 0;          // valid samples fitted
  double accel_mps2 = 0.0;  // |a|, in the plane the series was mapped onto
  double accel_sd_mps2 = 0.0;
};

// Step 1 and 2 for each window (index pairs into `series`, inclusive); windows with too few samples
// after trimming are left out. Throws std::invalid_argument for invalid options or a window outside
// the series.
std::vector<FlightAcceleration> MeasureFlightAccelerations(const TimeSeries& series,
                                                           const std::vector<FlightWindow>& windows,
                                                           const GravityRulerOptions& options);

// Step 3: inverse-variance mean with the Birge-ratio inflation. NaN value and sd without input;
// values with sd 0 (exact) give their plain mean with sd 0.
struct PooledValue {
  double value = 0.0;
  double sd = 0.0;
  int count = 0;
  double birge_ratio = 1.0;  // sqrt(chi^2 / (n - 1)); 1 for a single value
};
PooledValue PoolInverseVariance(const std::vector<double>& values, const std::vector<double>& sds);

// The offset estimate of one clip (step 4) or of several pooled (step 5).
struct MarkerOffsetEstimate {
  double offset_m = 0.0;  // toward the camera positive [m]
  double sd_m = 0.0;
  double accel_mps2 = 0.0;  // pooled flight acceleration at the start offset [m/s^2]
  double accel_sd_mps2 = 0.0;
  int flights = 0;  // flights used (clips, when pooled over clips)
  double birge_ratio = 1.0;
  std::optional<std::string> failure;  // set when no estimate could be made, and why
};

// Maps the clip's track onto the plane `offset_m` in front of the calibrated plane (the same
// samples and times, other metres).
using SeriesAtOffset = std::function<TimeSeries(double offset_m)>;

// Steps 1-4: `windows` are the flights of the segmentation of series_at(start_offset_m). Never
// throws for a clip without usable flights (failure set); throws std::invalid_argument for invalid
// options.
MarkerOffsetEstimate EstimateMarkerOffset(const SeriesAtOffset& series_at, double start_offset_m,
                                          const std::vector<FlightWindow>& windows, const GravityRulerOptions& options);

// Step 5: the clips' estimates pooled (failed ones left out); failure set when none is left.
MarkerOffsetEstimate PoolMarkerOffsets(const std::vector<MarkerOffsetEstimate>& estimates);

// The policy for an estimate when no offset was given.
enum class OffsetVerdict { kApply, kNotSignificant, kOutOfRange, kNoEstimate };
OffsetVerdict JudgeMarkerOffset(const MarkerOffsetEstimate& estimate, double camera_distance_m,
                                const GravityRulerOptions& options);

}  // namespace dropfit::analysis
