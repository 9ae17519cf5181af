#pragma once
// The uncertainty budget of a figure (docs/methods.md §23): its standard uncertainty combined
// from the independent parts that move it, by the law of propagation of uncertainty
// (JCGM 100:2008, "Guide to the expression of uncertainty in measurement" (GUM), eq. 10 for
// independent inputs, eq. 13 where inputs are correlated).
//
// The parts (BudgetPart), each a standard uncertainty in the figure's own unit (c_i u(x_i)):
//   fit           the scatter of the fit the figure comes from (flight parabolas or a law fit),
//                 its covariance inflated by the residuals' correlation time (analysis/impacts.h,
//                 analysis/law_choice.h);
//   onset_height  the onset height's uncertainty (its prior and fit), for the figures read at it;
//   rig_scale     the rig's metres per pixel where the hub moves (calib: the rig's covariance);
//   marker_plane  the marker plane's offset: the gravity ruler's sd, or, where its estimate was
//                 not applied, the estimate and its sd (an uncorrected offset counted as an
//                 uncertainty, GUM F.2.4.5);
//   capture_rate  the camera's frame clock (a stated tolerance, a rectangular half-width:
//                 u = tolerance / sqrt(3), GUM 4.3.7);
//   gravity       the local gravity (given: its sd; not given: standard gravity with the range
//                 of the Earth's surface gravity as a rectangular half-width).
//
// How the scale parts reach a figure: by its dimension. With the mass exact, a figure measured
// from the track scales as L^a T^b (impact speed a = 1, b = -1; COR 0, 0; deflection 1, 0;
// duration 0, 1; force m x acceleration 1, -2; energy 2, -2; a Hunt-Crossley k [N/m^n]
// 1 - n, -2; ...). A relative length error e_L and time error e_T move it by a e_L + b e_T,
// relative. Without the gravity ruler e_L = e_rig + e_plane and e_T = e_rate. With the ruler
// the flights' acceleration is made g: e_L - 2 e_T = e_g + e_plane, so e_L = e_g + e_plane +
// 2 e_rate and the rig's scale drops out; the figure moves by a (e_g + e_plane) + (2a + b) e_rate.
// A figure with an explicit gravity term (peak force = m (a + g)) splits as v = v_track + v_g:
// the scale parts act on v_track, the gravity part on both.
//
// Which parts the clips of one rig share (averaging repeats does not shrink them):
// rig_scale, capture_rate and gravity (SharedBetweenClips). The fit, the onset height and the
// ruler's per-clip estimate are each clip's own.

#include <array>
#include <optional>
#include <string>
#include <vector>

namespace dropfit::analysis {

// GUM eq. 10: u_c = sqrt(sum_i (c_i u_i)^2). Throws std::invalid_argument for sizes that differ
// or a negative or non-finite sd.
double CombineUncorrelated(const std::vector<double>& sensitivities, const std::vector<double>& sds);
// GUM eq. 13: u_c^2 = sum_i sum_j c_i c_j u_i u_j r_ij, r the inputs' correlation coefficients
// (symmetric, unit diagonal, |r_ij| <= 1). Throws std::invalid_argument for sizes that differ, an
// r that is not a correlation matrix, or a negative or non-finite sd. Returns 0 when the
// quadratic form rounds below 0.
double CombineCorrelated(const std::vector<double>& sensitivities, const std::vector<double>& sds,
                         const std::vector<std::vector<double>>& correlation);

enum class BudgetPart { kFit, kOnsetHeight, kRigScale, kMarkerPlane, kCaptureRate, kGravity };
inline constexpr int kBudgetParts = 6;
// "fit", "onset_height", "rig_scale", "marker_plane", "capture_rate", "gravity"
std::string ToString(BudgetPart part);
// Throws std::invalid_argument naming the text and listing the valid ones.
BudgetPart BudgetPartFromString(const std::string& text);
// rig_scale, capture_rate, gravity.
bool SharedBetweenClips(BudgetPart part);

// A figure's budget: each part's contribution (in the figure's unit, >= 0; NaN when the part
// could not be evaluated, e.g. the fit gave no sd; infinite for a parameter the data do not
// determine), their combination (eq. 10) and the part that contributes most.
struct FigureBudget {
  std::array<double, kBudgetParts> parts{};  // indexed by BudgetPart
  double sd = 0.0;                           // combined; NaN when the fit part is NaN
  BudgetPart dominant = BudgetPart::kFit;
  double part(BudgetPart p) const { return parts[static_cast<size_t>(p)]; }
};
// Combines `parts` (NaN ones make the sd NaN) and names the dominant one.
FigureBudget MakeBudget(const std::array<double, kBudgetParts>& parts);

// A figure's dimension in the measured length and time (mass exact): value ~ L^length T^time.
struct Dimension {
  double length = 0.0;
  double time = 0.0;
};

// The clip's scale inputs, each a relative standard uncertainty [-] (gravity: u(g) / g).
struct ScaleUncertainty {
  double rig_scale_rel = 0.0;     // the rig's metres per pixel where the hub moves
  double marker_plane_rel = 0.0;  // the marker plane's offset over the camera distance
  double capture_rate_rel = 0.0;  // the frame clock
  double gravity_rel = 0.0;       // the local gravity
  bool gravity_ruler = false;     // the gravity ruler set the length scale (see above)
};
// Throws std::invalid_argument for a negative or non-finite field.
void ValidateScaleUncertainty(const ScaleUncertainty& scale);

// The budget of a figure of `dimension` with value v = track_part + gravity_part (gravity_part:
// the explicit m g of a force, 0 otherwise), given its fit part and onset-height part [figure
// unit, >= 0 or NaN] and the clip's scales.
FigureBudget BudgetOf(Dimension dimension, double track_part, double fit_sd, double onset_sd,
                      const ScaleUncertainty& scale, double gravity_part = 0.0);

// The dimension of a contact-law parameter by its name in results (analysis/contact_law.h):
// k_n_per_m, k1_n_per_m, k2_n_per_m (0, -2); c_ns_per_m (0, -1); k of hertz and hunt-crossley
// [N/m^n] (1 - n, -2), n (0, 0); alpha_s_per_m, a_s_per_m (-1, 1); knee_m (1, 0);
// kv_n_per_m3 (1 - p, -2) with p = d ln V / d ln delta of the law's interpenetration volume at
// the measured deflections (`volume_exponent`; 3 for k3_n_per_m3). Nothing for an unknown name.
std::optional<Dimension> ParameterDimension(const std::string& name, double hertz_exponent_n,
                                            double volume_exponent = 2.0);

// The uncertainty of the mean of N figures of clips of one rig, each with its budget
// (docs/methods.md §23, "Per-height means"): the parts the clips share are fully correlated
// between clips (GUM eq. 13 with r = 1: the mean's part is the mean of the parts); the clips'
// own parts are independent, their mean's part sqrt(sum u_i^2) / N, and the scatter of the
// figures over the repeats s / sqrt(N) (N >= 2) stands in for it when larger. Returns the
// mean's budget; `spread_sd` is the sd of the figures over the repeats (NaN for N < 2).
struct MeanBudget {
  FigureBudget budget;              // parts of the mean; the fit part holds the clips' own parts
  double spread_sd = 0.0;           // sd of the figures over the repeats; NaN for N < 2
  double repeats_sd_of_mean = 0.0;  // spread_sd / sqrt(N); NaN for N < 2
};
MeanBudget MeanOf(const std::vector<double>& values, const std::vector<FigureBudget>& budgets);

}  // namespace dropfit::analysis
