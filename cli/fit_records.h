#pragma once
// Contact-law fits (analysis/law_fit.h, analysis/joint_fit.h) as the contract's result
// records: `fits` and `best_law` of result.json, `joint_fits` of summary.json, the
// law-dependent impact figures, and the curves the report draws.

#include <vector>

#include "analysis/joint_fit.h"
#include "analysis/law_fit.h"
#include "cli/results.h"

namespace dropfit::cli {

// One fit as the contract's record (law, params, param_sd, onset height, bounces of clip
// `clip_index`, rms, bic, converged; formula, warnings and solver figures beside them).
FitRecord ToFitRecord(const analysis::LawFitResult& fit, int clip_index = 0);

// Fills result.fits, result.best_law and the report curves of a per-clip fit (`clips` holds
// the one clip), and replaces each fitted impact's law-dependent figures (t_separation_s,
// contact_duration_s, peak_force_n; source = the best law id) with the best law's; the
// track-only estimates stay beside them under their own names.
void AddLawFitsToResult(const analysis::LawComparison& laws, const std::vector<analysis::FitClip>& clips,
                        const analysis::LawFitOptions& options, ClipResult& result);

// Simulated hub heights of a fit at the samples of clip `clip_index`'s windows (from the
// fitted window-start states): times, heights, and measured minus simulated.
struct FitTrace {
  std::vector<double> t_s, y_m, residual_m;
};
FitTrace TraceFit(const analysis::LawFitResult& fit, const std::vector<analysis::FitClip>& clips, int clip_index,
                  const analysis::LawFitOptions& options);

// COR against impact speed predicted by a fitted law, for speeds in [v_lo, v_hi].
Curve CorCurve(const analysis::LawFitResult& fit, double mass_kg, double v_lo_mps, double v_hi_mps,
               const analysis::LawFitOptions& options, int points = 25);

}  // namespace dropfit::cli
