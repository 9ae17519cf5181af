#include "cli/fit_records.h"

#include <cmath>

#include "analysis/forward_model.h"

namespace dropfit::cli {

FitRecord ToFitRecord(const analysis::LawFitResult& fit, int clip_index) {
  FitRecord r;
  r.law = analysis::ToString(fit.law);
  for (size_t i = 0; i < fit.param_names.size() && i < fit.params.size(); ++i) {
    r.params.emplace_back(fit.param_names[i], fit.params[i]);
    r.param_sd.emplace_back(fit.param_names[i], i < fit.param_sd.size() ? fit.param_sd[i] : std::nan(""));
  }
  r.onset_height_m = fit.onset_height_m;
  r.onset_height_source = fit.onset_height_fitted ? "fit" : "geometry";
  if (clip_index >= 0 && static_cast<size_t>(clip_index) < fit.bounces.size()) {
    r.bounces = fit.bounces[static_cast<size_t>(clip_index)];
  }
  r.rms_residual_m = fit.failure ? std::nan("") : fit.rms_residual_m;
  r.bic = fit.failure ? std::nan("") : fit.bic;
  r.converged = fit.converged && !fit.failure;
  r.extra = {{"onset_height_sd_m", fit.onset_height_sd_m},
             {"samples", static_cast<double>(fit.samples)},
             {"free_parameters", static_cast<double>(fit.free_parameters)},
             {"iterations", static_cast<double>(fit.iterations)},
             {"starts", static_cast<double>(fit.starts)},
             {"solve_time_s", fit.solve_time_s}};
  r.notes = {{"formula", fit.formula}, {"termination", fit.termination}, {"start_note", fit.start_note}};
  if (fit.failure) r.notes.emplace_back("failure", *fit.failure);
  std::string warnings;
  for (const std::string& w : fit.warnings) warnings += (warnings.empty() ? "" : " | ") + w;
  if (!warnings.empty()) r.notes.emplace_back("warnings", warnings);
  return r;
}

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
      // A break between windows so the report does not join them.
      trace.t_s.push_back(std::nan(""));
      trace.y_m.push_back(std::nan(""));
      trace.residual_m.push_back(std::nan(""));
    }
  }
  return trace;
}

Curve CorCurve(const analysis::LawFitResult& fit, double mass_kg, double v_lo_mps, double v_hi_mps,
               const analysis::LawFitOptions& options, int points) {
  Curve c{analysis::ToString(fit.law), "cor_vs_speed", {}, {}};
  if (fit.failure || !(v_hi_mps > v_lo_mps) || v_lo_mps <= 0 || options.gravity_mps2 <= 0) return c;
  for (int i = 0; i < points; ++i) {
    const double v = v_lo_mps + (v_hi_mps - v_lo_mps) * i / (points - 1);
    // Released from rest at the apex that gives impact speed v at the onset height.
    const double apex = fit.onset_height_m + v * v / (2.0 * options.gravity_mps2);
    const analysis::ImpactTruth t =
        analysis::PredictImpact(fit.law, fit.params, fit.onset_height_m, mass_kg, 0.0, apex, 0.0, options);
    c.x.push_back(v);
    c.y.push_back(t.cor);
  }
  return c;
}

void AddLawFitsToResult(const analysis::LawComparison& laws, const std::vector<analysis::FitClip>& clips,
                        const analysis::LawFitOptions& options, ClipResult& result) {
  for (const analysis::LawFitResult& fit : laws.fits) {
    result.fits.push_back(ToFitRecord(fit, 0));
    if (fit.failure) continue;
    const std::string law = analysis::ToString(fit.law);
    const FitTrace trace = TraceFit(fit, clips, 0, options);
    result.curves.push_back({law, "trajectory", trace.t_s, trace.y_m});
    result.curves.push_back({law, "residual", trace.t_s, trace.residual_m});
    if (!fit.curves.empty()) {
      result.curves.push_back({law, "force_deflection", fit.curves.front().deflection_m, fit.curves.front().force_n});
    }
  }
  if (!laws.best) {
    result.warnings.push_back(result.clip + ": no contact law converged; the impact figures come from the track");
    return;
  }
  const analysis::LawFitResult& best = laws.fits[static_cast<size_t>(*laws.best)];
  result.best_law = analysis::ToString(best.law);
  for (const analysis::BounceFitFigures& f : best.figures) {
    if (f.clip_index != 0 || f.bounce_index < 0 || static_cast<size_t>(f.bounce_index) >= result.impacts.size()) {
      continue;
    }
    ImpactRecord& im = result.impacts[static_cast<size_t>(f.bounce_index)];
    im.t_separation_s = f.t_separation_s;
    im.contact_duration_s = f.contact_duration_s;
    im.peak_force_n = f.peak_force_n;
    im.source = *result.best_law;
    im.extra.push_back({"t_separation_sd_s", f.t_separation_sd_s});
    im.extra.push_back({"contact_duration_sd_s", f.contact_duration_sd_s});
    im.extra.push_back({"peak_force_sd_n", f.peak_force_sd_n});
    im.extra.push_back({"max_deflection_law_m", f.max_deflection_m});
    im.extra.push_back({"separation_speed_mps", f.separation_speed_mps});
  }
}

}  // namespace dropfit::cli
