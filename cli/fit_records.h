#pragma once
// Contact-law fits (analysis/law_fit.h, analysis/joint_fit.h) as the contract's result
// records: `fits` and `best_law` of result.json, `joint_fits` of summary.json, the
// law-dependent impact figures, and the curves the report draws.

#include <vector>

#include "analysis/joint_fit.h"
#include "analysis/law_fit.h"
#include "cli/results.h"
#include "pipeline/law_curves.h"
#include "pipeline/uncertainty.h"

namespace dropfit::cli {

// One fit as the contract's record (law, params, param_sd, onset height, bounces of clip
// `clip_index`, rms, bic, converged; formula, warnings and solver figures beside them).
FitRecord ToFitRecord(const analysis::LawFitResult& fit, int clip_index = 0);

// The uncertainty budgets of a fit's parameters (pipeline::ParameterBudgets) into its record:
// `budget`, and param_sd set to the combined standard uncertainties.
void AddParameterBudgets(const analysis::LawFitResult& fit, const analysis::ScaleUncertainty& scale,
                         const analysis::DropConditions& conditions, FitRecord& record);

// Fills result.fits, result.best_law and the report curves of a per-clip fit (`traces` holds the
// simulated heights of each fit, pipeline/law_curves.h), and replaces each fitted impact's
// law-dependent figures (t_separation_s, contact_duration_s, peak_force_n; source = the best law
// id) with the best law's; the track-only estimates stay beside them under their own names.
void AddLawFitsToResult(const analysis::LawComparison& laws, const std::vector<pipeline::FitTrace>& traces,
                        ClipResult& result);

// A law's predicted COR against impact speed as the report's curve (kind cor_vs_speed).
Curve CorCurve(analysis::LawId law, const pipeline::CorCurvePoints& points);

}  // namespace dropfit::cli
