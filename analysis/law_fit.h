#pragma once
// Contact-law identification: fits of the laws of analysis/contact_law.h to the measured hub
// heights of complete bounces, with Ceres.
//
// Model. Each bounce is a window of the track, from part-way through the falling flight to
// part-way through the rising flight (adjacent windows share no sample). The forward model
// (analysis/forward_model.h, the same code the renderer animates; gravity acts during
// contact) is run from the hub state (height, vertical velocity) at the window start through
// the flight, the contact and the next flight, and evaluated at the window's sample times.
// Unknowns of one fit:
//   * the law's parameters (one set for every bounce of every clip in the fit);
//   * the onset height (hub height at first contact): one for the fit, fixed to a clip's
//     known value when the geometry gives it (floor and free radius), else fitted;
//   * the state at each window start (2 per bounce).
// Cost: sum over all samples of (model height - measured height)^2 (plain least squares:
// the noise is taken as white and equal for all samples). Derivatives: automatic
// differentiation (ceres::Jet) through the integrator, flights and the separation instant.
//
// Internal parameters (what Ceres moves; positivity by reparametrisation):
//   kelvin-voigt   ln k, ln c
//   hunt-crossley  ln F_ref, n, ln alpha   with F_ref = k delta_ref^n, delta_ref the typical
//                  measured maximum deflection (k and n trade off; the force at delta_ref
//                  does not, so the problem is far better conditioned);
//                  kHuntCrossleyExponentMin <= n <= kHuntCrossleyExponentMax as bounds
//   hertz          ln k, ln alpha          (n = 1.5 fixed)
//   bilinear       ln k1, ln k2, ln knee, ln c
//   volumetric     ln kv, ln a
// Reported parameters are the contract's (ParameterNames order); their standard deviations
// follow from the internal covariance by first-order propagation (ISO/IEC Guide 98-3 (GUM),
// 2008, eq. 13).
//
// Uncertainty. The covariance of the internal parameters is s^2 (J^T J)^-1 at the solution
// (ceres::Covariance, dense SVD), with s^2 = RSS / (N - p) the residual variance (ordinary
// nonlinear least squares, e.g. Seber & Wild, Nonlinear Regression, 1989, §2.1; common
// practice). When J^T J is rank-deficient (a parameter the data do not determine, e.g. the
// knee of a bilinear law that never bends), that parameter's SD is infinite, with a warning.
// The linear-algebra steps (this fallback, the propagation, BIC) are declared for their
// unit tests in analysis/law_fit_steps.h.
//
// Model choice. BIC = N ln(RSS / N) + p ln N (Schwarz 1978, Ann. Statist. 6:461-464, for
// Gaussian errors with unknown variance), N the samples, p every fitted unknown (law
// parameters, onset height if fitted, 2 per bounce). Lower is better; a difference above
// ~6 is "strong" evidence (Kass & Raftery 1995, J. Am. Stat. Assoc. 90:773-795, §3.2);
// below 2 the laws are not distinguished by the data. The choice among the laws (a criterion
// that counts correlated residuals, parameters the data do not determine, equivalent nested
// laws) is analysis/law_choice.h.
//
// Robust fit. A few outlying samples (a frame the tracker got wrong by half a pixel) would pull
// the law. When at most 2 % of the samples lie beyond 5 x the clips' noise (FitClip::noise_sd_m,
// median over the clips) from the solution, every sample is weighted by Huber's loss (Huber
// 1964, Ann. Math. Statist. 35:73-101; Ceres' HuberLoss, scale 3 x the noise, as the flight
// fits of analysis/flight_fit.h) and the fit is solved again, reweighted up to 4 times
// (iteratively reweighted least squares). RSS, rms_residual_m, BIC and the covariance are
// then those of the weighted residuals; samples_downweighted counts the samples of less than
// full weight. More samples that far are a law that misfits, left to the law choice.
//
// Correlated residuals. The residuals' lag-1 autocorrelation rho (pooled over the windows)
// gives an effective sample count N_eff = N (1 - rho) / (1 + rho) (analysis/law_choice.h);
// every covariance and SD of the fit is inflated by N / N_eff (variance), so that residuals
// correlated over many frames do not make the fit look N / N_eff times better determined
// than it is.
//
// Failure is data: a fit that does not converge has converged = false; a fit that cannot
// start (no complete bounce, no impact speed) has `failure` set, and so has the volumetric law
// when the tread geometry is unknown (TreadGeometry::unknown): it is then listed with that
// reason and never ranked (a failed fit ranks last and is never the best law). A parameter on one of its
// bounds is named in `bounds_reached` (its SD then holds on the bound's other side only).
// Degenerate data (a single bounce with the onset height fitted, few samples in contact,
// noise comparable with the deflection, a parameter with a relative SD above 50 %) add
// warnings.

#include <limits>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "analysis/contact_law.h"
#include "analysis/fit_initial_guess.h"
#include "analysis/forward_model.h"
#include "analysis/geometry.h"
#include "analysis/impacts.h"
#include "analysis/time_series.h"

namespace ceres {
class CostFunction;
}

namespace dropfit::analysis {

// One bounce's window of the track.
//   bounce_index         the bounce's index in its clip (reported back in `bounces`).
//   start_time_s         window start: the fitted state is the hub state at this time.
//   t_s, y_m             the valid samples of the window, t ascending, all >= start_time_s.
//   start_height_m, start_velocity_mps   starting values for that state (from the flight
//                        parabola), height up [m], velocity up [m/s].
//   figures              law-free impact figures for the law's starting values.
struct FitWindow {
  int bounce_index = 0;
  double start_time_s = 0.0;
  std::vector<double> t_s;
  std::vector<double> y_m;
  double start_height_m = 0.0;
  double start_velocity_mps = 0.0;
  ImpactGuessFigures figures;
};

// One clip's data for the fitter.
//   clip                  clip id (for messages).
//   drop_height_m         nominal drop height (groups clips for the leave-one-height-out test).
//   mass_kg               dropped mass; > 0.
//   windows               complete bounces only, in clip order.
//   known_onset_height_m  from the geometry (floor + free radius): fixed, not fitted.
//   onset_height_guess_m  starting value when it is fitted (the track's estimate); NaN: from
//                         the windows (lowest point + deflection).
//   noise_sd_m            position noise from the kinematics (for warnings); NaN if unknown.
//   onset_prior_sd_m      when > 0 with known_onset_height_m: the known value is not held
//                         fixed but enters as a prior of this standard uncertainty (the
//                         geometry's floor and free-radius tolerance): the onset height is a
//                         fitted unknown and one residual (onset - known) noise / sd joins the
//                         samples' (model - measured), so the prior weighs as a measurement of
//                         that sd would (docs/methods.md §13). NaN or <= 0: held fixed.
struct FitClip {
  std::string clip;
  double drop_height_m = 0.0;
  double mass_kg = 0.0;
  std::vector<FitWindow> windows;
  std::optional<double> known_onset_height_m;
  double onset_height_guess_m = std::numeric_limits<double>::quiet_NaN();
  double noise_sd_m = std::numeric_limits<double>::quiet_NaN();
  double onset_prior_sd_m = std::numeric_limits<double>::quiet_NaN();
};

// True when the clip's onset height is held fixed (known, with no prior sd).
bool OnsetHeldFixed(const FitClip& clip);

// How windows are cut from a segmented track (MakeFitClip).
//   max_flight_samples   at most this many flight samples on each side of a contact; the
//                        flights fix the states and the rebound; [5, 100000].
struct FitWindowOptions {
  int max_flight_samples = 300;
};
std::optional<std::string> ValidateFitWindowOptions(const FitWindowOptions& options);

// Builds the fitter's input from the kinematics (analysis/impacts.h): one window per
// complete bounce; flights shared by two bounces are split at their middle sample. The
// onset height is known when the segmentation's source is geometry. Throws
// std::invalid_argument when the figures do not match the segmentation's bounces.
FitClip MakeFitClip(const std::string& clip, double drop_height_m, double mass_kg, const TimeSeries& series,
                    const Segmentation& segmentation, const std::vector<ImpactFigures>& figures,
                    const FitWindowOptions& options = {});

// Settings of a fit. Ranges in brackets.
//   gravity_mps2          local gravity, acting in flight and in contact [0, 100] m/s^2.
//   tread                 the volumetric law's geometry (MakeTreadGeometry).
//   multi_start           try every start of GuessLawParameters and keep the lowest cost;
//                         false: the first start only.
//   max_iterations        Levenberg-Marquardt iterations per start [1, 1000]: the budget that
//                         decides when a solve stops unconverged (stop_reason "iteration_budget").
//   max_solve_seconds     wall-time guard per solve against a hang (0.1, 86400] s; not a
//                         budget: a solve that reaches it says so (stop_reason "time_guard").
//   function_tolerance    relative cost change that ends a solve (Ceres) (0, 1e-2].
//   parameter_tolerance   relative step size that ends a solve (Ceres) (0, 1e-2].
//   model                 integrator tolerances of the forward model.
//   curve_points          samples of each force-deflection curve [2, 10000].
//   figure_uncertainties  propagate the covariance to the per-bounce figures (costs 2 model
//                         runs per unknown of the bounce).
//   min_contact_samples   fewer samples below the onset height than this in a bounce give a
//                         warning [1, 1000].
struct LawFitOptions {
  double gravity_mps2 = kStandardGravityMps2;
  TreadGeometry tread;
  bool multi_start = true;
  int max_iterations = 60;
  double max_solve_seconds = 300.0;
  double function_tolerance = 1e-12;
  double parameter_tolerance = 1e-12;
  ForwardModelOptions model;  // the defaults: ForFitting() saves ~25 % but its jitter stalls bilinear fits
  int curve_points = 60;
  bool figure_uncertainties = true;
  int min_contact_samples = 6;
  bool robust = true;  // the robust loss of "Robust fit" above; false: plain least squares (a test switch)
};
std::optional<std::string> ValidateLawFitOptions(const LawFitOptions& options);

// Law-dependent figures of one fitted bounce (contract "Impact figures", from the law),
// each with its SD (NaN when not propagated), and the fitted window-start state.
struct BounceFitFigures {
  int clip_index = 0;    // into the fit's clips
  int bounce_index = 0;  // the bounce's index in its clip
  double t_contact_s = 0.0;
  double t_separation_s = 0.0, t_separation_sd_s = 0.0;  // force returns to zero
  double contact_duration_s = 0.0, contact_duration_sd_s = 0.0;
  double peak_force_n = 0.0, peak_force_sd_n = 0.0;
  double max_deflection_m = 0.0, max_deflection_sd_m = 0.0;
  double impact_speed_mps = 0.0;
  double rebound_speed_mps = 0.0;  // at the onset height (e_level of docs/methods.md §3c)
  double cor = 0.0, cor_sd = 0.0;
  double separation_speed_mps = 0.0;
  double start_height_m = 0.0;  // fitted state at the window start
  double start_velocity_mps = 0.0;
  double rms_residual_m = 0.0;  // over this window
  int samples = 0;
  int contact_samples = 0;  // samples below the onset height
};

// The fitted force against deflection over one contact (compression and restitution), for
// the report: deflection_m[i] = onset height - hub height, force_n[i] >= 0, at t_s[i].
struct ForceDeflectionCurve {
  int clip_index = 0;
  int bounce_index = 0;
  std::vector<double> t_s;
  std::vector<double> deflection_m;
  std::vector<double> force_n;
};

struct LawFitResult {
  LawId law = LawId::kKelvinVoigt;
  std::vector<std::string> param_names;               // ParameterNames(law)
  std::vector<double> params;                         // contract units (see the names)
  std::vector<double> param_sd;                       // infinite where the data do not determine it
  std::vector<std::vector<double>> param_covariance;  // of `params`
  double onset_height_m = 0.0;
  double onset_height_sd_m = 0.0;  // 0 when fixed
  bool onset_height_fitted = false;
  // The geometry's onset height and sd when it entered as a prior (FitClip::onset_prior_sd_m).
  std::optional<double> onset_prior_m;
  double onset_prior_sd_m = 0.0;
  std::vector<std::vector<int>> bounces;  // per clip: the bounce indices used
  int samples = 0;
  int free_parameters = 0;
  double rms_residual_m = 0.0;
  double rms_contact_m = 0.0;  // over the samples below the onset height (NaN: none)
  double rms_flight_m = 0.0;   // over the others (NaN: none)
  // 1.4826 x the median |residual|, over all samples and over those in contact (NaN: none):
  // the residuals' spread unmoved by a few outlying frames.
  double robust_sd_m = 0.0;
  double robust_sd_contact_m = 0.0;
  double bic = 0.0;
  int samples_downweighted = 0;  // samples the robust loss gave less than full weight
  // The residuals' lag-1 autocorrelation and integrated correlation time (pooled over
  // windows; analysis/law_choice.h), the effective sample count N / tau it gives and the
  // factor sqrt(N / N_eff) applied to every SD of the fit.
  double residual_lag1_correlation = 0.0;
  double residual_correlation_time = 1.0;
  double effective_samples = 0.0;
  double sd_inflation = 1.0;
  // The ranking criterion of analysis/law_choice.h, set when laws are compared (NaN before).
  double rank_criterion = std::numeric_limits<double>::quiet_NaN();
  bool converged = false;
  // Parameters on a bound of the search, e.g. "n = 0.5 sits on its lower bound (range [0.5,
  // 4])"; empty when none is.
  std::vector<std::string> bounds_reached;
  int iterations = 0;  // over all starts
  int starts = 0;      // multi-start count
  double solve_time_s = 0.0;
  std::string termination;  // Ceres' message of the kept start
  // Why the solve stopped (docs/formats.md, "Fit records"): "converged", "iteration_budget"
  // (max_iterations reached), "time_guard" (max_solve_seconds reached), "solver_failure" (no
  // usable step), or "not_fitted" (failure set).
  std::string stop_reason = "not_fitted";
  std::string formula;     // LawFormula(law, tread)
  std::string start_note;  // how the starting values were obtained
  std::vector<std::string> warnings;
  std::vector<BounceFitFigures> figures;
  std::vector<ForceDeflectionCurve> curves;
  std::optional<std::string> failure;  // no fit could be made; everything else is empty
};

// True when the fit's parameter i has a relative SD above 50 % (or an infinite or NaN one):
// the data do not determine it. Hertz's fixed exponent never is. The warnings of FitLaw and
// the law choice (analysis/law_choice.h) use it.
bool ParameterUndetermined(const LawFitResult& fit, size_t i);

// The law's formula with the units of every symbol, for the result files, e.g.
// "F = k*delta + c*delta_dot; F [N], delta [m] penetration below the onset height, ...".
std::string LawFormula(LawId law, const TreadGeometry& tread);

// Fits one law to the clips: one clip = the contract's per-clip fit, several = a joint fit
// (one set of law parameters, one onset height, per-bounce states). Throws
// std::invalid_argument for invalid options or a clip with a non-positive mass; data
// problems are returned in the result.
LawFitResult FitLaw(LawId law, const std::vector<FitClip>& clips, const LawFitOptions& options);

// The impact of a law with the given parameters, starting from a window-start state: the
// forward model's figures of the first impact after start_time_s (for predictions).
ImpactTruth PredictImpact(LawId law, const std::vector<double>& params, double onset_height_m, double mass_kg,
                          double start_time_s, double start_height_m, double start_velocity_mps,
                          const LawFitOptions& options);

// ---------------------------------------------------------------------------------------
// The pieces of a fit, public for tests (derivative checks) and benchmarks.

// Number of internal (Ceres) law parameters, and the internal values of contract-unit
// parameters (see the header comment; delta_ref_m is used by hunt-crossley only).
int InternalParameterCount(LawId law);
std::vector<double> InternalFromLawParameters(LawId law, const std::vector<double>& params, double delta_ref_m);

// The residual block of one window: parameter blocks (internal law parameters
// [InternalParameterCount], onset height [1], window-start state {height, velocity} [2]),
// residuals (model height - measured height) / residual_scale_m at the window's samples,
// derivatives by automatic differentiation. `window` must outlive the cost function.
std::unique_ptr<ceres::CostFunction> MakeWindowCostFunction(LawId law, const FitWindow& window, double mass_kg,
                                                            double delta_ref_m, double residual_scale_m,
                                                            const LawFitOptions& options);

}  // namespace dropfit::analysis
