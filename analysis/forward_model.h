#pragma once
// Forward model of a drop test: a rigid mass falling under gravity onto a rigid floor through
// a contact law (analysis/contact_law.h), bouncing until a given end time.
//
// Coordinates and signs. y_m is the hub height, up positive (as in the output contract).
// The contact-onset height onset_height_m is the hub height at which the tread first touches
// the floor. The penetration is delta = onset_height_m - y_m (>= 0 compressing) and
// delta_dot = -dy/dt. Gravity g >= 0 acts downward at all times, also during contact:
//   flight:   d2y/dt2 = -g                         (closed-form parabola)
//   contact:  d2y/dt2 = -g + F(delta, delta_dot)/m  (F from the law, never tensile)
// Default g is standard gravity 9.80665 m/s^2 exactly (3rd CGPM 1901; ISO 80000-3); set
// gravity_mps2 to the local value, or to 0 for the no-gravity textbook cases.
//
// Contact and separation (docs/methods.md §3b-§3c). Contact begins when the hub
// falls through the onset height (time from the flight parabola in closed form). The hub is
// pressed while delta > 0 and F_raw(delta, delta_dot) > 0. Separation is where the force
// returns to zero, not where delta does: with damping the hub leaves the floor below the
// onset height (x_sep = c v_out / k for Kelvin-Voigt, Schwager & Poeschel 2007, Granular
// Matter 9:465-469, eq. 21), then flies freely. If that free flight does not reach the onset
// height before the force would become positive again (tiny bounces of the additive laws
// under gravity), the hub is pressed again: such a hop stays part of the same impact. When
// the force no longer returns to zero the hub stays pressed and settles to rest.
//
// Integration. Contact phases are integrated with the adaptive embedded Runge-Kutta pair of
// Dormand & Prince (1980, J. Comput. Appl. Math. 6:19-26, "RK5(4)7M"), 5th-order solution,
// FSAL, step control on the 4th-order estimate; the dense output between steps is the quintic
// Hermite interpolant of (delta, delta_dot, delta_ddot) at both step ends (error O(h^6)).
// The separation instant is the root of the force (for hunt-crossley, hertz and volumetric,
// of delta or of 1 + alpha delta_dot) on that dense output: located in double arithmetic,
// then refined by one Newton step in the scalar type T, so that d t_sep / d params is the
// derivative of the discrete model (implicit-function theorem). Step sizes are plain doubles
// (not differentiated). Default tolerances give hub positions accurate to ~1e-11 m
// (the tests check 1e-9 m and better against closed forms). For the multiplicative laws the
// steps are graded geometrically towards delta = 0 at both ends of a contact, where
// K(delta) ~ delta^n is not smooth; for bilinear a step ends at each knee crossing.
//
// Two APIs:
//   * SimulateDrop (double): a whole drop for the renderer and tests, returning a Trajectory
//     evaluable at any time plus per-impact truth figures with the contract's definitions.
//   * SimulateHubHeights<T> (templated): hub heights at given sample times for the fitter,
//     differentiable with ceres::Jet through flights, contact and separation.

#include <limits>
#include <optional>
#include <string>
#include <type_traits>
#include <vector>

#include "analysis/constants.h"
#include "analysis/contact_law.h"
#include "analysis/geometry.h"

namespace dropfit::analysis {

// The fixed (non-differentiated) physical setting of a simulation.
//   law            which contact law (see contact_law.h).
//   tread          geometry for the volumetric law; ignored by the other laws.
//   mass_kg        dropped mass; (0, 1e4] kg.
//   gravity_mps2   local gravity, downward; [0, 100] m/s^2. 0 switches gravity off.
struct ContactSetup {
  LawId law = LawId::kKelvinVoigt;
  TreadGeometry tread;
  double mass_kg = 1.0;
  double gravity_mps2 = kStandardGravityMps2;
};

// Empty when valid, else a message naming the offending field and value.
std::optional<std::string> Validate(const ContactSetup& setup);

// Numerical settings.
//   relative_tolerance         DP5(4) local error tolerance relative to |state|; [1e-14, 1e-3].
//   position_tolerance_m       absolute local error tolerance on delta; (0, 1e-3] m.
//   velocity_tolerance_mps     absolute local error tolerance on delta_dot; (0, 1] m/s.
//   initial_step_s             first trial step of each contact phase; (0, 1e-2] s.
//   max_steps                  accepted+rejected steps per simulation before giving up; >= 100.
//   max_impacts                impacts per simulation before giving up (guards against Zeno
//                              sequences); >= 1.
struct ForwardModelOptions {
  double relative_tolerance = 1e-11;
  double position_tolerance_m = 1e-13;
  double velocity_tolerance_mps = 1e-11;
  double initial_step_s = 1e-6;
  int max_steps = 2'000'000;
  int max_impacts = 10'000;

  // Looser tolerances for fitting measured tracks (position noise >= 1e-6 m): hub positions
  // accurate to ~1e-9 m at about half the steps of the defaults (see bench/forward_model_bench).
  static ForwardModelOptions ForFitting() {
    ForwardModelOptions options;
    options.relative_tolerance = 1e-9;
    options.position_tolerance_m = 1e-11;
    options.velocity_tolerance_mps = 1e-9;
    return options;
  }
};

// Empty when valid, else a message naming the offending field and value.
std::optional<std::string> Validate(const ForwardModelOptions& options);

// ---------------------------------------------------------------------------------------
// Double API: a whole drop.

// What is dropped and how. Times in seconds on the clip clock.
//   setup, law_params        the physics (law_params in ParameterNames(setup.law) order).
//   onset_height_m           hub height at which contact begins (free radius above the floor
//                            when y = 0 is the floor).
//   start_time_s             time of the initial state (e.g. release).
//   start_height_m           hub height y at start_time_s.
//   start_velocity_mps       vertical hub velocity at start_time_s, up positive (0 at release).
//   end_time_s               simulate up to here; > start_time_s.
//   start_x_m, drift_speed_mps        horizontal hub position at start and its constant speed
//                                     (a kinematic decoration: no friction is modelled).
//   start_spin_angle_rad, spin_rate_radps   wheel rotation angle at start and its constant rate
//                                     (counter-clockwise positive in the drop plane; also
//                                     a decoration).
struct DropScenario {
  ContactSetup setup;
  std::vector<double> law_params;
  double onset_height_m = 0.3;
  double start_time_s = 0.0;
  double start_height_m = 0.8;
  double start_velocity_mps = 0.0;
  double end_time_s = 1.0;
  double start_x_m = 0.0;
  double drift_speed_mps = 0.0;
  double start_spin_angle_rad = 0.0;
  double spin_rate_radps = 0.0;
};

// Empty when valid (setup, params, finite numbers, end after start), else a message.
std::optional<std::string> Validate(const DropScenario& scenario);

// Truth figures of one impact (contract "Impact figures"); NaN where not defined.
//   t_contact_s          the hub falls through the onset height (closed form).
//   t_separation_s       the force returns to zero for the last time before the hub rises
//                        through the onset height again (NaN if it never separates).
//   impact_speed_mps     downward speed at t_contact_s.
//   rebound_speed_mps    upward speed when the hub passes the onset height again, from the
//                        post-separation flight parabola: sqrt(v_sep^2 - 2 g x_sep)
//                        (e_level of docs/methods.md §3c); NaN if it does not get there.
//   cor                  rebound / impact speed (NaN when rebound is NaN).
//   contact_duration_s   t_separation_s - t_contact_s.
//   max_deflection_m     onset height minus the lowest hub height of the impact.
//   peak_force_n         largest contact force of the impact.
//   onset_height_m       as simulated.
//   separation_speed_mps upward speed at t_separation_s (v_sep; e_sep = v_sep / impact).
//   separation_deflection_m  delta at t_separation_s (x_sep; 0 for the multiplicative laws).
//   t_lowest_s           time of the lowest hub height.
//   t_peak_force_s       time of the peak force.
//   t_level_s            time the hub passes the onset height upward (NaN if it does not).
//   complete             true when the impact began and ended (passed the onset height
//                        upward) within [start_time_s, end_time_s].
//   pressed_at_end       true when the impact was still pressed at end_time_s (cut by the
//                        end of the simulation, or settled to rest: the force no longer
//                        returns to zero).
struct ImpactTruth {
  static constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
  double t_contact_s = kNaN;
  double t_separation_s = kNaN;
  double impact_speed_mps = kNaN;
  double rebound_speed_mps = kNaN;
  double cor = kNaN;
  double contact_duration_s = kNaN;
  double max_deflection_m = kNaN;
  double peak_force_n = kNaN;
  double onset_height_m = kNaN;
  double separation_speed_mps = kNaN;
  double separation_deflection_m = kNaN;
  double t_lowest_s = kNaN;
  double t_peak_force_s = kNaN;
  double t_level_s = kNaN;
  bool complete = false;
  bool pressed_at_end = false;
};

// The full state of the hub at one instant.
struct HubState {
  double t_s = 0.0;
  double x_m = 0.0;  // horizontal position (drift)
  double y_m = 0.0;  // height, up positive
  double vx_mps = 0.0;
  double vy_mps = 0.0;           // vertical velocity, up positive
  double ay_mps2 = 0.0;          // vertical acceleration, up positive (-g in flight)
  double contact_force_n = 0.0;  // floor force on the hub, upward, >= 0
  double spin_angle_rad = 0.0;
  bool in_contact = false;  // pressed: the force is positive
};

// A simulated drop, evaluable at any time in [start_time_s, end_time_s] (times outside are
// clamped to that interval). Evaluation is const and thread-safe.
class Trajectory {
 public:
  // Full state at time t (binary search over segments, then closed form or dense output).
  HubState At(double t_s) const;
  double HeightAt(double t_s) const { return At(t_s).y_m; }

  // Impacts in time order (the last one may be incomplete: cut by end_time_s).
  const std::vector<ImpactTruth>& impacts() const { return impacts_; }
  double start_time_s() const { return start_time_s_; }
  double end_time_s() const { return end_time_s_; }
  const DropScenario& scenario() const { return scenario_; }
  // Accepted integration steps over all contact phases (for benchmarks).
  int steps() const { return steps_; }

  // One piece of the motion: a free-flight parabola or one contact integration step.
  // Public so that tests can inspect the pieces; not needed for evaluation.
  struct Segment {
    bool pressed = false;
    double t0_s = 0.0;  // start time
    double t1_s = 0.0;  // end time
    double h_s = 0.0;   // pressed: the integration step (t1 - t0 <= h_s at separation)
    // flight: delta(tau) = c[0] + c[1] tau + c[2] tau^2, tau = t - t0 (c[2] = g/2);
    // pressed: delta(s) = sum c[i] s^i, s = (t - t0)/h_s (quintic Hermite dense output).
    double c[6] = {0, 0, 0, 0, 0, 0};
  };
  const std::vector<Segment>& segments() const { return segments_; }

 private:
  friend Trajectory SimulateDrop(const DropScenario& scenario, const ForwardModelOptions& options);
  DropScenario scenario_;
  double start_time_s_ = 0.0;
  double end_time_s_ = 0.0;
  int steps_ = 0;
  std::vector<Segment> segments_;
  std::vector<ImpactTruth> impacts_;
};

// Simulates the scenario from start_time_s to end_time_s.
// Throws std::invalid_argument (message from Validate) on a bad scenario or options, and
// std::runtime_error naming the limit when max_steps or max_impacts is exceeded.
Trajectory SimulateDrop(const DropScenario& scenario, const ForwardModelOptions& options = {});

// ---------------------------------------------------------------------------------------
// Templated API for the fitter (ceres::Jet).

// Outcome of one templated simulation; expected failures are data (the fitter's cost
// functor returns false on them).
enum class SimulationStatus {
  kOk,
  kTooManySteps,    // options.max_steps exceeded
  kTooManyImpacts,  // options.max_impacts exceeded
  kNonFinite,       // a state became NaN or infinite (absurd parameters)
};
std::string ToString(SimulationStatus status);

// Hub heights y(t_i) (and, if velocities_mps is not null, vertical velocities) at the given
// sample times, starting from the state (start_height_m, start_velocity_mps) at
// start_time_s, through flights, contact phases and further bounces as the window needs.
//   law_params        ParameterCount(setup.law) values, differentiated (hertz: params[1] is
//                     not used; the exponent is the constant 1.5).
//   onset_height_m    differentiated.
//   start_*           differentiated (a state in flight or in contact).
//   sample_times_s    ascending, all >= start_time_s (checked by assert; the caller owns
//                     this invariant), num_samples >= 0.
//   heights_m         out: num_samples values.
// Cost (bench/forward_model_bench, one bounce window of 0.1 s at 2 kHz, Jet<double, 7>,
// ForwardModelOptions::ForFitting()): 50-140 contact steps, ~0.15-0.6 ms per call on
// this project's 2-core machines; no allocation. For the volumetric torus pass a geometry
// from MakeTreadGeometry (tabulated volume), otherwise each force costs a quadrature.
// Derivatives: the Jet parts are the exact derivatives of the discrete model; they agree
// with central finite differences to < 1e-7 of the largest sensitivity (test).
template <typename T>
SimulationStatus SimulateHubHeights(const ContactSetup& setup, const T* law_params, const T& onset_height_m,
                                    double start_time_s, const T& start_height_m, const T& start_velocity_mps,
                                    const double* sample_times_s, int num_samples, T* heights_m,
                                    std::type_identity_t<T>* velocities_mps = nullptr,
                                    const ForwardModelOptions& options = {});

}  // namespace dropfit::analysis

#include "analysis/forward_model_detail.h"
