#include "pipeline/joint_stage.h"

#include <algorithm>
#include <chrono>
#include <cmath>

namespace dropfit::pipeline {

std::optional<analysis::FitClip> JointFitClip(const ClipMeasurement& measurement,
                                              std::optional<double>* geometry_onset_height_m) {
  if (!measurement.fit_clip || measurement.fit_clip->windows.empty()) return std::nullopt;
  analysis::FitClip fc = *measurement.fit_clip;
  if (fc.known_onset_height_m) {
    if (geometry_onset_height_m) *geometry_onset_height_m = *fc.known_onset_height_m;
    fc.onset_height_guess_m = *fc.known_onset_height_m;
    fc.known_onset_height_m.reset();
  }
  return fc;
}

SpecimenResult FitSpecimenClips(const std::string& specimen, const std::vector<const ClipMeasurement*>& clips) {
  const auto t0 = std::chrono::steady_clock::now();
  SpecimenResult out;
  out.specimen = specimen;
  std::vector<analysis::FitClip> fit_clips;
  const ClipMeasurement* first = nullptr;
  double v_lo = INFINITY, v_hi = 0, mass_sum = 0;
  for (const ClipMeasurement* c : clips) {
    if (!c || c->kinematics.failure) continue;
    if (!first) first = c;
    std::optional<analysis::FitClip> fc = JointFitClip(*c, &out.geometry_onset_height_m);
    if (!fc) continue;
    fit_clips.push_back(std::move(*fc));
    mass_sum += c->conditions.mass_kg;
    for (const analysis::ImpactFigures& im : c->kinematics.impacts) {
      if (!im.complete || !std::isfinite(im.cor.value)) continue;
      out.measured_cor.impact_speed_mps.push_back(im.impact_speed_mps.value);
      out.measured_cor.cor.push_back(im.cor.value);
      v_lo = std::min(v_lo, im.impact_speed_mps.value);
      v_hi = std::max(v_hi, im.impact_speed_mps.value);
    }
  }
  out.clips_fitted = static_cast<int>(fit_clips.size());
  if (fit_clips.empty() || !first) return out;
  out.fit_options = first->fit_options;
  out.fit = analysis::FitSpecimen(fit_clips, out.fit_options);
  const double mass = mass_sum / static_cast<double>(fit_clips.size());
  if (v_hi > v_lo) {
    for (const analysis::JointFitResult& law : out.fit->laws)
      out.law_cor.push_back(CorAgainstSpeed(law.fit, mass, 0.8 * v_lo, 1.2 * v_hi, out.fit_options));
  }
  out.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  return out;
}

}  // namespace dropfit::pipeline
