#pragma once
// The plausibility gate before the law fits (docs/formats.md, "Plausibility gate"; issue 18).
//
// A clip's free flights must fall at gravity. A measured acceleration scales as (metres per
// pixel) x (capture rate)^2 (analysis/self_checks.h), so flights that still disagree with
// gravity after the gravity ruler's correction (analysis/gravity_ruler.h) say that the rate, the
// unit of the rig or the rig itself is wrong, and every figure and law fitted from the clip would
// be wrong with it. Such a clip is not fitted: it fails (exit status 1) with an error that names
// the fix, and it is left out of the means and the joint fits; its law-free figures are written,
// flagged "rate_or_scale".
//
// The rule: the flights' acceleration (analysis::GravityCheckResult, after the ruler) differs from
// the expected gravity by more than `tolerance` (3 %) and by more than `sigmas` (3) standard
// uncertainties. Where the ruler applied its offset the flights fall at g by construction; where
// its estimate lay beyond its plausible range (10 % of the camera distance), or where it is off
// (--no-gravity-ruler, a rig without the plane's pose, an offset given), the 3 % decides.
//
// The fix named: the rate that would fit, f_used x sqrt(g / a) (the rate is the likelier cause
// when the factor is near a whole number or its inverse, as with a playback or half rate),
// where the rate came from, and the option or manifest column that sets it; and the scale factor
// g / a for a wrong square size or marker plane.

#include <optional>
#include <string>

#include "analysis/self_checks.h"
#include "pipeline/capture_rate.h"

namespace dropfit::pipeline {

struct PlausibilityOptions {
  double tolerance = 0.03;  // |a / g - 1| allowed, fraction; (0, 1)
  double sigmas = 3.0;      // and standard uncertainties of a; [0, 100]
};
// A message naming the offending field and its range, or nothing.
std::optional<std::string> ValidatePlausibilityOptions(const PlausibilityOptions& options);

// The error (without the clip's name) when the flights disagree with gravity, naming the fix;
// nothing when they agree or no flight was measured. `rate` is the capture rate used and its
// source. Throws std::invalid_argument for invalid options.
std::optional<std::string> GravityGateProblem(const analysis::GravityCheckResult& gravity, const CaptureRate& rate,
                                              const PlausibilityOptions& options = {});

// The flag of a clip the gate stopped (result.json and summary.csv "flags"; docs/formats.md).
inline constexpr const char* kFlagRateOrScale = "rate_or_scale";

}  // namespace dropfit::pipeline
