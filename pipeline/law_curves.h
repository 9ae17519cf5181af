#pragma once
// The numbers behind the report's curves, computed once here so that the commands only map them
// to records: a fitted law's simulated hub heights over a clip's fit windows, its COR against
// impact speed, and the force-deflection loop read from the filtered track.

#include <optional>
#include <vector>

#include "analysis/impacts.h"
#include "analysis/kinematics.h"
#include "analysis/law_fit.h"
#include "analysis/time_series.h"

namespace dropfit::pipeline {

// Simulated hub heights of a fit at the samples of clip `clip_index`'s windows (from the
// fitted window-start states, analysis/forward_model.h): times, heights, and measured minus
// simulated. Windows are separated by a NaN sample so that a plot does not join them. Empty for
// a failed fit.
struct FitTrace {
  std::vector<double> t_s, y_m, residual_m;
};
FitTrace TraceFit(const analysis::LawFitResult& fit, const std::vector<analysis::FitClip>& clips, int clip_index,
                  const analysis::LawFitOptions& options);

// COR against impact speed predicted by a fitted law (analysis::PredictImpact), for `points`
// speeds evenly spread over [v_lo, v_hi], each from a release at rest at the apex that gives
// that impact speed at the onset height. Empty for a failed fit or an empty range.
struct CorCurvePoints {
  std::vector<double> impact_speed_mps, cor;
};
CorCurvePoints CorAgainstSpeed(const analysis::LawFitResult& fit, double mass_kg, double v_lo_mps, double v_hi_mps,
                               const analysis::LawFitOptions& options, int points = 25);

// Force against deflection over the first complete bounce from the filtered track:
// deflection = onset height - height, force = m (a + g) (analysis::ContactAcceleration).
struct ForceDeflection {
  std::vector<double> deflection_m, force_n;
};
// Nothing when the onset height is unknown or no bounce is complete.
std::optional<ForceDeflection> TrackForceDeflection(const analysis::TimeSeries& series,
                                                    const analysis::KinematicsResult& kinematics, double mass_kg,
                                                    double gravity_mps2);

}  // namespace dropfit::pipeline
