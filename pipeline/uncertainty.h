#pragma once
// The uncertainty budgets of a measured clip (docs/methods.md §23; the combination and the
// parts: analysis/uncertainty_budget.h). Here the clip's scale inputs are gathered from the rig,
// the gravity ruler, the capture rate and gravity, and each reported figure gets its budget:
//   - impact and rebound speed, COR, COR from the apex heights, energy lost, maximum deflection,
//     the apex heights above the onset height, the track-only contact duration and peak force:
//     from the flight fits (analysis/impacts.h; the fit part includes the residuals'
//     correlation, the onset-height part is split off);
//   - contact duration and peak force from the best law when one fits (its fit part already
//     holds the onset height, fitted with the law);
//   - each parameter of each law fit.
// The figures' `*_sd_*` fields in results are the combined standard uncertainties.

#include <optional>
#include <string>
#include <vector>

#include "analysis/law_fit.h"
#include "analysis/uncertainty_budget.h"
#include "calib/rig.h"
#include "pipeline/clip.h"

namespace dropfit::pipeline {

// Local gravity's standard uncertainty when the user gave a value [m/s^2]: a value from a normal
// gravity formula at the site's latitude and height misses the local anomaly, mostly within
// 0.0005 m/s^2 (50 mGal; FROM MEMORY); a surveyed value is far better (give gravity_sd_mps2).
inline constexpr double kGivenGravitySdMps2 = 0.0005;
// When standard gravity stands in for the local one: the Earth's surface gravity lies between
// about 9.780 (equator) and 9.832 m/s^2 (poles) (FROM MEMORY), a rectangular half-width of
// 0.026 m/s^2, so u = 0.026 / sqrt(3) = 0.015 m/s^2 (GUM 4.3.7).
inline constexpr double kStandardGravitySdMps2 = 0.015;

// The clip's scale inputs (analysis::ScaleUncertainty) and what could not be known, as notes:
//  - rig_scale_rel: calib::ScaleRelSdAt at the hub's pixel at the onset height (the image
//    centre's value when the hub's is not known); 0 with a note for a rig without uncertainty;
//  - marker_plane_rel: the gravity ruler's offset sd / (D - d) when its estimate was applied,
//    sqrt((estimate - offset used)^2 + sd^2) / (D - d) otherwise; 0 with a note without an estimate;
//  - capture_rate_rel: tolerance / sqrt(3);  gravity_rel: u(g) / g.
struct ClipScaleUncertainty {
  analysis::ScaleUncertainty scale;
  std::vector<std::string> notes;
};
ClipScaleUncertainty ScaleUncertaintyOf(const ClipRequest& request, const calib::Rig& rig, const ClipMeasurement& m);

// A figure's budget under its name in results (e.g. "impact_speed_mps", "cor").
struct NamedBudget {
  std::string figure;
  analysis::FigureBudget budget;
};

// One list per bounce of m.kinematics.impacts (same order): the flight figures, and the best
// law's contact duration and peak force (names "contact_duration_s", "peak_force_n") when a law
// fits, the track's otherwise. The peak force's m g from m.conditions.
// With a rig that carries its uncertainty, the COR from the apex heights gets its rig_scale part
// from the mapping's covariance (calib::MappedSd of sqrt(dh_r / dh_d), the two apex heights and
// the onset point mapped at their pixels): a ratio of heights at different places in the image
// is untouched by a uniform scale error but not by a non-uniform one (measured: 5 um over a
// 300 mm drop at 1 px/mm, 4 sd of that COR). Pixels from the calibrated plane's mapping (a
// marker plane d in front moves them by d / D of their distance from the foot of the camera's
// perpendicular, which does not matter to a sensitivity).
std::vector<std::vector<NamedBudget>> ImpactBudgets(const ClipMeasurement& m, const analysis::ScaleUncertainty& scale,
                                                    const calib::Rig* rig = nullptr);

// The budgets of a law fit's parameters, by their names (analysis/uncertainty_budget.h,
// ParameterDimension; the volumetric law's exponent from its volume at the fit's largest
// deflection). Empty for a failed fit.
std::vector<NamedBudget> ParameterBudgets(const analysis::LawFitResult& fit, const analysis::ScaleUncertainty& scale,
                                          const analysis::DropConditions& conditions);

// The scale inputs of several clips fitted together (a joint fit): the parts the clips share
// (rig scale, capture rate, gravity) as their mean, the marker plane's as the root mean square
// over sqrt(N) (each clip's own estimate), the ruler's flag when every clip had it.
analysis::ScaleUncertainty PooledScaleUncertainty(const std::vector<analysis::ScaleUncertainty>& clips);

}  // namespace dropfit::pipeline
