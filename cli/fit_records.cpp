#include "cli/fit_records.h"

#include <cmath>

namespace dropfit::cli {

FitRecord ToFitRecord(const analysis::LawFitResult& fit, int clip_index) {
  FitRecord r;
  r.law = analysis::ToString(fit.law);
  for (size_t i = 0; i < fit.param_names.size() && i < fit.params.size(); ++i) {
    r.params.emplace_back(fit.param_names[i], fit.params[i]);
    r.param_sd.emplace_back(fit.param_names[i], i < fit.param_sd.size() ? fit.param_sd[i] : std::nan(""));
  }
  r.onset_height_m = fit.onset_height_m;
  r.onset_height_source = analysis::ToString(fit.onset_prior_m         ? analysis::OnsetHeightSource::kGeometryPrior
                                             : fit.onset_height_fitted ? analysis::OnsetHeightSource::kFit
                                                                       : analysis::OnsetHeightSource::kGeometry);
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
             {"solve_time_s", fit.solve_time_s},
             {"rank_criterion", fit.rank_criterion},
             {"residual_lag1_correlation", fit.residual_lag1_correlation},
             {"residual_correlation_time", fit.residual_correlation_time},
             {"effective_samples", fit.effective_samples},
             {"sd_inflation", fit.sd_inflation},
             {"rms_contact_m", fit.rms_contact_m},
             {"rms_flight_m", fit.rms_flight_m},
             {"robust_sd_m", fit.robust_sd_m},
             {"robust_sd_contact_m", fit.robust_sd_contact_m},
             {"samples_downweighted", static_cast<double>(fit.samples_downweighted)}};
  if (fit.onset_prior_m) {
    r.extra.emplace_back("onset_height_geometry_m", *fit.onset_prior_m);
    r.extra.emplace_back("onset_height_geometry_sd_m", fit.onset_prior_sd_m);
  }
  r.notes = {{"formula", fit.formula},
             {"stop_reason", fit.failure ? std::string("not_fitted") : fit.stop_reason},
             {"termination", fit.termination},
             {"start_note", fit.start_note}};
  if (fit.failure) r.notes.emplace_back("failure", *fit.failure);
  // A list of texts as one note, joined by " | " (docs/formats.md, "Fit records"), when not empty.
  const auto add_joined = [&r](const char* name, const std::vector<std::string>& texts) {
    std::string joined;
    for (const std::string& t : texts) joined += (joined.empty() ? "" : " | ") + t;
    if (!joined.empty()) r.notes.emplace_back(name, joined);
  };
  add_joined("bounds_reached", fit.bounds_reached);
  add_joined("warnings", fit.warnings);
  return r;
}

void AddParameterBudgets(const analysis::LawFitResult& fit, const analysis::ScaleUncertainty& scale,
                         const analysis::DropConditions& conditions, FitRecord& record) {
  for (const pipeline::NamedBudget& b : pipeline::ParameterBudgets(fit, scale, conditions)) {
    for (auto& [name, sd] : record.param_sd)
      if (name == b.figure) sd = b.budget.sd;
    record.budget.push_back(ToBudgetRecord(b.figure, b.budget));
  }
}

Curve CorCurve(analysis::LawId law, const pipeline::CorCurvePoints& points) {
  return {analysis::ToString(law), CurveKind::kCorVsSpeed, points.impact_speed_mps, points.cor};
}

void AddLawFitsToResult(const analysis::LawComparison& laws, const std::vector<pipeline::FitTrace>& traces,
                        ClipResult& result) {
  for (size_t i = 0; i < laws.fits.size(); ++i) {
    const analysis::LawFitResult& fit = laws.fits[i];
    result.fits.push_back(ToFitRecord(fit, 0));
    if (fit.failure) continue;
    const std::string law = analysis::ToString(fit.law);
    const pipeline::FitTrace trace = i < traces.size() ? traces[i] : pipeline::FitTrace{};
    result.curves.push_back({law, CurveKind::kTrajectory, trace.t_s, trace.y_m});
    result.curves.push_back({law, CurveKind::kResidual, trace.t_s, trace.residual_m});
    if (!fit.curves.empty()) {
      result.curves.push_back(
          {law, CurveKind::kForceDeflection, fit.curves.front().deflection_m, fit.curves.front().force_n});
    }
  }
  const analysis::LawChoice& choice = laws.choice;
  if (!choice.best) {
    result.warnings.push_back(result.clip + ": no contact law could be fitted; the impact figures come from the track");
    return;
  }
  const analysis::LawFitResult& best = laws.fits[static_cast<size_t>(*choice.best)];
  result.best_law = analysis::ToString(best.law);
  for (int i : choice.equivalent)
    result.equivalent_laws.push_back(analysis::ToString(laws.fits[static_cast<size_t>(i)].law));
  if (choice.no_law_fits) {
    // The law-free figures stay the result (docs/methods.md §13).
    result.no_law_fits = choice.no_law_fits;
    result.warnings.push_back(result.clip + ": " + *choice.no_law_fits);
    return;
  }
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
