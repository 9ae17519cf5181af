#include "analysis/kinematics.h"

#include <cmath>
#include <sstream>
#include <stdexcept>

namespace dropfit::analysis {
namespace {

SegmentationOptions SegmentationFrom(const KinematicsOptions& o) {
  SegmentationOptions s;
  s.gravity_mps2 = o.gravity_mps2;
  s.onset_height_m = o.onset_height_m;
  s.onset_height_source = o.onset_height_source;
  s.onset_height_sd_m = o.onset_height_sd_m;
  s.departure_sigmas = o.departure_sigmas;
  s.min_flight_samples = o.min_flight_samples;
  s.robust_flights = o.robust_flights;
  return s;
}

}  // namespace

std::optional<std::string> ValidateKinematicsOptions(const KinematicsOptions& o) {
  if (auto m = ValidateSegmentationOptions(SegmentationFrom(o))) return m;
  if (auto m = ValidateImpactOptions(ImpactOptions{o.mass_kg, o.gravity_mps2})) return m;
  SelfCheckOptions checks;
  checks.gravity_mps2 = o.gravity_mps2;
  checks.capture_fps = o.capture_fps;
  checks.drop_height_m = o.drop_height_m;
  return ValidateSelfCheckOptions(checks);
}

namespace {

// The figures, checks and warnings of a segmented track (the second half of AnalyzeKinematics,
// and all of ReadAtOnsetHeight).
void MeasureSegmented(const TimeSeries& series, const KinematicsOptions& options, KinematicsResult& result) {
  result.impacts = MeasureImpacts(series, result.segmentation, ImpactOptions{options.mass_kg, options.gravity_mps2});
  SelfCheckOptions checks;
  checks.gravity_mps2 = options.gravity_mps2;
  checks.capture_fps = options.capture_fps;
  checks.drop_height_m = options.drop_height_m;
  result.checks = RunSelfChecks(result.segmentation, result.impacts, checks);

  result.warnings = result.checks.warnings;
  bool any_complete = false;
  for (const ImpactFigures& f : result.impacts) {
    any_complete |= f.complete;
    if (f.cor_disagreement) result.warnings.push_back(*f.cor_disagreement);
  }
  for (const Bounce& b : result.segmentation.bounces)
    if (!b.complete)
      result.warnings.push_back("bounce " + std::to_string(b.index) + " is incomplete: " + b.incomplete_reason);
  for (const std::string& note : result.segmentation.notes) result.warnings.push_back(note);
  if (!std::isfinite(result.segmentation.onset_height_m))
    result.failure =
        "no contact onset could be located from the track (no falling flight before any contact); "
        "give the free radius with a floor in the rig, or a clip that shows the fall before the impact";
  else if (!any_complete)
    result.warnings.push_back("no complete bounce: every impact lacks a falling or a rising flight in the clip");
}

}  // namespace

KinematicsResult AnalyzeKinematics(const TimeSeries& series, const KinematicsOptions& options) {
  if (auto m = ValidateKinematicsOptions(options)) throw std::invalid_argument("AnalyzeKinematics: " + *m);
  KinematicsResult result;
  result.segmentation = SegmentBounces(series, SegmentationFrom(options));
  result.segmentation_passes = 1;
  if (result.segmentation.failure) {
    result.failure = result.segmentation.failure;
    return result;
  }
  MeasureSegmented(series, options, result);
  return result;
}

KinematicsResult ReadAtOnsetHeight(const TimeSeries& series, const KinematicsResult& measured,
                                   const KinematicsOptions& options) {
  if (auto m = ValidateKinematicsOptions(options)) throw std::invalid_argument("ReadAtOnsetHeight: " + *m);
  if (!options.onset_height_m) throw std::invalid_argument("ReadAtOnsetHeight: no onset height given");
  if (measured.segmentation.failure || measured.segmentation_passes == 0)
    throw std::invalid_argument("ReadAtOnsetHeight: the track was not segmented");
  KinematicsResult result;
  result.segmentation = measured.segmentation;
  result.segmentation_passes = measured.segmentation_passes;
  SetOnsetHeight(*options.onset_height_m, options.onset_height_sd_m, options.onset_height_source, result.segmentation);
  MeasureSegmented(series, options, result);
  return result;
}

}  // namespace dropfit::analysis
