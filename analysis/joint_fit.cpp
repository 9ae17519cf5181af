#include "analysis/joint_fit.h"

#include <algorithm>
#include <cmath>
#include <sstream>
#include <stdexcept>

namespace dropfit::analysis {

std::optional<std::string> ValidateJointFitOptions(const JointFitOptions& options) {
  if (!(options.height_tolerance_m >= 0.0 && options.height_tolerance_m <= 1.0)) {
    std::ostringstream m;
    m << "height_tolerance_m = " << options.height_tolerance_m << " is outside [0, 1]";
    return m.str();
  }
  return std::nullopt;
}

namespace {

// Nominal heights, each group's representative value, in ascending order.
std::vector<double> HeightGroups(const std::vector<FitClip>& clips, double tolerance_m) {
  std::vector<double> heights;
  for (const FitClip& c : clips) heights.push_back(c.drop_height_m);
  std::sort(heights.begin(), heights.end());
  std::vector<double> groups;
  for (double h : heights) {
    if (groups.empty() || h - groups.back() > tolerance_m) groups.push_back(h);
  }
  return groups;
}

HoldoutError PredictHeight(LawId law, const std::vector<FitClip>& clips, double height_m, const LawFitOptions& options,
                           double tolerance_m) {
  HoldoutError out;
  out.drop_height_m = height_m;
  std::vector<FitClip> train, held;
  for (const FitClip& c : clips) {
    (std::abs(c.drop_height_m - height_m) <= tolerance_m ? held : train).push_back(c);
  }
  if (train.empty()) {
    out.failure = "no other height to fit on";
    return out;
  }
  LawFitOptions quick = options;
  quick.figure_uncertainties = false;
  const LawFitResult trained = FitLaw(law, train, quick);
  if (trained.failure) {
    out.failure = "the fit on the other heights failed: " + *trained.failure;
    return out;
  }
  const LawFitResult reference = FitLaw(law, held, quick);
  if (reference.failure) {
    out.failure = "the fit at this height failed: " + *reference.failure;
    return out;
  }
  double sum_cor = 0.0, sum_duration = 0.0, sum_deflection = 0.0;
  for (const BounceFitFigures& ref : reference.figures) {
    const FitClip& clip = held[ref.clip_index];
    const auto window = std::find_if(clip.windows.begin(), clip.windows.end(),
                                     [&](const FitWindow& w) { return w.bounce_index == ref.bounce_index; });
    if (window == clip.windows.end() || !std::isfinite(ref.cor)) continue;
    const double onset = clip.known_onset_height_m.value_or(trained.onset_height_m);
    const ImpactTruth predicted = PredictImpact(law, trained.params, onset, clip.mass_kg, window->start_time_s,
                                                ref.start_height_m, ref.start_velocity_mps, options);
    if (!std::isfinite(predicted.cor) || !std::isfinite(predicted.contact_duration_s)) continue;
    const double cor_error = predicted.cor - ref.cor;
    sum_cor += cor_error;
    sum_duration += predicted.contact_duration_s - ref.contact_duration_s;
    sum_deflection += predicted.max_deflection_m - ref.max_deflection_m;
    out.cor_error_max_abs = std::max(out.cor_error_max_abs, std::abs(cor_error));
    ++out.bounces;
  }
  if (out.bounces == 0) {
    out.failure = "no held-out bounce could be predicted (the trained law gives no complete impact)";
    return out;
  }
  out.cor_error = sum_cor / out.bounces;
  out.contact_duration_error_s = sum_duration / out.bounces;
  out.max_deflection_error_m = sum_deflection / out.bounces;
  return out;
}

}  // namespace

JointFitResult FitJoint(LawId law, const std::vector<FitClip>& clips, const LawFitOptions& options,
                        const JointFitOptions& joint_options) {
  if (const auto e = ValidateJointFitOptions(joint_options)) throw std::invalid_argument("FitJoint: " + *e);
  JointFitResult out;
  out.fit = FitLaw(law, clips, options);
  if (!joint_options.leave_one_height_out || out.fit.failure) return out;
  const std::vector<double> groups = HeightGroups(clips, joint_options.height_tolerance_m);
  if (groups.size() < 2) return out;
  for (double h : groups)
    out.holdout.push_back(PredictHeight(law, clips, h, options, joint_options.height_tolerance_m));
  return out;
}

SpecimenFit FitSpecimen(const std::vector<FitClip>& clips, const LawFitOptions& options,
                        const JointFitOptions& joint_options) {
  SpecimenFit out;
  std::vector<LawFitResult> fits;
  for (LawId law : AllLaws()) {
    out.laws.push_back(FitJoint(law, clips, options, joint_options));
    fits.push_back(out.laws.back().fit);
  }
  out.choice = ChooseLaw(fits, TrackNoise(clips));
  for (size_t i = 0; i < fits.size(); ++i) out.laws[i].fit.rank_criterion = fits[i].rank_criterion;
  return out;
}

}  // namespace dropfit::analysis
