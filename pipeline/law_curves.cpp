#include "pipeline/law_curves.h"

#include <cmath>

#include "analysis/forward_model.h"

namespace dropfit::pipeline {

FitTrace TraceFit(const analysis::LawFitResult& fit, const std::vector<analysis::FitClip>& clips, int clip_index,
                  const analysis::LawFitOptions& options) {
  FitTrace trace;
  if (fit.failure || clip_index < 0 || static_cast<size_t>(clip_index) >= clips.size()) return trace;
  const analysis::FitClip& clip = clips[static_cast<size_t>(clip_index)];
  analysis::ContactSetup setup;
  setup.law = fit.law;
  setup.tread = options.tread;
  setup.mass_kg = clip.mass_kg;
  setup.gravity_mps2 = options.gravity_mps2;
  for (const analysis::BounceFitFigures& f : fit.figures) {
    if (f.clip_index != clip_index) continue;
    for (const analysis::FitWindow& w : clip.windows) {
      if (w.bounce_index != f.bounce_index || w.t_s.empty()) continue;
      std::vector<double> heights(w.t_s.size());
      const auto status = analysis::SimulateHubHeights<double>(
          setup, fit.params.data(), fit.onset_height_m, w.start_time_s, f.start_height_m, f.start_velocity_mps,
          w.t_s.data(), static_cast<int>(w.t_s.size()), heights.data(), nullptr, options.model);
      if (status != analysis::SimulationStatus::kOk) continue;
      for (size_t i = 0; i < w.t_s.size(); ++i) {
        trace.t_s.push_back(w.t_s[i]);
        trace.y_m.push_back(heights[i]);
        trace.residual_m.push_back(w.y_m[i] - heights[i]);
      }
      trace.t_s.push_back(std::nan(""));
      trace.y_m.push_back(std::nan(""));
      trace.residual_m.push_back(std::nan(""));
    }
  }
  return trace;
}

CorCurvePoints CorAgainstSpeed(const analysis::LawFitResult& fit, double mass_kg, double v_lo_mps, double v_hi_mps,
                               const analysis::LawFitOptions& options, int points) {
  CorCurvePoints c;
  if (fit.failure || !(v_hi_mps > v_lo_mps) || v_lo_mps <= 0 || options.gravity_mps2 <= 0) return c;
  for (int i = 0; i < points; ++i) {
    const double v = v_lo_mps + (v_hi_mps - v_lo_mps) * i / (points - 1);
    const double apex = fit.onset_height_m + v * v / (2.0 * options.gravity_mps2);
    const analysis::ImpactTruth t =
        analysis::PredictImpact(fit.law, fit.params, fit.onset_height_m, mass_kg, 0.0, apex, 0.0, options);
    c.impact_speed_mps.push_back(v);
    c.cor.push_back(t.cor);
  }
  return c;
}

std::optional<ForceDeflection> TrackForceDeflection(const analysis::TimeSeries& series,
                                                    const analysis::KinematicsResult& kinematics, double mass_kg,
                                                    double gravity_mps2) {
  const double onset = kinematics.segmentation.onset_height_m;
  if (!std::isfinite(onset)) return std::nullopt;
  for (const analysis::Bounce& b : kinematics.segmentation.bounces) {
    if (!b.complete) continue;
    const analysis::ContactAccelerationTrace acc = analysis::ContactAcceleration(series, b);
    ForceDeflection curve;
    for (size_t k = 0; k < acc.t_s.size(); ++k) {
      curve.deflection_m.push_back(onset - acc.y_m[k]);
      curve.force_n.push_back(mass_kg * (acc.accel_mps2[k] + gravity_mps2));
    }
    return curve;
  }
  return std::nullopt;
}

}  // namespace dropfit::pipeline
