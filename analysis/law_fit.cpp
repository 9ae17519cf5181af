#include "analysis/law_fit.h"

#include <ceres/ceres.h>

#include <Eigen/Dense>
#include <algorithm>
#include <array>
#include <chrono>
#include <cmath>
#include <limits>
#include <memory>
#include <numeric>
#include <optional>
#include <sstream>
#include <stdexcept>

#include "analysis/flight_fit.h"
#include "analysis/law_choice.h"
#include "analysis/law_fit_steps.h"

namespace dropfit::analysis {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
// Iterations each start of a multi-start gets before the best one is continued.
constexpr int kScreeningIterations = 8;
constexpr double kInf = std::numeric_limits<double>::infinity();

// ---------------------------------------------------------------------------------------
// Internal parametrisation (see the header).

int InternalDim(LawId law) {
  switch (law) {
    case LawId::kKelvinVoigt:
      return 2;
    case LawId::kHuntCrossley:
      return 3;
    case LawId::kHertz:
      return 2;
    case LawId::kBilinear:
      return 4;
    case LawId::kVolumetric:
      return 2;
    case LawId::kBottoming:  // never fitted (FitLaw refuses it)
      return 0;
  }
  return 0;
}

template <typename T>
void ToLawParams(LawId law, const T* x, double delta_ref_m, T* p) {
  using std::exp;
  switch (law) {
    case LawId::kKelvinVoigt:
    case LawId::kVolumetric:
      p[0] = exp(x[0]);
      p[1] = exp(x[1]);
      return;
    case LawId::kHuntCrossley:
      p[0] = exp(x[0] - x[1] * std::log(delta_ref_m));
      p[1] = x[1];
      p[2] = exp(x[2]);
      return;
    case LawId::kHertz:
      p[0] = exp(x[0]);
      p[1] = T(1.5);
      p[2] = exp(x[1]);
      return;
    case LawId::kBilinear:
      for (int i = 0; i < 4; ++i) p[i] = exp(x[i]);
      return;
    case LawId::kBottoming:  // never fitted
      return;
  }
}

std::vector<double> FromLawParams(LawId law, const std::vector<double>& p, double delta_ref_m) {
  switch (law) {
    case LawId::kKelvinVoigt:
    case LawId::kVolumetric:
      return {std::log(p[0]), std::log(p[1])};
    case LawId::kHuntCrossley:
      return {std::log(p[0]) + p[1] * std::log(delta_ref_m), p[1], std::log(p[2])};
    case LawId::kHertz:
      return {std::log(p[0]), std::log(p[2])};
    case LawId::kBilinear:
      return {std::log(p[0]), std::log(p[1]), std::log(p[2]), std::log(p[3])};
    case LawId::kBottoming:  // never fitted
      return {};
  }
  return {};
}

// d params / d x (ParameterCount(law) x InternalDim(law)).
Eigen::MatrixXd LawParamJacobian(LawId law, const std::vector<double>& p, double delta_ref_m) {
  const int np = ParameterCount(law);
  const int nx = InternalDim(law);
  Eigen::MatrixXd g = Eigen::MatrixXd::Zero(np, nx);
  switch (law) {
    case LawId::kKelvinVoigt:
    case LawId::kVolumetric:
    case LawId::kBilinear:
      for (int i = 0; i < np; ++i) g(i, i) = p[i];
      break;
    case LawId::kHuntCrossley:
      g(0, 0) = p[0];
      g(0, 1) = -p[0] * std::log(delta_ref_m);
      g(1, 1) = 1.0;
      g(2, 2) = p[2];
      break;
    case LawId::kHertz:
      g(0, 0) = p[0];
      g(2, 1) = p[2];
      break;
    case LawId::kBottoming:  // never fitted
      break;
  }
  return g;
}

// ---------------------------------------------------------------------------------------
// Cost of one window.

struct WindowData {
  ContactSetup setup;
  ForwardModelOptions model;
  double delta_ref_m = 0.0;
  double inv_scale = 1.0;  // residuals are (model - data) / scale, scale ~ the noise
  const FitWindow* window = nullptr;
  // Per-sample square roots of the robust weights (law_fit.h, "Robust fit"); nothing: 1.
  const std::vector<double>* sqrt_weights = nullptr;
};

template <int kDim>
struct WindowCost {
  explicit WindowCost(WindowData d) : data(std::move(d)) {}
  template <typename T>
  bool operator()(const T* x, const T* onset, const T* state, T* residuals) const {
    T params[kMaxLawParameters];
    ToLawParams(data.setup.law, x, data.delta_ref_m, params);
    const FitWindow& w = *data.window;
    const int n = static_cast<int>(w.t_s.size());
    const SimulationStatus status = SimulateHubHeights(data.setup, params, onset[0], w.start_time_s, state[0], state[1],
                                                       w.t_s.data(), n, residuals, nullptr, data.model);
    if (status != SimulationStatus::kOk) return false;
    for (int i = 0; i < n; ++i) {
      residuals[i] = (residuals[i] - w.y_m[i]) * data.inv_scale;
      if (data.sqrt_weights) residuals[i] *= (*data.sqrt_weights)[static_cast<size_t>(i)];
      if (!std::isfinite(detail::ScalarValue(residuals[i]))) return false;
    }
    return true;
  }
  WindowData data;
};

// True when the clip's geometric onset height enters as a prior (FitClip::onset_prior_sd_m).
bool HasOnsetPrior(const FitClip& clip) { return clip.known_onset_height_m && !OnsetHeldFixed(clip); }

// The onset height's prior: (onset - value) weight, weight = noise / (sd x residual scale),
// so that it weighs as one measured sample of that sd against the samples' noise.
struct OnsetPriorCost {
  double value_m;
  double weight;
  template <typename T>
  bool operator()(const T* onset, T* residual) const {
    residual[0] = (onset[0] - value_m) * weight;
    return true;
  }
};

ceres::CostFunction* MakeWindowCost(WindowData data) {
  const int n = static_cast<int>(data.window->t_s.size());
  switch (InternalDim(data.setup.law)) {
    case 2:
      return new ceres::AutoDiffCostFunction<WindowCost<2>, ceres::DYNAMIC, 2, 1, 2>(new WindowCost<2>(data), n);
    case 3:
      return new ceres::AutoDiffCostFunction<WindowCost<3>, ceres::DYNAMIC, 3, 1, 2>(new WindowCost<3>(data), n);
    case 4:
      return new ceres::AutoDiffCostFunction<WindowCost<4>, ceres::DYNAMIC, 4, 1, 2>(new WindowCost<4>(data), n);
    default:
      break;
  }
  assert(false && "law dimension without a cost instantiation");
  return nullptr;
}

// The unknowns of one start, at stable addresses for the Ceres problem.
struct Unknowns {
  std::vector<double> x;
  double onset = 0.0;
  std::vector<double> known_onsets;               // per clip (used where known)
  std::vector<std::array<double, 2>> states;      // per window, flattened over clips
  std::vector<std::vector<double>> sqrt_weights;  // per window and sample (robust fit)
};

struct WindowRef {
  int clip = 0;
  const FitWindow* window = nullptr;
};

struct Solved {
  std::unique_ptr<Unknowns> unknowns;
  std::unique_ptr<ceres::Problem> problem;
  ceres::Solver::Summary summary;
};

double Median(std::vector<double> v) {
  v.erase(std::remove_if(v.begin(), v.end(), [](double a) { return !std::isfinite(a); }), v.end());
  if (v.empty()) return kNaN;
  std::sort(v.begin(), v.end());
  const size_t m = v.size() / 2;
  return v.size() % 2 ? v[m] : 0.5 * (v[m - 1] + v[m]);
}

std::string FormatG(double v, int digits = 4) {
  std::ostringstream s;
  s.precision(digits);
  s << v;
  return s.str();
}

// First impact of a simulation that starts at the window start.
struct WindowSimulation {
  Trajectory trajectory;
  ImpactTruth impact;
  bool ok = false;
};

WindowSimulation SimulateWindow(const ContactSetup& setup, const std::vector<double>& params, double onset_m,
                                double t0_s, double y0_m, double v0_mps, double end_s,
                                const ForwardModelOptions& model) {
  WindowSimulation out;
  DropScenario scenario;
  scenario.setup = setup;
  scenario.law_params = params;
  scenario.onset_height_m = onset_m;
  scenario.start_time_s = t0_s;
  scenario.start_height_m = y0_m;
  scenario.start_velocity_mps = v0_mps;
  scenario.end_time_s = end_s;
  if (Validate(scenario)) return out;
  try {
    out.trajectory = SimulateDrop(scenario, model);
  } catch (const std::exception&) {
    return out;
  }
  for (const ImpactTruth& impact : out.trajectory.impacts()) {
    if (std::isfinite(impact.t_contact_s)) {
      out.impact = impact;
      out.ok = true;
      break;
    }
  }
  return out;
}

// The figures whose SDs are propagated, in a fixed order.
constexpr int kPropagatedFigures = 5;
std::array<double, kPropagatedFigures> PropagatedFigures(const ImpactTruth& i) {
  return {i.t_separation_s, i.contact_duration_s, i.peak_force_n, i.max_deflection_m, i.cor};
}

// Residual unit for Ceres' tolerances [m]; cancels in the covariance.
constexpr double kResidualScaleM = 1e-4;

ContactSetup SetupOf(LawId law, const LawFitOptions& options, double mass_kg) {
  ContactSetup setup;
  setup.law = law;
  setup.tread = options.tread;
  setup.mass_kg = mass_kg;
  setup.gravity_mps2 = options.gravity_mps2;
  return setup;
}

// ---------------------------------------------------------------------------------------
// The steps of FitLaw, in order (the linear algebra is in analysis/law_fit_steps.h).

// The windows with samples to fit, in clip order; (*bounces)[clip] gets the bounce indices
// used. Throws std::invalid_argument for a clip without a positive mass.
std::vector<WindowRef> CollectWindows(const std::vector<FitClip>& clips, std::vector<std::vector<int>>* bounces) {
  std::vector<WindowRef> windows;
  for (size_t c = 0; c < clips.size(); ++c) {
    if (!(clips[c].mass_kg > 0.0) || !std::isfinite(clips[c].mass_kg)) {
      throw std::invalid_argument("FitLaw: clip '" + clips[c].clip + "' has mass " + std::to_string(clips[c].mass_kg) +
                                  " kg; give the dropped mass (> 0)");
    }
    bounces->emplace_back();
    for (const FitWindow& w : clips[c].windows) {
      if (w.t_s.size() < 3 || w.t_s.size() != w.y_m.size()) continue;
      windows.push_back({static_cast<int>(c), &w});
      bounces->back().push_back(w.bounce_index);
    }
  }
  return windows;
}

// Where the solver starts.
//   onset_free     some clip has no known onset height: one shared unknown;
//   onset_guess_m  its starting value (the clips' guesses, else lowest point + deflection);
//   delta_ref_m    hunt-crossley's reference deflection (median maximum deflection, 1 cm
//                  when unknown);
//   starts, note   GuessLawParameters' starts (contract units; the first only without
//                  multi_start) and how they were obtained;
//   failure        set when no start can be made.
struct StartingValues {
  bool onset_free = false;
  double onset_guess_m = kNaN;
  double delta_ref_m = 0.0;
  std::vector<std::vector<double>> starts;
  std::string note;
  std::optional<std::string> failure;
};

StartingValues ChooseStartingValues(LawId law, const std::vector<FitClip>& clips, const std::vector<WindowRef>& windows,
                                    const LawFitOptions& options) {
  StartingValues out;
  // Onset height: fixed per clip where known, else one shared unknown.
  std::vector<double> onset_guesses;
  for (const FitClip& clip : clips) {
    if (OnsetHeldFixed(clip)) continue;
    out.onset_free = true;
    if (clip.known_onset_height_m) {
      onset_guesses.push_back(*clip.known_onset_height_m);  // the prior's value
    } else if (std::isfinite(clip.onset_height_guess_m)) {
      onset_guesses.push_back(clip.onset_height_guess_m);
    }
  }
  // Starting figures: the median over bounces of each figure.
  std::vector<double> v_in, cor, t_c, defl, rest_guess;
  for (const WindowRef& ref : windows) {
    const ImpactGuessFigures& f = ref.window->figures;
    v_in.push_back(f.impact_speed_mps);
    cor.push_back(f.cor);
    t_c.push_back(f.contact_duration_s);
    defl.push_back(f.max_deflection_m);
    if (out.onset_free && !OnsetHeldFixed(clips[ref.clip]) && std::isfinite(f.max_deflection_m)) {
      const auto lowest = std::min_element(ref.window->y_m.begin(), ref.window->y_m.end());
      rest_guess.push_back(*lowest + f.max_deflection_m);
    }
  }
  ImpactGuessFigures median_figures{Median(v_in), Median(cor), Median(t_c), Median(defl)};
  double onset_guess = Median(onset_guesses);
  if (out.onset_free && !std::isfinite(onset_guess)) onset_guess = Median(rest_guess);
  if (out.onset_free && !std::isfinite(onset_guess)) {
    out.failure = "the onset height is neither known nor estimated, and no deflection gives a start for it";
    return out;
  }
  out.onset_guess_m = onset_guess;
  const double mass_ref = clips[windows.front().clip].mass_kg;
  const InitialGuessResult guess = GuessLawParameters(law, median_figures, mass_ref, options.tread);
  if (!guess.guess) {
    out.failure = "no starting values: " + guess.failure;
    return out;
  }
  out.note = guess.guess->note;
  double delta_ref = median_figures.max_deflection_m;
  if (!(delta_ref > 0.0) || !std::isfinite(delta_ref)) delta_ref = 0.01;  // any positive value works; 1 cm is typical
  out.delta_ref_m = delta_ref;
  out.starts = guess.guess->starts;
  if (!options.multi_start) out.starts.resize(1);
  return out;
}

// The fixed inputs of one fit, shared by its steps.
struct FitInputs {
  LawId law;
  const std::vector<FitClip>& clips;
  const std::vector<WindowRef>& windows;
  const LawFitOptions& options;
  const StartingValues& start;
};

// Bounds keep the integrator away from absurd laws; they are far from any real value.
void SetBounds(LawId law, double delta_ref, Unknowns& u, ceres::Problem* problem) {
  const int dim = InternalDim(law);
  for (int j = 0; j < dim; ++j) {
    const bool is_exponent = law == LawId::kHuntCrossley && j == 1;
    if (is_exponent) {
      problem->SetParameterLowerBound(u.x.data(), j, kHuntCrossleyExponentMin);
      problem->SetParameterUpperBound(u.x.data(), j, kHuntCrossleyExponentMax);
    } else {
      problem->SetParameterLowerBound(u.x.data(), j, u.x[j] - 25.0);
      problem->SetParameterUpperBound(u.x.data(), j, u.x[j] + 12.0);
    }
  }
  if (law == LawId::kBilinear) problem->SetParameterUpperBound(u.x.data(), 2, std::log(20.0 * delta_ref));
}

// The problem of one start: the unknowns at their starting values (law parameters
// `start_params` in contract units), one residual block per window, the bounds.
Solved BuildProblem(const FitInputs& in, const std::vector<double>& start_params) {
  Solved s;
  s.unknowns = std::make_unique<Unknowns>();
  Unknowns& u = *s.unknowns;
  u.x = FromLawParams(in.law, start_params, in.start.delta_ref_m);
  u.onset = in.start.onset_free ? in.start.onset_guess_m : 0.0;
  for (const FitClip& clip : in.clips) u.known_onsets.push_back(clip.known_onset_height_m.value_or(kNaN));
  for (const WindowRef& ref : in.windows)
    u.states.push_back({ref.window->start_height_m, ref.window->start_velocity_mps});
  s.problem = std::make_unique<ceres::Problem>();
  for (const WindowRef& ref : in.windows) u.sqrt_weights.emplace_back(ref.window->t_s.size(), 1.0);
  for (size_t i = 0; i < in.windows.size(); ++i) {
    const WindowRef& ref = in.windows[i];
    WindowData d;
    d.setup = SetupOf(in.law, in.options, in.clips[ref.clip].mass_kg);
    d.model = in.options.model;
    d.delta_ref_m = in.start.delta_ref_m;
    d.inv_scale = 1.0 / kResidualScaleM;
    d.window = ref.window;
    d.sqrt_weights = &u.sqrt_weights[i];  // sized before the loop: the pointers stay valid
    const bool known = OnsetHeldFixed(in.clips[ref.clip]);
    double* onset_block = known ? &u.known_onsets[ref.clip] : &u.onset;
    s.problem->AddResidualBlock(MakeWindowCost(d), nullptr, u.x.data(), onset_block, u.states[i].data());
    if (known) s.problem->SetParameterBlockConstant(onset_block);
  }
  // The geometry's onset heights given as priors, after every window's samples.
  const double noise = TrackNoise(in.clips);
  for (const FitClip& clip : in.clips) {
    if (!HasOnsetPrior(clip)) continue;
    const double weight = (noise > 0.0 ? noise : kResidualScaleM) / (clip.onset_prior_sd_m * kResidualScaleM);
    s.problem->AddResidualBlock(
        new ceres::AutoDiffCostFunction<OnsetPriorCost, 1, 1>(new OnsetPriorCost{*clip.known_onset_height_m, weight}),
        nullptr, &u.onset);
  }
  SetBounds(in.law, in.start.delta_ref_m, u, s.problem.get());
  return s;
}

ceres::Solver::Options SolverOptions(const LawFitOptions& options) {
  ceres::Solver::Options solver;
  solver.linear_solver_type = ceres::DENSE_QR;
  solver.max_num_iterations = options.max_iterations;
  solver.max_solver_time_in_seconds = options.max_solve_seconds;
  solver.function_tolerance = options.function_tolerance;
  solver.parameter_tolerance = options.parameter_tolerance;
  solver.gradient_tolerance = 1e-16;
  solver.num_threads = 1;
  solver.logging_type = ceres::SILENT;
  solver.minimizer_progress_to_stdout = false;
  return solver;
}

// The multi-start solve: with several starts, each gets kScreeningIterations first and only
// the lowest final cost is run to the end. Adds the iterations and starts to *result.
// Nothing when no start gives a usable solution.
std::optional<Solved> SolveMultiStart(const FitInputs& in, LawFitResult* result) {
  const std::vector<std::vector<double>>& starts = in.start.starts;
  const ceres::Solver::Options solver = SolverOptions(in.options);
  std::optional<Solved> best;
  for (const std::vector<double>& start : starts) {
    Solved s = BuildProblem(in, start);
    ceres::Solver::Options first = solver;
    if (starts.size() > 1) first.max_num_iterations = std::min(solver.max_num_iterations, kScreeningIterations);
    ceres::Solve(first, s.problem.get(), &s.summary);
    result->iterations += static_cast<int>(s.summary.iterations.size()) - 1;
    ++result->starts;
    if (!s.summary.IsSolutionUsable()) continue;
    if (!best || s.summary.final_cost < best->summary.final_cost) best = std::move(s);
  }
  if (!best) return best;
  if (starts.size() > 1 && best->summary.termination_type == ceres::NO_CONVERGENCE) {
    ceres::Solver::Options rest = solver;
    rest.max_num_iterations = std::max(1, solver.max_num_iterations - kScreeningIterations);
    ceres::Solve(rest, best->problem.get(), &best->summary);
    result->iterations += static_cast<int>(best->summary.iterations.size()) - 1;
  }
  return best;
}

// The contract parameter that internal parameter j moves (law_fit.h, "Internal parameters").
int ParameterOfInternal(LawId law, int j) { return law == LawId::kHertz && j == 1 ? 2 : j; }

// The bounds the kept solution sits on (within 1e-9 of the internal value's scale), each
// named with the parameter's value and the range, for LawFitResult::bounds_reached.
std::vector<std::string> BoundsReached(LawId law, const Solved& best, const std::vector<double>& params) {
  std::vector<std::string> out;
  const Unknowns& u = *best.unknowns;
  const std::vector<std::string>& names = ParameterNames(law);
  for (int j = 0; j < InternalDim(law); ++j) {
    const double x = u.x[j];
    const double lower = best.problem->GetParameterLowerBound(u.x.data(), j);
    const double upper = best.problem->GetParameterUpperBound(u.x.data(), j);
    const double tolerance = 1e-9 * std::max(1.0, std::abs(x));
    const bool at_lower = x - lower <= tolerance, at_upper = upper - x <= tolerance;
    if (!at_lower && !at_upper) continue;
    const int i = ParameterOfInternal(law, j);
    std::string text =
        names[i] + " = " + FormatG(params[i]) + " sits on its " + (at_lower ? "lower" : "upper") + " bound";
    if (law == LawId::kHuntCrossley && j == 1) {
      text += " (range [" + FormatG(kHuntCrossleyExponentMin) + ", " + FormatG(kHuntCrossleyExponentMax) + "])";
    } else if (law == LawId::kBilinear && j == 2 && at_upper) {
      text += " (20 times the typical measured deflection)";
    } else {
      text += at_lower ? " (e^-25 times its starting value)" : " (e^12 times its starting value)";
    }
    out.push_back(text);
  }
  return out;
}

// The robust loss of the law fits (law_fit.h, "Robust fit"): when a few samples (at most
// kMaxOutlierFraction of them) lie beyond kOutlierSigmas x the clips' noise from the kept
// solution, every sample gets Huber's weight rho'(r^2) (Ceres' HuberLoss, scale
// kHuberScaleSigmas x the noise) and the fit is solved again from there, up to
// kReweightRounds times. More samples that far are a law that misfits, not outliers: left to
// the law choice.
constexpr double kOutlierSigmas = 5.0;
constexpr double kMaxOutlierFraction = 0.02;
constexpr int kReweightRounds = 4;

void ReweightOutliers(const FitInputs& in, Solved& best, LawFitResult* result) {
  const double noise = TrackNoise(in.clips);
  if (!in.options.robust || !(noise > 0.0)) return;
  const double delta = kHuberScaleSigmas * noise / kResidualScaleM;  // in units of kResidualScaleM
  Unknowns& u = *best.unknowns;
  for (int round = 0; round < kReweightRounds; ++round) {
    std::vector<double> r;
    if (!best.problem->Evaluate(ceres::Problem::EvaluateOptions(), nullptr, &r, nullptr, nullptr)) return;
    size_t offset = 0;
    int far = 0, total = 0, downweighted = 0;
    double change = 0.0;
    for (std::vector<double>& sw : u.sqrt_weights) {
      for (double& w : sw) {
        const double plain = r[offset++] / w;  // in units of kResidualScaleM
        ++total;
        if (std::abs(plain) * kResidualScaleM > kOutlierSigmas * noise) ++far;
        const double next = std::sqrt(HuberWeight(plain, delta));
        change = std::max(change, std::abs(next - w));
        w = next;
        downweighted += next < 1.0 ? 1 : 0;
      }
    }
    if (round == 0 && (far == 0 || far > kMaxOutlierFraction * total)) {
      for (std::vector<double>& sw : u.sqrt_weights) std::fill(sw.begin(), sw.end(), 1.0);
      return;
    }
    result->samples_downweighted = downweighted;
    if (change < 1e-6) return;
    ceres::Solve(SolverOptions(in.options), best.problem.get(), &best.summary);
    result->iterations += static_cast<int>(best.summary.iterations.size()) - 1;
  }
}

// Convergence, parameters, residuals and BIC of the kept solution.
void ReportSolution(const FitInputs& in, const Solved& best, LawFitResult* result) {
  const Unknowns& u = *best.unknowns;
  const ceres::Solver::Summary& summary = best.summary;
  result->converged = summary.termination_type == ceres::CONVERGENCE;
  result->termination = summary.message;
  if (result->converged) {
    result->stop_reason = "converged";
  } else if (summary.termination_type == ceres::NO_CONVERGENCE) {
    // Ceres ends an unconverged solve at its iteration or its time limit; the message says which.
    result->stop_reason = summary.message.find("time") != std::string::npos ? "time_guard" : "iteration_budget";
  } else {
    result->stop_reason = "solver_failure";
  }
  if (!result->converged) result->warnings.push_back("the fit did not converge: " + summary.message);

  std::vector<double> x_params(kMaxLawParameters);
  ToLawParams(in.law, u.x.data(), in.start.delta_ref_m, x_params.data());
  x_params.resize(ParameterCount(in.law));
  result->params = x_params;
  result->bounds_reached = BoundsReached(in.law, best, x_params);
  result->onset_height_fitted = in.start.onset_free;
  for (const FitClip& clip : in.clips) {
    if (HasOnsetPrior(clip)) {
      result->onset_prior_m = clip.known_onset_height_m;
      result->onset_prior_sd_m = clip.onset_prior_sd_m;
    }
  }
  result->onset_height_m =
      in.start.onset_free ? u.onset : in.clips[in.windows.front().clip].known_onset_height_m.value();
  for (const WindowRef& ref : in.windows) result->samples += static_cast<int>(ref.window->t_s.size());
  result->free_parameters =
      InternalDim(in.law) + (in.start.onset_free ? 1 : 0) + 2 * static_cast<int>(in.windows.size());
  const double rss = 2.0 * summary.final_cost * kResidualScaleM * kResidualScaleM;
  const int n = result->samples;
  result->rms_residual_m = std::sqrt(rss / n);
  result->bic = detail::BayesianInformationCriterion(rss, n, result->free_parameters);
}

// Covariance of the internal unknowns, in the order law x, onset (if free), then each
// window's state (height, velocity) from state_offset on; NaN where unknown, and, where
// undetermined, NaN rows and columns with an infinite variance.
struct InternalCovariance {
  Eigen::MatrixXd cov;
  std::vector<bool> undetermined;
  bool have = false;
  int state_offset = 0;
};

// s2 (J^T J)^-1 by ceres::Covariance (dense SVD) into *cov; false when J^T J is
// rank-deficient (or the computation fails).
bool CeresCovariance(ceres::Problem* problem, const std::vector<const double*>& blocks, int total, double s2,
                     Eigen::MatrixXd* cov) {
  ceres::Covariance::Options copt;
  copt.algorithm_type = ceres::DENSE_SVD;
  copt.min_reciprocal_condition_number = 1e-14;
  copt.null_space_rank = 0;
  copt.apply_loss_function = false;
  copt.num_threads = 1;
  ceres::Covariance covariance(copt);
  Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor> c(total, total);
  if (!(covariance.Compute(blocks, problem) && covariance.GetCovarianceMatrix(blocks, c.data()))) return false;
  *cov = s2 * c;
  return true;
}

// The Jacobian of all residuals at the current unknowns, columns in the order of `blocks`;
// nothing when the evaluation fails.
std::optional<Eigen::MatrixXd> JacobianAt(ceres::Problem* problem, const std::vector<const double*>& blocks) {
  ceres::Problem::EvaluateOptions eo;
  std::vector<double*> mutable_blocks;
  for (const double* b : blocks) mutable_blocks.push_back(const_cast<double*>(b));
  eo.parameter_blocks = mutable_blocks;
  ceres::CRSMatrix crs;
  if (!problem->Evaluate(eo, nullptr, nullptr, nullptr, &crs)) return std::nullopt;
  Eigen::MatrixXd j = Eigen::MatrixXd::Zero(crs.num_rows, crs.num_cols);
  for (int r = 0; r < crs.num_rows; ++r)
    for (int k = crs.rows[r]; k < crs.rows[r + 1]; ++k) j(r, crs.cols[k]) = crs.values[k];
  return j;
}

// The covariance step: s^2 (J^T J)^-1 with s^2 = RSS / dof (law_fit.h, "Uncertainty"), or,
// when J^T J is rank-deficient, its pseudo-inverse with the undetermined unknowns marked.
// Warnings for the fallback and for dof <= 0 (no covariance) go to *warnings.
InternalCovariance ComputeInternalCovariance(Solved& best, int dim, bool onset_free, int dof,
                                             std::vector<std::string>* warnings) {
  Unknowns& u = *best.unknowns;
  std::vector<const double*> blocks{u.x.data()};
  int total = dim;
  if (onset_free) {
    blocks.push_back(&u.onset);
    total += 1;
  }
  InternalCovariance out;
  out.state_offset = total;
  for (auto& st : u.states) {
    blocks.push_back(st.data());
    total += 2;
  }
  out.cov = Eigen::MatrixXd::Constant(total, total, kNaN);
  out.undetermined.assign(total, false);
  if (dof <= 0) {
    warnings->push_back("no more samples than unknowns: no uncertainty can be estimated");
    return out;
  }
  // s2 is in units of scale_m^2 and the Jacobian in 1/scale_m: the covariance is in metres.
  const double s2 = 2.0 * best.summary.final_cost / dof;
  if (CeresCovariance(best.problem.get(), blocks, total, s2, &out.cov)) {
    out.have = true;
    return out;
  }
  if (const std::optional<Eigen::MatrixXd> j = JacobianAt(best.problem.get(), blocks)) {
    detail::PseudoInverseCovariance p = detail::CovarianceByPseudoInverse(*j, s2);
    out.cov = std::move(p.covariance);
    out.undetermined = std::move(p.undetermined);
    out.have = true;
    warnings->push_back(
        "the data do not determine every unknown (rank-deficient Jacobian): "
        "their SDs are reported as infinite");
  }
  return out;
}

// The law parameters' covariance and SDs, and the onset height's SD, from the internal
// covariance (first-order propagation, law_fit.h).
void ReportParameterUncertainty(const FitInputs& in, const InternalCovariance& ic, LawFitResult* result) {
  const LawId law = in.law;
  const int dim = InternalDim(law);
  const int np = ParameterCount(law);
  const Eigen::MatrixXd g = LawParamJacobian(law, result->params, in.start.delta_ref_m);
  const Eigen::MatrixXd cov_x = ic.cov.topLeftCorner(dim, dim);
  const Eigen::MatrixXd cov_p = detail::LawParameterCovariance(g, cov_x, ic.undetermined, ic.have);
  result->param_sd.resize(np);
  result->param_covariance.assign(np, std::vector<double>(np, kNaN));
  for (int i = 0; i < np; ++i) {
    result->param_sd[i] = ic.have ? std::sqrt(std::max(0.0, cov_p(i, i))) : kInf;
    if (std::isnan(cov_p(i, i))) result->param_sd[i] = kInf;
    for (int j = 0; j < np; ++j) result->param_covariance[i][j] = cov_p(i, j);
  }
  if (law == LawId::kHertz) result->param_sd[1] = 0.0;  // fixed exponent
  result->onset_height_sd_m = in.start.onset_free ? (ic.have ? std::sqrt(ic.cov(dim, dim)) : kInf) : 0.0;
}

// The force against deflection over the contact of a simulated window.
ForceDeflectionCurve ContactCurve(const WindowSimulation& sim, double onset, int curve_points, int clip_index,
                                  int bounce_index) {
  const ImpactTruth& t = sim.impact;
  ForceDeflectionCurve curve;
  curve.clip_index = clip_index;
  curve.bounce_index = bounce_index;
  const double t_end = std::isfinite(t.t_separation_s) ? t.t_separation_s : t.t_contact_s + 0.0;
  for (int k = 0; k < curve_points && t_end > t.t_contact_s; ++k) {
    const double tk = t.t_contact_s + (t_end - t.t_contact_s) * k / (curve_points - 1);
    const HubState st = sim.trajectory.At(tk);
    curve.t_s.push_back(tk);
    curve.deflection_m.push_back(onset - st.y_m);
    curve.force_n.push_back(st.contact_force_n);
  }
  return curve;
}

// What one window's figure SDs are propagated from: the indices of (law x, onset if fitted
// for this clip, this window's state) in the internal covariance, and their sub-matrix.
struct FigureUnknowns {
  std::vector<int> idx;
  Eigen::MatrixXd sub;
  bool finite = true;
  bool onset_unknown = false;
};

FigureUnknowns UnknownsOfWindow(const FitInputs& in, const InternalCovariance& ic, size_t i) {
  const int dim = InternalDim(in.law);
  FigureUnknowns out;
  out.onset_unknown = in.start.onset_free && !OnsetHeldFixed(in.clips[in.windows[i].clip]);
  for (int j = 0; j < dim; ++j) out.idx.push_back(j);
  if (out.onset_unknown) out.idx.push_back(dim);
  out.idx.push_back(ic.state_offset + 2 * static_cast<int>(i));
  out.idx.push_back(ic.state_offset + 2 * static_cast<int>(i) + 1);
  const int m = static_cast<int>(out.idx.size());
  out.sub.resize(m, m);
  for (int a = 0; a < m; ++a)
    for (int b = 0; b < m; ++b) {
      out.sub(a, b) = ic.cov(out.idx[a], out.idx[b]);
      out.finite = out.finite && std::isfinite(out.sub(a, b));
    }
  return out;
}

// d (PropagatedFigures) / d (the unknowns of `fu`) by central differences with steps of
// 1e-3 SD (an unknown with zero variance keeps a zero column); nothing when a perturbed
// model run has no complete impact.
std::optional<Eigen::MatrixXd> FigureJacobian(const FitInputs& in, const Unknowns& u, size_t i,
                                              const FigureUnknowns& fu, const ContactSetup& setup, double onset,
                                              double end_s) {
  const int dim = InternalDim(in.law);
  const int np = ParameterCount(in.law);
  const FitWindow& w = *in.windows[i].window;
  const std::vector<int>& idx = fu.idx;
  const int m = static_cast<int>(idx.size());
  Eigen::MatrixXd jac = Eigen::MatrixXd::Zero(kPropagatedFigures, m);
  for (int a = 0; a < m; ++a) {
    const double h = 1e-3 * std::sqrt(std::max(fu.sub(a, a), 0.0));
    if (!(h > 0.0)) continue;
    std::array<std::array<double, kPropagatedFigures>, 2> val{};
    for (int side = 0; side < 2; ++side) {
      std::vector<double> xx = u.x;
      double on = onset;
      double y0 = u.states[i][0], v0 = u.states[i][1];
      const double step = side == 0 ? h : -h;
      const int k = idx[a];
      if (k < dim)
        xx[k] += step;
      else if (k == dim && fu.onset_unknown)
        on += step;
      else if (k == idx[m - 2])
        y0 += step;
      else
        v0 += step;
      std::vector<double> pp(kMaxLawParameters);
      ToLawParams(in.law, xx.data(), in.start.delta_ref_m, pp.data());
      pp.resize(np);
      const WindowSimulation sp = SimulateWindow(setup, pp, on, w.start_time_s, y0, v0, end_s, in.options.model);
      if (!sp.ok) return std::nullopt;
      val[side] = PropagatedFigures(sp.impact);
    }
    for (int q = 0; q < kPropagatedFigures; ++q) jac(q, a) = (val[0][q] - val[1][q]) / (2.0 * h);
  }
  return jac;
}

// The SDs of the propagated figures of window i, sd^2 = J C J^T (GUM 2008 eq. 13,
// docs/methods.md §10); infinite when an unknown of the window is undetermined, left NaN
// when a perturbed run fails.
void PropagateFigureSds(const FitInputs& in, const Unknowns& u, const InternalCovariance& ic, size_t i,
                        const ContactSetup& setup, double onset, double end_s, BounceFitFigures* f) {
  const FigureUnknowns fu = UnknownsOfWindow(in, ic, i);
  if (!fu.finite) {
    f->t_separation_sd_s = f->contact_duration_sd_s = f->peak_force_sd_n = f->max_deflection_sd_m = f->cor_sd = kInf;
    return;
  }
  const std::optional<Eigen::MatrixXd> jac = FigureJacobian(in, u, i, fu, setup, onset, end_s);
  if (!jac) return;
  const Eigen::MatrixXd fc = *jac * fu.sub * jac->transpose();
  f->t_separation_sd_s = std::sqrt(std::max(0.0, fc(0, 0)));
  f->contact_duration_sd_s = std::sqrt(std::max(0.0, fc(1, 1)));
  f->peak_force_sd_n = std::sqrt(std::max(0.0, fc(2, 2)));
  f->max_deflection_sd_m = std::sqrt(std::max(0.0, fc(3, 3)));
  f->cor_sd = std::sqrt(std::max(0.0, fc(4, 4)));
}

// Squared residuals and sample counts in contact (below the onset height) and in flight.
struct ContactFlightSums {
  double contact_ss = 0.0, flight_ss = 0.0;
  int contact_n = 0, flight_n = 0;
  std::vector<double> abs_all, abs_contact;  // |residual|, for the robust spreads
};

// The residuals' autocorrelation at lags 0..kMaxResidualLag at the kept solution, pooled over
// the windows (each window's residuals in sample order; law_fit.h "Correlated residuals"):
// rho_k = sum_i r_i r_(i+k) / sum_i r_i^2 within windows. Empty when the residuals cannot be
// evaluated.
constexpr int kMaxResidualLag = 200;
std::vector<double> ResidualAutocorrelation(const FitInputs& in, Solved& best) {
  std::vector<double> r;
  if (!best.problem->Evaluate(ceres::Problem::EvaluateOptions(), nullptr, &r, nullptr, nullptr)) return {};
  std::vector<double> sums(kMaxResidualLag + 1, 0.0);
  size_t offset = 0;
  for (const WindowRef& ref : in.windows) {
    const size_t n = ref.window->t_s.size();
    if (offset + n > r.size()) return {};
    for (size_t lag = 0; lag < sums.size() && lag < n; ++lag) {
      for (size_t k = 0; k + lag < n; ++k) sums[lag] += r[offset + k] * r[offset + k + lag];
    }
    offset += n;
  }
  if (!(sums[0] > 0.0)) return {};
  for (size_t lag = sums.size(); lag-- > 0;) sums[lag] /= sums[0];
  return sums;
}

// The per-bounce figures of window i from a run of the fitted law, their SDs, its
// force-deflection curve (into result->curves) and its warnings; the maximum deflection goes
// to *max_deflections.
BounceFitFigures FiguresOfWindow(const FitInputs& in, const Unknowns& u, const InternalCovariance& ic, size_t i,
                                 LawFitResult* result, std::vector<double>* max_deflections, ContactFlightSums* sums) {
  const WindowRef& ref = in.windows[i];
  const FitClip& clip = in.clips[ref.clip];
  const FitWindow& w = *ref.window;
  const ContactSetup setup = SetupOf(in.law, in.options, clip.mass_kg);
  const double onset = OnsetHeldFixed(clip) ? *clip.known_onset_height_m : u.onset;
  const double end_s = w.t_s.back() + 0.05;
  const WindowSimulation sim = SimulateWindow(setup, result->params, onset, w.start_time_s, u.states[i][0],
                                              u.states[i][1], end_s, in.options.model);
  BounceFitFigures f;
  f.clip_index = ref.clip;
  f.bounce_index = w.bounce_index;
  f.start_height_m = u.states[i][0];
  f.start_velocity_mps = u.states[i][1];
  f.samples = static_cast<int>(w.t_s.size());
  double ss = 0.0;
  for (size_t k = 0; k < w.t_s.size(); ++k) {
    const bool in_contact = w.y_m[k] < onset;
    if (in_contact) ++f.contact_samples;
    if (sim.ok) {
      const double r = sim.trajectory.HeightAt(w.t_s[k]) - w.y_m[k];
      ss += r * r;
      (in_contact ? sums->contact_ss : sums->flight_ss) += r * r;
      ++(in_contact ? sums->contact_n : sums->flight_n);
      sums->abs_all.push_back(std::abs(r));
      if (in_contact) sums->abs_contact.push_back(std::abs(r));
    }
  }
  f.rms_residual_m = sim.ok ? std::sqrt(ss / f.samples) : kNaN;
  if (sim.ok) {
    const ImpactTruth& t = sim.impact;
    f.t_contact_s = t.t_contact_s;
    f.t_separation_s = t.t_separation_s;
    f.contact_duration_s = t.contact_duration_s;
    f.peak_force_n = t.peak_force_n;
    f.max_deflection_m = t.max_deflection_m;
    f.impact_speed_mps = t.impact_speed_mps;
    f.rebound_speed_mps = t.rebound_speed_mps;
    f.cor = t.cor;
    f.separation_speed_mps = t.separation_speed_mps;
    max_deflections->push_back(t.max_deflection_m);
    result->curves.push_back(ContactCurve(sim, onset, in.options.curve_points, ref.clip, w.bounce_index));
  } else {
    f.t_contact_s = f.t_separation_s = f.contact_duration_s = f.peak_force_n = f.max_deflection_m = kNaN;
    f.impact_speed_mps = f.rebound_speed_mps = f.cor = f.separation_speed_mps = kNaN;
    result->warnings.push_back("bounce " + std::to_string(w.bounce_index) + " of clip '" + clip.clip +
                               "': the fitted law gives no complete impact in the window");
  }
  f.t_separation_sd_s = f.contact_duration_sd_s = f.peak_force_sd_n = f.max_deflection_sd_m = f.cor_sd = kNaN;
  if (sim.ok && ic.have && in.options.figure_uncertainties) PropagateFigureSds(in, u, ic, i, setup, onset, end_s, &f);
  if (f.contact_samples < in.options.min_contact_samples) {
    result->warnings.push_back("bounce " + std::to_string(w.bounce_index) + " of clip '" + clip.clip + "' has only " +
                               std::to_string(f.contact_samples) +
                               " samples in contact (below the onset height): the law is poorly determined by it");
  }
  return f;
}

// Warnings for data that do not determine the law (law_fit.h, "Failure is data").
void AddDegenerateDataWarnings(const FitInputs& in, const std::vector<double>& max_deflections, LawFitResult* result) {
  const LawId law = in.law;
  for (const std::string& bound : result->bounds_reached) {
    result->warnings.push_back(bound + ": the best value may lie beyond it, so its SD holds on one side only");
  }
  const bool prior = std::any_of(in.clips.begin(), in.clips.end(), HasOnsetPrior);
  if (in.start.onset_free && in.windows.size() == 1 && !prior) {
    result->warnings.push_back(
        "a single bounce with a fitted onset height: stiffness, exponent and onset height trade off "
        "(an exponent is pinned only to a few tenths); read the SDs, or give free_radius_m with a floor");
  }
  const double typical_deflection = Median(max_deflections);
  if (std::isfinite(typical_deflection) && result->rms_residual_m > 0.2 * typical_deflection) {
    result->warnings.push_back("the residual RMS (" + FormatG(result->rms_residual_m) +
                               " m) is comparable with the deflection (" + FormatG(typical_deflection) +
                               " m): the law is not determined by these data");
  }
  for (int i = 0; i < ParameterCount(law); ++i) {
    if (ParameterUndetermined(*result, static_cast<size_t>(i))) {
      result->warnings.push_back(result->param_names[i] + " = " + FormatG(result->params[i]) + " has an SD of " +
                                 FormatG(result->param_sd[i]) + ": not determined by the data");
    }
  }
}

}  // namespace

namespace detail {

double BayesianInformationCriterion(double rss_m2, int samples, int free_parameters) {
  const int n = samples;
  return n * std::log(std::max(rss_m2, 1e-300) / n) + free_parameters * std::log(static_cast<double>(n));
}

PseudoInverseCovariance CovarianceByPseudoInverse(const Eigen::MatrixXd& j, double s2) {
  const int total = static_cast<int>(j.cols());
  PseudoInverseCovariance out;
  out.undetermined.assign(total, false);
  // Pseudo-inverse of the column-scaled J^T J, with the parameters that have weight in the
  // null space marked undetermined (infinite SD).
  Eigen::VectorXd norms = j.colwise().norm();
  for (int i = 0; i < total; ++i) norms[i] = norms[i] > 0.0 ? norms[i] : 1.0;
  const Eigen::MatrixXd js = j * norms.cwiseInverse().asDiagonal();
  Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> eig(js.transpose() * js);
  const Eigen::VectorXd& ev = eig.eigenvalues();
  const double cutoff = 1e-12 * ev.maxCoeff();
  Eigen::MatrixXd pinv = Eigen::MatrixXd::Zero(total, total);
  for (int k = 0; k < total; ++k) {
    const Eigen::VectorXd vk = eig.eigenvectors().col(k);
    if (ev[k] > cutoff) {
      pinv += vk * vk.transpose() / ev[k];
    } else {
      for (int i = 0; i < total; ++i)
        if (vk[i] * vk[i] > 1e-6) out.undetermined[i] = true;
    }
  }
  Eigen::MatrixXd& cov = out.covariance;
  cov = s2 * norms.cwiseInverse().asDiagonal() * pinv * norms.cwiseInverse().asDiagonal();
  for (int i = 0; i < total; ++i) {
    if (!out.undetermined[i]) continue;
    cov.row(i).setConstant(kNaN);
    cov.col(i).setConstant(kNaN);
    cov(i, i) = kInf;
  }
  return out;
}

Eigen::MatrixXd LawParameterCovariance(const Eigen::MatrixXd& g, const Eigen::MatrixXd& cov_x,
                                       const std::vector<bool>& undetermined, bool have_cov) {
  const int np = static_cast<int>(g.rows());
  const int dim = static_cast<int>(g.cols());
  Eigen::MatrixXd cov_p = Eigen::MatrixXd::Constant(np, np, kNaN);
  if (!have_cov) return cov_p;
  bool any_undetermined = false;
  for (int i = 0; i < dim; ++i) any_undetermined = any_undetermined || undetermined[i];
  if (!any_undetermined) {
    cov_p = g * cov_x * g.transpose();
    return cov_p;
  }
  for (int i = 0; i < np; ++i) {
    bool touches = false;
    for (int j = 0; j < dim; ++j) touches = touches || (g(i, j) != 0.0 && undetermined[j]);
    cov_p(i, i) = touches ? kInf : (g.row(i) * cov_x.unaryExpr([](double v) {
      return std::isfinite(v) ? v : 0.0;
    }) * g.row(i).transpose())(0, 0);
  }
  return cov_p;
}

}  // namespace detail

// ---------------------------------------------------------------------------------------

std::optional<std::string> ValidateFitWindowOptions(const FitWindowOptions& options) {
  if (options.max_flight_samples < 5 || options.max_flight_samples > 100000) {
    return "max_flight_samples = " + std::to_string(options.max_flight_samples) + " is outside [5, 100000]";
  }
  return std::nullopt;
}

std::optional<std::string> ValidateLawFitOptions(const LawFitOptions& o) {
  std::ostringstream m;
  if (!(o.gravity_mps2 >= 0.0 && o.gravity_mps2 <= 100.0))
    m << "gravity_mps2 = " << o.gravity_mps2 << " is outside [0, 100]";
  else if (o.max_iterations < 1 || o.max_iterations > 1000)
    m << "max_iterations = " << o.max_iterations << " is outside [1, 1000]";
  else if (!(o.max_solve_seconds > 0.1 && o.max_solve_seconds <= 86400.0))
    m << "max_solve_seconds = " << o.max_solve_seconds << " is outside (0.1, 86400] s";
  else if (!(o.function_tolerance > 0.0 && o.function_tolerance <= 1e-2))
    m << "function_tolerance = " << o.function_tolerance << " is outside (0, 1e-2]";
  else if (!(o.parameter_tolerance > 0.0 && o.parameter_tolerance <= 1e-2))
    m << "parameter_tolerance = " << o.parameter_tolerance << " is outside (0, 1e-2]";
  else if (o.curve_points < 2 || o.curve_points > 10000)
    m << "curve_points = " << o.curve_points << " is outside [2, 10000]";
  else if (o.min_contact_samples < 1 || o.min_contact_samples > 1000)
    m << "min_contact_samples = " << o.min_contact_samples << " is outside [1, 1000]";
  else if (const auto e = Validate(o.model))
    m << *e;
  else if (const auto e2 = Validate(o.tread))
    m << "tread: " << *e2;
  if (m.str().empty()) return std::nullopt;
  return m.str();
}

std::string LawFormula(LawId law, const TreadGeometry& tread) {
  const std::string common =
      "; F [N] contact force on the hub, upward, never tensile (0 where the expression is negative); "
      "delta [m] penetration = onset height - hub height (> 0 in contact); delta_dot [m/s] its rate "
      "(> 0 compressing)";
  switch (law) {
    case LawId::kKelvinVoigt:
      return "F = k*delta + c*delta_dot; k [N/m], c [N s/m]" + common;
    case LawId::kHuntCrossley:
      return "F = k*delta^n*(1 + alpha*delta_dot); k [N/m^n], n [-], alpha [s/m] (Hunt-Crossley damping "
             "lambda = alpha*k [N s/m^(n+1)])" +
             common;
    case LawId::kHertz:
      return "F = k*delta^1.5*(1 + alpha*delta_dot); k [N/m^1.5], n = 1.5 fixed, alpha [s/m]" + common;
    case LawId::kBilinear:
      return "F = S(delta) + c*delta_dot, S = k1*delta for delta <= knee, k1*knee + k2*(delta - knee) beyond; "
             "k1, k2 [N/m], knee [m], c [N s/m]" +
             common;
    case LawId::kVolumetric: {
      std::ostringstream g;
      if (tread.shape == TreadShape::kTorus) {
        g << "torus tread, free radius " << tread.free_radius_m << " m, section radius " << tread.section_radius_m
          << " m";
      } else {
        g << "cylinder tread, radius " << tread.free_radius_m << " m, width " << tread.tread_width_m << " m";
      }
      std::string out =
          "F = kv*V(delta)*(1 + a*delta_dot); kv [N/m^3], a [s/m], V [m^3] the volume of the unloaded "
          "tread below the floor (" +
          g.str() + ")";
      if (!tread.note.empty()) out += "; " + tread.note;
      return out + common;
    }
    case LawId::kBottoming:
      return "F = (k*delta + k3*max(delta - knee, 0)^3)*(1 + a*delta_dot); k [N/m], k3 [N/m^3], knee [m], "
             "a [s/m] (a rendering truth, never fitted)" +
             common;
  }
  return "";
}

FitClip MakeFitClip(const std::string& clip, double drop_height_m, double mass_kg, const TimeSeries& series,
                    const Segmentation& segmentation, const std::vector<ImpactFigures>& figures,
                    const FitWindowOptions& options) {
  if (const auto e = ValidateFitWindowOptions(options)) throw std::invalid_argument("MakeFitClip: " + *e);
  if (figures.size() != segmentation.bounces.size()) {
    throw std::invalid_argument("MakeFitClip: " + std::to_string(figures.size()) + " impact figures for " +
                                std::to_string(segmentation.bounces.size()) +
                                " bounces; pass MeasureImpacts' output for this segmentation");
  }
  FitClip out;
  out.clip = clip;
  out.drop_height_m = drop_height_m;
  out.mass_kg = mass_kg;
  out.noise_sd_m = segmentation.noise_sd_m;
  if (std::isfinite(segmentation.onset_height_m)) {
    if (segmentation.onset_height_source == OnsetHeightSource::kGeometry) {
      out.known_onset_height_m = segmentation.onset_height_m;
    }
    out.onset_height_guess_m = segmentation.onset_height_m;
  }
  const auto& bounces = segmentation.bounces;
  const int max_flight = options.max_flight_samples;
  for (size_t b = 0; b < bounces.size(); ++b) {
    const Bounce& bounce = bounces[b];
    if (!bounce.complete || !bounce.flight_before || !bounce.flight_after) continue;
    const FlightPhase& before = segmentation.flights.at(*bounce.flight_before);
    const FlightPhase& after = segmentation.flights.at(*bounce.flight_after);
    int first = before.first_index;
    if (b > 0 && bounces[b - 1].flight_after == bounce.flight_before)
      first = (before.first_index + before.last_index) / 2 + 1;
    first = std::max(first, before.last_index - max_flight + 1);
    int last = after.last_index;
    if (b + 1 < bounces.size() && bounces[b + 1].flight_before == bounce.flight_after) {
      last = (after.first_index + after.last_index) / 2;
    }
    last = std::min(last, after.first_index + max_flight - 1);
    FitWindow w;
    w.bounce_index = bounce.index;
    w.start_time_s = series.t_s.at(first);
    for (int i = first; i <= last; ++i) {
      if (!series.valid[i]) continue;
      w.t_s.push_back(series.t_s[i]);
      w.y_m.push_back(series.y_m[i]);
    }
    w.start_height_m = before.y_fit.Value(w.start_time_s);
    w.start_velocity_mps = before.y_fit.Derivative(w.start_time_s, 1);
    const ImpactFigures& f = figures[b];
    w.figures.impact_speed_mps = f.impact_speed_mps.value;
    w.figures.cor = f.cor.value;
    w.figures.contact_duration_s = f.contact_duration_track_s.value;
    w.figures.max_deflection_m = f.max_deflection_m.value;
    out.windows.push_back(std::move(w));
  }
  return out;
}

ImpactTruth PredictImpact(LawId law, const std::vector<double>& params, double onset_height_m, double mass_kg,
                          double start_time_s, double start_height_m, double start_velocity_mps,
                          const LawFitOptions& options) {
  ContactSetup setup;
  setup.law = law;
  setup.tread = options.tread;
  setup.mass_kg = mass_kg;
  setup.gravity_mps2 = options.gravity_mps2;
  // Long enough for the fall, the contact and the rise through the onset height.
  const double fall_s = options.gravity_mps2 > 0.0
                            ? (std::abs(start_velocity_mps) +
                               std::sqrt(start_velocity_mps * start_velocity_mps +
                                         2.0 * options.gravity_mps2 * std::max(0.0, start_height_m - onset_height_m))) /
                                  options.gravity_mps2
                            : std::max(0.0, start_height_m - onset_height_m) / std::max(1e-3, -start_velocity_mps);
  const double end_s = start_time_s + 1.5 * fall_s + 0.5;
  return SimulateWindow(setup, params, onset_height_m, start_time_s, start_height_m, start_velocity_mps, end_s,
                        options.model)
      .impact;
}

LawFitResult FitLaw(LawId law, const std::vector<FitClip>& clips, const LawFitOptions& options) {
  if (const auto e = ValidateLawFitOptions(options)) throw std::invalid_argument("FitLaw: " + *e);
  const auto t_begin = std::chrono::steady_clock::now();
  LawFitResult result;
  result.law = law;
  result.param_names = ParameterNames(law);
  result.formula = LawFormula(law, options.tread);
  if (std::find(AllLaws().begin(), AllLaws().end(), law) == AllLaws().end()) {
    result.failure = ToString(law) + " is a rendering truth, not a law dropfit fits";
    return result;
  }

  // The volumetric law's stiffness is per volume of the tread pressed in: with the tread
  // assumed, its parameters and rank would describe the assumption, not the specimen.
  if (law == LawId::kVolumetric && !options.tread.unknown.empty()) {
    result.failure = "not fitted nor ranked: the tread geometry is unknown (" + options.tread.unknown +
                     "); give tread_width_m or section_radius_m and free_radius_m (manifest), or --tread-width or "
                     "--section-radius and --free-radius (analyze)";
    return result;
  }
  const std::vector<WindowRef> windows = CollectWindows(clips, &result.bounces);
  if (windows.empty()) {
    result.failure = "no complete bounce with samples to fit";
    return result;
  }
  const StartingValues start = ChooseStartingValues(law, clips, windows, options);
  if (start.failure) {
    result.failure = start.failure;
    return result;
  }
  result.start_note = start.note;
  const FitInputs in{law, clips, windows, options, start};
  std::optional<Solved> best = SolveMultiStart(in, &result);
  if (!best) {
    result.failure = "no start of the solver gave a usable solution";
    return result;
  }
  ReweightOutliers(in, *best, &result);
  ReportSolution(in, *best, &result);
  const int dof = result.samples - result.free_parameters;
  InternalCovariance cov = ComputeInternalCovariance(*best, InternalDim(law), start.onset_free, dof, &result.warnings);
  const std::vector<double> acf = ResidualAutocorrelation(in, *best);
  result.residual_lag1_correlation = acf.size() > 1 ? acf[1] : kNaN;
  result.residual_correlation_time = acf.empty() ? 1.0 : CorrelationTime(acf);
  result.effective_samples = result.samples / result.residual_correlation_time;
  result.sd_inflation = std::sqrt(result.samples / result.effective_samples);
  cov.cov *= result.sd_inflation * result.sd_inflation;
  ReportParameterUncertainty(in, cov, &result);
  std::vector<double> max_deflections;
  ContactFlightSums sums;
  for (size_t i = 0; i < windows.size(); ++i) {
    result.figures.push_back(FiguresOfWindow(in, *best->unknowns, cov, i, &result, &max_deflections, &sums));
  }
  result.rms_contact_m = sums.contact_n > 0 ? std::sqrt(sums.contact_ss / sums.contact_n) : kNaN;
  result.rms_flight_m = sums.flight_n > 0 ? std::sqrt(sums.flight_ss / sums.flight_n) : kNaN;
  result.robust_sd_m = RobustSd(sums.abs_all);
  result.robust_sd_contact_m = RobustSd(sums.abs_contact);
  AddDegenerateDataWarnings(in, max_deflections, &result);
  result.solve_time_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t_begin).count();
  return result;
}

bool ParameterUndetermined(const LawFitResult& fit, size_t i) {
  if (fit.law == LawId::kHertz && i == 1) return false;  // the fixed exponent
  return !(fit.param_sd[i] <= 0.5 * std::abs(fit.params[i]));
}

bool OnsetHeldFixed(const FitClip& clip) {
  return clip.known_onset_height_m.has_value() && !(clip.onset_prior_sd_m > 0.0);
}

int InternalParameterCount(LawId law) { return InternalDim(law); }

std::vector<double> InternalFromLawParameters(LawId law, const std::vector<double>& params, double delta_ref_m) {
  if (static_cast<int>(params.size()) != ParameterCount(law)) {
    throw std::invalid_argument("InternalFromLawParameters: " + std::to_string(params.size()) + " values for " +
                                ToString(law) + ", which has " + std::to_string(ParameterCount(law)));
  }
  return FromLawParams(law, params, delta_ref_m);
}

std::unique_ptr<ceres::CostFunction> MakeWindowCostFunction(LawId law, const FitWindow& window, double mass_kg,
                                                            double delta_ref_m, double residual_scale_m,
                                                            const LawFitOptions& options) {
  WindowData d;
  d.setup.law = law;
  d.setup.tread = options.tread;
  d.setup.mass_kg = mass_kg;
  d.setup.gravity_mps2 = options.gravity_mps2;
  d.model = options.model;
  d.delta_ref_m = delta_ref_m;
  d.inv_scale = 1.0 / residual_scale_m;
  d.window = &window;
  return std::unique_ptr<ceres::CostFunction>(MakeWindowCost(d));
}

}  // namespace dropfit::analysis
