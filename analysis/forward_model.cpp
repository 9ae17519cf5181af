#include "analysis/forward_model.h"

#include <algorithm>
#include <cmath>
#include <sstream>
#include <stdexcept>

namespace dropfit::analysis {

std::optional<std::string> Validate(const ContactSetup& setup) {
  std::ostringstream message;
  if (!(setup.mass_kg > 0.0 && setup.mass_kg <= 1e4)) {
    message << "mass_kg = " << setup.mass_kg << " is outside (0, 1e4] kg";
  } else if (!(setup.gravity_mps2 >= 0.0 && setup.gravity_mps2 <= 100.0)) {
    message << "gravity_mps2 = " << setup.gravity_mps2 << " is outside [0, 100] m/s^2";
  } else if (setup.law == LawId::kVolumetric) {
    return Validate(setup.tread);
  }
  if (message.str().empty()) return std::nullopt;
  return message.str();
}

std::optional<std::string> Validate(const ForwardModelOptions& options) {
  std::ostringstream message;
  if (!(options.relative_tolerance >= 1e-14 && options.relative_tolerance <= 1e-3)) {
    message << "relative_tolerance = " << options.relative_tolerance << " is outside [1e-14, 1e-3]";
  } else if (!(options.position_tolerance_m > 0.0 && options.position_tolerance_m <= 1e-3)) {
    message << "position_tolerance_m = " << options.position_tolerance_m << " is outside (0, 1e-3] m";
  } else if (!(options.velocity_tolerance_mps > 0.0 && options.velocity_tolerance_mps <= 1.0)) {
    message << "velocity_tolerance_mps = " << options.velocity_tolerance_mps << " is outside (0, 1] m/s";
  } else if (!(options.initial_step_s > 0.0 && options.initial_step_s <= 1e-2)) {
    message << "initial_step_s = " << options.initial_step_s << " is outside (0, 1e-2] s";
  } else if (options.max_steps < 100) {
    message << "max_steps = " << options.max_steps << " is below 100";
  } else if (options.max_impacts < 1) {
    message << "max_impacts = " << options.max_impacts << " is below 1";
  }
  if (message.str().empty()) return std::nullopt;
  return message.str();
}

std::optional<std::string> Validate(const DropScenario& scenario) {
  if (auto message = Validate(scenario.setup)) return message;
  if (auto message = ValidateLawParameters(scenario.setup.law, scenario.law_params)) return message;
  std::ostringstream out;
  const double values[] = {scenario.onset_height_m,     scenario.start_time_s,         scenario.start_height_m,
                           scenario.start_velocity_mps, scenario.end_time_s,           scenario.start_x_m,
                           scenario.drift_speed_mps,    scenario.start_spin_angle_rad, scenario.spin_rate_radps};
  const char* names[] = {"onset_height_m",     "start_time_s",         "start_height_m",
                         "start_velocity_mps", "end_time_s",           "start_x_m",
                         "drift_speed_mps",    "start_spin_angle_rad", "spin_rate_radps"};
  for (int i = 0; i < 9; ++i) {
    if (!std::isfinite(values[i])) {
      out << "drop scenario: " << names[i] << " = " << values[i] << " is not finite";
      return out.str();
    }
  }
  if (!(scenario.end_time_s > scenario.start_time_s)) {
    out << "drop scenario: end_time_s = " << scenario.end_time_s
        << " must be after start_time_s = " << scenario.start_time_s;
  }
  if (out.str().empty()) return std::nullopt;
  return out.str();
}

std::string ToString(SimulationStatus status) {
  switch (status) {
    case SimulationStatus::kOk:
      return "ok";
    case SimulationStatus::kTooManySteps:
      return "too many integration steps";
    case SimulationStatus::kTooManyImpacts:
      return "too many impacts";
    case SimulationStatus::kNonFinite:
      return "non-finite state";
  }
  return "unknown";
}

namespace {

// Records the motion as segments and builds the per-impact truth.
class Recorder {
 public:
  Recorder(const DropScenario& scenario, std::vector<Trajectory::Segment>* segments, std::vector<ImpactTruth>* impacts)
      : scenario_(scenario), segments_(segments), impacts_(impacts) {}

  bool Done() const { return false; }

  void Flight(double t0, double t1, double x0, double v0, bool) {
    Trajectory::Segment segment;
    segment.pressed = false;
    segment.t0_s = t0;
    segment.t1_s = t1;
    segment.h_s = t1 - t0;
    segment.c[0] = x0;
    segment.c[1] = v0;
    segment.c[2] = 0.5 * scenario_.setup.gravity_mps2;
    segments_->push_back(segment);
  }

  void PressedStep(double t0, double h, double t1, const double* c, bool) {
    Trajectory::Segment segment;
    segment.pressed = true;
    segment.t0_s = t0;
    segment.t1_s = t1;
    segment.h_s = h;
    std::copy(c, c + 6, segment.c);
    segments_->push_back(segment);
    if (open_) UpdateExtremes(segment);
  }

  void Onset(double t, double v) {
    Open();
    current_.t_contact_s = t;
    current_.impact_speed_mps = v;
  }
  void StartPressed(double) { Open(); }
  void Recontact(double) {
    if (!open_) Open();  // started below the onset height in a force-free hop
  }
  void Separation(double t, double x, double v) {
    current_.t_separation_s = t;
    current_.separation_speed_mps = -v;
    current_.separation_deflection_m = x;
    current_.contact_duration_s = t - current_.t_contact_s;
  }
  void LevelUp(double t, double v) {
    if (!open_) return;
    current_.t_level_s = t;
    current_.rebound_speed_mps = -v;
    current_.cor = current_.rebound_speed_mps / current_.impact_speed_mps;
    current_.complete = std::isfinite(current_.t_contact_s);
    Close();
  }
  void Finish(double, double, double, bool pressed) {
    if (!open_) return;
    current_.pressed_at_end = pressed;
    if (pressed) {
      current_.t_separation_s = ImpactTruth::kNaN;
      current_.separation_speed_mps = ImpactTruth::kNaN;
      current_.separation_deflection_m = ImpactTruth::kNaN;
      current_.contact_duration_s = ImpactTruth::kNaN;
    }
    Close();
  }

 private:
  void Open() {
    if (open_) Close();  // defensive: an impact that never passed the level again
    current_ = ImpactTruth{};
    current_.onset_height_m = scenario_.onset_height_m;
    current_.max_deflection_m = 0.0;
    current_.peak_force_n = 0.0;
    open_ = true;
  }
  void Close() {
    impacts_->push_back(current_);
    open_ = false;
  }

  double Force(const Trajectory::Segment& segment, double s) const {
    const double x = detail::QuinticValue(segment.c, s);
    const double v = detail::QuinticSlope(segment.c, s) / segment.h_s;
    return ContactForce(scenario_.setup.law, scenario_.law_params.data(), scenario_.setup.tread, x, v);
  }

  // Lowest point (largest delta) and peak force within one pressed step.
  void UpdateExtremes(const Trajectory::Segment& segment) {
    const double s_end = (segment.t1_s - segment.t0_s) / segment.h_s;
    constexpr int kSamples = 16;
    // Largest delta: endpoints, and interior zeros of the slope (from + to -).
    auto consider_deflection = [&](double s) {
      const double x = detail::QuinticValue(segment.c, s);
      if (x > current_.max_deflection_m) {
        current_.max_deflection_m = x;
        current_.t_lowest_s = segment.t0_s + s * segment.h_s;
      }
    };
    consider_deflection(0.0);
    consider_deflection(s_end);
    double s_prev = 0.0;
    double slope_prev = detail::QuinticSlope(segment.c, 0.0);
    for (int i = 1; i <= kSamples; ++i) {
      const double s = s_end * i / kSamples;
      const double slope = detail::QuinticSlope(segment.c, s);
      if (slope_prev > 0.0 && slope <= 0.0) {
        double lo = s_prev, hi = s;
        for (int k = 0; k < 80 && hi - lo > 1e-16; ++k) {
          const double mid = 0.5 * (lo + hi);
          (detail::QuinticSlope(segment.c, mid) > 0.0 ? lo : hi) = mid;
        }
        consider_deflection(0.5 * (lo + hi));
      }
      s_prev = s;
      slope_prev = slope;
    }
    // Peak force: best of the samples, then golden-section search around it.
    int best = 0;
    double best_force = -1.0;
    for (int i = 0; i <= kSamples; ++i) {
      const double f = Force(segment, s_end * i / kSamples);
      if (f > best_force) {
        best_force = f;
        best = i;
      }
    }
    double lo = s_end * std::max(0, best - 1) / kSamples;
    double hi = s_end * std::min(kSamples, best + 1) / kSamples;
    const double ratio = (std::sqrt(5.0) - 1.0) / 2.0;
    double a = hi - ratio * (hi - lo), b = lo + ratio * (hi - lo);
    double fa = Force(segment, a), fb = Force(segment, b);
    for (int k = 0; k < 100 && hi - lo > 1e-13; ++k) {
      if (fa > fb) {
        hi = b;
        b = a;
        fb = fa;
        a = hi - ratio * (hi - lo);
        fa = Force(segment, a);
      } else {
        lo = a;
        a = b;
        fa = fb;
        b = lo + ratio * (hi - lo);
        fb = Force(segment, b);
      }
    }
    const double s_peak = 0.5 * (lo + hi);
    const double f_peak = std::max(best_force, Force(segment, s_peak));
    if (f_peak > current_.peak_force_n) {
      current_.peak_force_n = f_peak;
      current_.t_peak_force_s = segment.t0_s + (f_peak == best_force ? s_end * best / kSamples : s_peak) * segment.h_s;
    }
  }

  const DropScenario& scenario_;
  std::vector<Trajectory::Segment>* segments_;
  std::vector<ImpactTruth>* impacts_;
  ImpactTruth current_;
  bool open_ = false;
};

}  // namespace

HubState Trajectory::At(double t_s) const {
  const double t = std::clamp(t_s, start_time_s_, end_time_s_);
  HubState state;
  state.t_s = t;
  const double elapsed = t - scenario_.start_time_s;
  state.x_m = scenario_.start_x_m + scenario_.drift_speed_mps * elapsed;
  state.vx_mps = scenario_.drift_speed_mps;
  state.spin_angle_rad = scenario_.start_spin_angle_rad + scenario_.spin_rate_radps * elapsed;
  const double g = scenario_.setup.gravity_mps2;
  double x = 0.0, v = 0.0, a = g, force = 0.0;
  // Last segment starting at or before t.
  auto it = std::upper_bound(segments_.begin(), segments_.end(), t,
                             [](double value, const Segment& segment) { return value < segment.t0_s; });
  if (it != segments_.begin()) --it;
  if (it != segments_.end()) {
    const Segment& segment = *it;
    if (!segment.pressed) {
      const double tau = t - segment.t0_s;
      x = segment.c[0] + tau * (segment.c[1] + segment.c[2] * tau);
      v = segment.c[1] + 2.0 * segment.c[2] * tau;
    } else {
      const double s = (t - segment.t0_s) / segment.h_s;
      x = detail::QuinticValue(segment.c, s);
      v = detail::QuinticSlope(segment.c, s) / segment.h_s;
      force = ContactForce(scenario_.setup.law, scenario_.law_params.data(), scenario_.setup.tread, x, v);
      a = g - force / scenario_.setup.mass_kg;
    }
  }
  state.y_m = scenario_.onset_height_m - x;
  state.vy_mps = -v;
  state.ay_mps2 = -a;
  state.contact_force_n = force;
  state.in_contact = force > 0.0;
  return state;
}

Trajectory SimulateDrop(const DropScenario& scenario, const ForwardModelOptions& options) {
  std::optional<std::string> message = Validate(scenario);
  if (!message) message = Validate(options);
  if (message) throw std::invalid_argument(*message + "; fix the drop scenario");
  Trajectory trajectory;
  trajectory.scenario_ = scenario;
  trajectory.start_time_s_ = scenario.start_time_s;
  trajectory.end_time_s_ = scenario.end_time_s;
  Recorder recorder(trajectory.scenario_, &trajectory.segments_, &trajectory.impacts_);
  const SimulationStatus status = detail::RunDrop(
      scenario.setup, trajectory.scenario_.law_params.data(), scenario.onset_height_m, scenario.start_time_s,
      scenario.start_height_m, scenario.start_velocity_mps, scenario.end_time_s, options, recorder);
  if (status != SimulationStatus::kOk) {
    std::ostringstream out;
    out << "drop simulation stopped: " << ToString(status) << " (law " << ToString(scenario.setup.law)
        << ", end_time_s = " << scenario.end_time_s << ", max_steps = " << options.max_steps
        << ", max_impacts = " << options.max_impacts << "); shorten the simulation or raise the limit";
    throw std::runtime_error(out.str());
  }
  for (const Trajectory::Segment& segment : trajectory.segments_) {
    if (segment.pressed) ++trajectory.steps_;
  }
  return trajectory;
}

}  // namespace dropfit::analysis
