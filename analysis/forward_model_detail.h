#pragma once
// Template definitions for analysis/forward_model.h (read that header for the meaning).
//
// Internally everything runs in penetration coordinates: x = delta = onset - y (m),
// v = delta_dot = -dy/dt (m/s), and the contact dynamics x'' = g - F_raw(x, v)/m.
// RunDrop is the phase machine shared by both APIs; it reports the motion to an observer:
//   observer.Flight(t0, t1_value, x0, v0, reaches_end)    parabola x0 + v0 tau + g tau^2/2
//   observer.PressedStep(t0, h, t1_value, coeffs, reaches_end)
//                                                          quintic in s = (t - t0)/h
//   observer.Onset(t, v)          falls through the onset height (v > 0)
//   observer.StartPressed(t)      the initial state is already pressed
//   observer.Separation(t, x, v)  the force returns to zero
//   observer.Recontact(t)         pressed again below the onset height (no level pass)
//   observer.LevelUp(t, v)        rises through the onset height (v < 0)
//   observer.Done()               true when nothing more is wanted (all samples filled)
//   observer.Finish(t, x, v, pressed)  the state where the run stopped

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>

#include "analysis/contact_law.h"
#include "analysis/geometry.h"

namespace dropfit::analysis {
namespace detail {

// Dormand & Prince (1980) RK5(4)7M coefficients (also Hairer, Norsett & Wanner, Solving
// ODEs I, table 5.2).
struct DormandPrince {
  static constexpr double c2 = 1.0 / 5.0, c3 = 3.0 / 10.0, c4 = 4.0 / 5.0, c5 = 8.0 / 9.0;
  static constexpr double a21 = 1.0 / 5.0;
  static constexpr double a31 = 3.0 / 40.0, a32 = 9.0 / 40.0;
  static constexpr double a41 = 44.0 / 45.0, a42 = -56.0 / 15.0, a43 = 32.0 / 9.0;
  static constexpr double a51 = 19372.0 / 6561.0, a52 = -25360.0 / 2187.0, a53 = 64448.0 / 6561.0, a54 = -212.0 / 729.0;
  static constexpr double a61 = 9017.0 / 3168.0, a62 = -355.0 / 33.0, a63 = 46732.0 / 5247.0, a64 = 49.0 / 176.0,
                          a65 = -5103.0 / 18656.0;
  static constexpr double b1 = 35.0 / 384.0, b3 = 500.0 / 1113.0, b4 = 125.0 / 192.0, b5 = -2187.0 / 6784.0,
                          b6 = 11.0 / 84.0;
  // b - b_hat (5th minus 4th order weights), stage 7 being the FSAL stage.
  static constexpr double e1 = 71.0 / 57600.0, e3 = -71.0 / 16695.0, e4 = 71.0 / 1920.0, e5 = -17253.0 / 339200.0,
                          e6 = 22.0 / 525.0, e7 = -1.0 / 40.0;
};

// Quintic Hermite interpolant on s in [0, 1] through (x, h v, h^2 a) at both ends.
template <typename T>
void HermiteQuintic(const T& x0, const T& v0, const T& a0, const T& x1, const T& v1, const T& a1, double h, T* c) {
  const T hv0 = h * v0;
  const T hv1 = h * v1;
  const T ha0 = (h * h) * a0;
  const T ha1 = (h * h) * a1;
  const T dx = x1 - x0;
  c[0] = x0;
  c[1] = hv0;
  c[2] = 0.5 * ha0;
  c[3] = 10.0 * dx - 6.0 * hv0 - 4.0 * hv1 - 1.5 * ha0 + 0.5 * ha1;
  c[4] = -15.0 * dx + 8.0 * hv0 + 7.0 * hv1 + 1.5 * ha0 - ha1;
  c[5] = 6.0 * dx - 3.0 * hv0 - 3.0 * hv1 - 0.5 * ha0 + 0.5 * ha1;
}

// p(s) and dp/ds of the quintic.
template <typename T, typename S>
T QuinticValue(const T* c, const S& s) {
  return c[0] + s * (c[1] + s * (c[2] + s * (c[3] + s * (c[4] + s * c[5]))));
}
template <typename T, typename S>
T QuinticSlope(const T* c, const S& s) {
  return c[1] + s * (2.0 * c[2] + s * (3.0 * c[3] + s * (4.0 * c[4] + s * 5.0 * c[5])));
}
template <typename T, typename S>
T QuinticCurvature(const T* c, const S& s) {
  return 2.0 * c[2] + s * (6.0 * c[3] + s * (12.0 * c[4] + s * 20.0 * c[5]));
}

inline bool IsFiniteValue(double x) { return std::isfinite(x); }

// Smallest tau > 0 where x0 + v0 tau + (g/2) tau^2 rises through 0 (x increasing), for a
// start at x0 <= 0 (at or above the onset height). +inf when it never does.
template <typename T>
T OnsetDelay(const T& x0, const T& v0, double g) {
  using std::sqrt;
  const double vv = ScalarValue(v0);
  if (g <= 0.0) {
    if (vv <= 0.0) return T(std::numeric_limits<double>::infinity());
    return -x0 / v0;
  }
  const T root = sqrt(v0 * v0 - 2.0 * g * x0);
  if (vv <= 0.0) return (root - v0) / g;
  return -2.0 * x0 / (v0 + root);  // same root without cancellation
}

// Smallest tau > 0 where the parabola falls to x = 0 from x0 > 0 moving up (v0 < 0);
// +inf when it turns before reaching 0.
template <typename T>
T LevelUpDelay(const T& x0, const T& v0, double g) {
  using std::sqrt;
  const double vv = ScalarValue(v0);
  if (vv >= 0.0) return T(std::numeric_limits<double>::infinity());
  const double disc = vv * vv - 2.0 * g * ScalarValue(x0);
  if (disc < 0.0) return T(std::numeric_limits<double>::infinity());
  const T root = sqrt(v0 * v0 - 2.0 * g * x0);
  return 2.0 * x0 / (root - v0);
}

// Smallest tau > 0 at which A0 + A1 tau + A2 tau^2 (A2 >= 0) crosses zero upward.
template <typename T>
T UpcrossingDelay(const T& A0, const T& A1, const T& A2) {
  using std::sqrt;
  const double a0 = ScalarValue(A0), a1 = ScalarValue(A1), a2 = ScalarValue(A2);
  const T infinity(std::numeric_limits<double>::infinity());
  if (a2 <= 0.0) {
    if (a1 <= 0.0) return infinity;
    const double tau = -a0 / a1;
    return tau > 0.0 ? -A0 / A1 : infinity;
  }
  const double disc = a1 * a1 - 4.0 * a2 * a0;
  if (disc < 0.0) return infinity;
  const T root = sqrt(A1 * A1 - 4.0 * A2 * A0);
  // Larger root (the upward crossing of an upward parabola).
  T tau;
  if (a1 <= 0.0) {
    tau = (root - A1) / (2.0 * A2);
  } else {
    tau = -2.0 * A0 / (A1 + root);
  }
  return ScalarValue(tau) > 0.0 ? tau : infinity;
}

// In a force-free phase below the onset height (x0 > 0): the first tau > 0 at which the law
// would press again (F_raw rises through 0 while x > 0). +inf if never.
template <typename T>
T RecontactDelay(const ContactSetup& setup, const T* params, const T& x0, const T& v0, double g) {
  const T infinity(std::numeric_limits<double>::infinity());
  if (IsMultiplicativeDamping(setup.law)) {
    // 1 + d v(tau) = 0 upward: v(tau) = v0 + g tau = -1/d.
    const T& d = MultiplicativeDamping(setup.law, params);
    if (ScalarValue(d) <= 0.0 || g <= 0.0) return infinity;
    const T tau = (-1.0 / d - v0) / g;
    return ScalarValue(tau) > 0.0 ? tau : infinity;
  }
  // Additive: S(x) + c v with S linear on each piece, S = K x + B.
  const T& c = AdditiveDamping(setup.law, params);
  T best = infinity;
  auto consider = [&](const T& K, const T& B, double lo, double hi) {
    const T A0 = K * x0 + B + c * v0;
    const T A1 = K * v0 + c * g;
    const T A2 = 0.5 * g * K;
    const T tau = UpcrossingDelay(A0, A1, A2);
    const double tv = ScalarValue(tau);
    if (!(tv < ScalarValue(best))) return;
    const double x = ScalarValue(x0) + ScalarValue(v0) * tv + 0.5 * g * tv * tv;
    if (x > lo && x <= hi) best = tau;
  };
  constexpr double kInf = std::numeric_limits<double>::infinity();
  if (setup.law == LawId::kKelvinVoigt) {
    consider(params[0], T(0.0), 0.0, kInf);
  } else {
    const double knee = ScalarValue(params[2]);
    consider(params[0], T(0.0), 0.0, knee);
    consider(params[1], (params[0] - params[1]) * params[2], knee, kInf);
  }
  return best;
}

// Whether the law presses at this state (x > 0 and F_raw > 0).
template <typename T>
bool Pressing(const ContactSetup& setup, const T* params, const T& x, const T& v) {
  if (ScalarValue(x) <= 0.0) return false;
  return ScalarValue(UnclampedContactForce(setup.law, params, setup.tread, x, v)) > 0.0;
}

enum class PressedEnd { kSeparated, kReachedEnd, kTooManySteps, kNonFinite };

template <typename T>
struct PressedResult {
  PressedEnd end = PressedEnd::kReachedEnd;
  T t;  // time at the end of the phase
  T x;
  T v;
  bool separated_at_level = false;  // multiplicative law separated exactly at x = 0
};

// Integrates a pressed phase starting at (t0, x0, v0) until the force returns to zero or
// t_end is reached.
template <typename T, typename Observer>
PressedResult<T> IntegratePressed(const ContactSetup& setup, const T* params, const T& t0, const T& x0, const T& v0,
                                  double t_end, const ForwardModelOptions& options, int* steps, Observer& observer) {
  using DP = DormandPrince;
  using std::abs;
  const double g = setup.gravity_mps2;
  const double inv_m = 1.0 / setup.mass_kg;
  const LawId law = setup.law;
  const bool multiplicative = IsMultiplicativeDamping(law);
  auto acc = [&](const T& x, const T& v) -> T {
    return g - inv_m * UnclampedContactForce(law, params, setup.tread, x, v);
  };
  // Event value (double) at a state: <= 0 means the force is back to zero.
  auto event_value = [&](double x, double v) -> double {
    if (multiplicative) {
      const double d = ScalarValue(MultiplicativeDamping(law, params));
      return std::min(x, 1.0 + d * v);
    }
    return ScalarValue(UnclampedContactForce(law, params, setup.tread, T(x), T(v)));
  };

  PressedResult<T> result;
  T x = x0, v = v0, a = acc(x0, v0);
  double tau = 0.0;  // local time since t0
  const double t0v = ScalarValue(t0);
  double h = options.initial_step_s;
  bool last_rejected = false;
  bool retried_event = false;
  bool retried_knee = false;
  T c[6];
  while (true) {
    const double remaining = t_end - (t0v + tau);
    if (remaining <= 0.0) {
      result.end = PressedEnd::kReachedEnd;
      result.t = t0 + tau;
      result.x = x;
      result.v = v;
      return result;
    }
    if (++*steps > options.max_steps) {
      result.end = PressedEnd::kTooManySteps;
      return result;
    }
    if (multiplicative) {
      // K(delta) ~ delta^n is not smooth at delta = 0, where these laws' contact begins and
      // ends; the parameter sensitivities (dK/ddelta ~ delta^(n-1)) are even less smooth.
      // Grade the steps geometrically towards both ends so that no step spans much more
      // than its distance from them (value error control alone leaves the Jet parts of the
      // first and last steps ~1e-5 relative off; graded: ~1e-8).
      constexpr double kGrading = 0.25;
      const double xs = ScalarValue(x), vs = ScalarValue(v);
      double limit = std::max(kGrading * tau, options.initial_step_s);
      if (vs < 0.0 && xs > 0.0) limit = std::min(limit, std::max(kGrading * xs / -vs, 1e-3 * options.initial_step_s));
      h = std::min(h, limit);
    }
    const bool to_end = h >= remaining;
    const double hh = to_end ? remaining : h;
    // Stages: state (x, v), derivative (v, a).
    const T& kx1 = v;
    const T& kv1 = a;
    const T x2 = x + hh * (DP::a21 * kx1);
    const T v2 = v + hh * (DP::a21 * kv1);
    const T kv2 = acc(x2, v2);
    const T x3 = x + hh * (DP::a31 * kx1 + DP::a32 * v2);
    const T v3 = v + hh * (DP::a31 * kv1 + DP::a32 * kv2);
    const T kv3 = acc(x3, v3);
    const T x4 = x + hh * (DP::a41 * kx1 + DP::a42 * v2 + DP::a43 * v3);
    const T v4 = v + hh * (DP::a41 * kv1 + DP::a42 * kv2 + DP::a43 * kv3);
    const T kv4 = acc(x4, v4);
    const T x5 = x + hh * (DP::a51 * kx1 + DP::a52 * v2 + DP::a53 * v3 + DP::a54 * v4);
    const T v5 = v + hh * (DP::a51 * kv1 + DP::a52 * kv2 + DP::a53 * kv3 + DP::a54 * kv4);
    const T kv5 = acc(x5, v5);
    const T x6 = x + hh * (DP::a61 * kx1 + DP::a62 * v2 + DP::a63 * v3 + DP::a64 * v4 + DP::a65 * v5);
    const T v6 = v + hh * (DP::a61 * kv1 + DP::a62 * kv2 + DP::a63 * kv3 + DP::a64 * kv4 + DP::a65 * kv5);
    const T kv6 = acc(x6, v6);
    const T x7 = x + hh * (DP::b1 * kx1 + DP::b3 * v3 + DP::b4 * v4 + DP::b5 * v5 + DP::b6 * v6);
    const T v7 = v + hh * (DP::b1 * kv1 + DP::b3 * kv3 + DP::b4 * kv4 + DP::b5 * kv5 + DP::b6 * kv6);
    const T a7 = acc(x7, v7);
    // Error estimate on the values only (step control is not differentiated).
    const double err_x = hh * (DP::e1 * ScalarValue(kx1) + DP::e3 * ScalarValue(v3) + DP::e4 * ScalarValue(v4) +
                               DP::e5 * ScalarValue(v5) + DP::e6 * ScalarValue(v6) + DP::e7 * ScalarValue(v7));
    const double err_v = hh * (DP::e1 * ScalarValue(kv1) + DP::e3 * ScalarValue(kv3) + DP::e4 * ScalarValue(kv4) +
                               DP::e5 * ScalarValue(kv5) + DP::e6 * ScalarValue(kv6) + DP::e7 * ScalarValue(a7));
    const double xv = ScalarValue(x7), vv = ScalarValue(v7), av = ScalarValue(a7);
    if (!IsFiniteValue(xv) || !IsFiniteValue(vv) || !IsFiniteValue(av) || !IsFiniteValue(err_x) ||
        !IsFiniteValue(err_v)) {
      if (hh > 1e-14) {  // may be a too-large step into absurd territory: retry smaller
        h = hh * 0.1;
        last_rejected = true;
        continue;
      }
      result.end = PressedEnd::kNonFinite;
      return result;
    }
    const double scale_x =
        options.position_tolerance_m + options.relative_tolerance * std::max(std::abs(ScalarValue(x)), std::abs(xv));
    const double scale_v =
        options.velocity_tolerance_mps + options.relative_tolerance * std::max(std::abs(ScalarValue(v)), std::abs(vv));
    const double ex = err_x / scale_x, ev = err_v / scale_v;
    const double err = std::sqrt(0.5 * (ex * ex + ev * ev));
    if (err > 1.0) {
      h = hh * std::max(0.2, 0.9 * std::pow(err, -0.2));
      last_rejected = true;
      continue;
    }
    HermiteQuintic(x, v, a, x7, v7, a7, hh, c);
    const T t_step = t0 + tau;
    if (event_value(xv, vv) <= 0.0) {
      // Locate the zero on the dense output: bisection-safeguarded Newton in double.
      // Which event: for multiplicative laws x = 0 (usual) or 1 + d v = 0.
      const double d = multiplicative ? ScalarValue(MultiplicativeDamping(law, params)) : 0.0;
      const bool on_position = multiplicative && xv <= 0.0;
      double cv[6];
      for (int i = 0; i < 6; ++i) cv[i] = ScalarValue(c[i]);
      auto fn = [&](double s, double* slope) -> double {
        const double p = QuinticValue(cv, s);
        const double dp = QuinticSlope(cv, s);  // = h v
        const double ddp = QuinticCurvature(cv, s);
        if (multiplicative) {
          if (on_position) {
            *slope = dp;
            return p;
          }
          *slope = d * ddp / hh;
          return 1.0 + d * dp / hh;
        }
        // Additive: S(p) + c dp/h, with dS/dp the local spring rate.
        const T& damping = AdditiveDamping(law, params);
        const double cd = ScalarValue(damping);
        double k_local;
        if (law == LawId::kKelvinVoigt) {
          k_local = ScalarValue(params[0]);
        } else {
          k_local = p <= ScalarValue(params[2]) ? ScalarValue(params[0]) : ScalarValue(params[1]);
        }
        *slope = k_local * dp + cd * ddp / hh;
        return ScalarValue(ElasticContactForce(law, params, setup.tread, T(p))) + cd * dp / hh;
      };
      double lo = 0.0, hi = 1.0, slope = 0.0;
      double s = 1.0;
      for (int iteration = 0; iteration < 100; ++iteration) {
        const double f = fn(s, &slope);
        if (f > 0.0)
          lo = s;
        else
          hi = s;
        double next = (slope != 0.0) ? s - f / slope : 0.5 * (lo + hi);
        if (!(next > lo && next < hi)) next = 0.5 * (lo + hi);
        if (std::abs(next - s) < 1e-15 || hi - lo < 1e-15) {
          s = next;
          break;
        }
        s = next;
      }
      // The stages past the event see the force law's continuation, which is less smooth
      // there (delta^n at 0; the knee); retry once with the step ending at the event so that
      // the final root lies in a step that is smooth up to it.
      if (!retried_event && s < 1.0 - 1e-3) {
        retried_event = true;
        h = s * hh;
        continue;
      }
      retried_event = false;
      // One Newton step in T so that the root carries its parameter derivatives.
      fn(s, &slope);
      T s_root(s);
      if (slope != 0.0) {
        T f_t;
        if (multiplicative) {
          f_t = on_position ? QuinticValue(c, s) : 1.0 + MultiplicativeDamping(law, params) * QuinticSlope(c, s) / hh;
        } else {
          f_t = ElasticContactForce(law, params, setup.tread, QuinticValue(c, s)) +
                AdditiveDamping(law, params) * QuinticSlope(c, s) / hh;
        }
        s_root = s - f_t / slope;
      }
      const T t_sep = t_step + hh * s_root;
      observer.PressedStep(t_step, hh, ScalarValue(t_sep), c, false);
      result.end = PressedEnd::kSeparated;
      result.t = t_sep;
      result.v = QuinticSlope(c, s_root) / hh;
      result.x = QuinticValue(c, s_root);
      if (on_position || ScalarValue(result.x) <= 0.0) {
        // Separated exactly at the onset height (multiplicative laws; undamped additive ones).
        result.x = T(0.0);
        result.separated_at_level = true;
      }
      return result;
    }
    if (law == LawId::kBilinear) {
      // The spring rate jumps at the knee: end the step there (once) so that no step
      // straddles the kink, which would cost accuracy or many rejected steps.
      const double knee = ScalarValue(params[2]);
      const double before = ScalarValue(x) - knee, after = xv - knee;
      if ((before < 0.0) != (after < 0.0) && !retried_knee) {
        double cv[6];
        for (int i = 0; i < 6; ++i) cv[i] = ScalarValue(c[i]);
        cv[0] -= knee;
        double lo = 0.0, hi = 1.0;
        const bool rising = before < 0.0;
        for (int k = 0; k < 60; ++k) {
          const double mid = 0.5 * (lo + hi);
          ((QuinticValue(cv, mid) < 0.0) == rising ? lo : hi) = mid;
        }
        // A crossing right at the step start (the previous step ended a rounding error
        // short of the knee) needs no retry.
        if (hi > 1e-6 && hi < 1.0 - 1e-3) {
          retried_knee = true;
          h = hi * hh;
          continue;
        }
      }
      retried_knee = false;
    }
    observer.PressedStep(t_step, hh, t0v + tau + hh, c, to_end);
    x = x7;
    v = v7;
    a = a7;
    tau += hh;
    double factor = err > 0.0 ? 0.9 * std::pow(err, -0.2) : 5.0;
    factor = std::clamp(factor, 0.2, last_rejected ? 1.0 : 5.0);
    last_rejected = false;
    if (!to_end) h = hh * factor;
  }
}

// The phase machine (see the top of this file).
template <typename T, typename Observer>
SimulationStatus RunDrop(const ContactSetup& setup, const T* params, const T& onset_height_m, double start_time_s,
                         const T& start_height_m, const T& start_velocity_mps, double t_end,
                         const ForwardModelOptions& options, Observer& observer) {
  const double g = setup.gravity_mps2;
  T t(start_time_s);
  T x = onset_height_m - start_height_m;
  T v = -start_velocity_mps;
  int steps = 0;
  int phases = 0;
  // pressed: integrate; otherwise a closed-form flight (above, or below with zero force).
  bool pressed = false;
  {
    const double xv = ScalarValue(x), vv = ScalarValue(v);
    if (xv == 0.0 && vv > 0.0) {
      x = T(0.0);
      observer.Onset(t, v);
      pressed = true;
    } else if (xv > 0.0 && Pressing(setup, params, x, v)) {
      observer.StartPressed(t);
      pressed = true;
    }
  }
  while (!observer.Done()) {
    if (++phases > 2 * options.max_impacts + 2) return SimulationStatus::kTooManyImpacts;
    const double tv = ScalarValue(t);
    if (!IsFiniteValue(tv) || !IsFiniteValue(ScalarValue(x)) || !IsFiniteValue(ScalarValue(v))) {
      return SimulationStatus::kNonFinite;
    }
    if (tv >= t_end) break;
    if (pressed) {
      const PressedResult<T> r = IntegratePressed(setup, params, t, x, v, t_end, options, &steps, observer);
      if (r.end == PressedEnd::kTooManySteps) return SimulationStatus::kTooManySteps;
      if (r.end == PressedEnd::kNonFinite) return SimulationStatus::kNonFinite;
      t = r.t;
      x = r.x;
      v = r.v;
      if (r.end == PressedEnd::kReachedEnd) break;
      observer.Separation(t, x, v);
      if (r.separated_at_level) observer.LevelUp(t, v);
      pressed = false;
      continue;
    }
    // Flight.
    const double xv = ScalarValue(x);
    T delay;
    int event = 0;  // 0: none, 1: onset, 2: level up, 3: recontact
    if (xv <= 0.0) {
      delay = OnsetDelay(x, v, g);
      event = 1;
    } else {
      const T level = LevelUpDelay(x, v, g);
      const T again = RecontactDelay(setup, params, x, v, g);
      if (ScalarValue(level) <= ScalarValue(again)) {
        delay = level;
        event = 2;
      } else {
        delay = again;
        event = 3;
      }
    }
    const double dv = ScalarValue(delay);
    if (!(dv < std::numeric_limits<double>::infinity()) || tv + dv >= t_end) {
      observer.Flight(t, t_end, x, v, true);
      const double rest = t_end - tv;
      x = x + rest * (v + (0.5 * g) * rest);
      v = v + g * rest;
      t = T(t_end);
      break;
    }
    const T t_next = t + delay;
    observer.Flight(t, ScalarValue(t_next), x, v, false);
    const T v_next = v + g * delay;
    switch (event) {
      case 1:
        t = t_next;
        x = T(0.0);
        v = v_next;
        observer.Onset(t, v);
        pressed = true;
        break;
      case 2:
        t = t_next;
        x = T(0.0);
        v = v_next;
        observer.LevelUp(t, v);
        break;
      default:
        x = x + delay * (v + (0.5 * g) * delay);
        t = t_next;
        v = v_next;
        observer.Recontact(t);
        pressed = true;
        break;
    }
  }
  observer.Finish(t, x, v, pressed);
  return SimulationStatus::kOk;
}

// Observer that fills hub heights (and velocities) at sample times.
template <typename T>
struct SampleObserver {
  const double* times;
  int count;
  int next = 0;
  T* heights;
  T* velocities;
  const T* onset;
  double g;

  bool Done() const { return next >= count; }
  void Store(const T& x, const T& v) {
    heights[next] = *onset - x;
    if (velocities != nullptr) velocities[next] = -v;
    ++next;
  }
  void Flight(const T& t0, double t1, const T& x0, const T& v0, bool reaches_end) {
    while (next < count && (reaches_end || times[next] < t1)) {
      const T tau = times[next] - t0;
      Store(x0 + tau * (v0 + (0.5 * g) * tau), v0 + g * tau);
    }
  }
  void PressedStep(const T& t0, double h, double t1, const T* c, bool reaches_end) {
    while (next < count && (reaches_end || times[next] < t1)) {
      const T s = (times[next] - t0) / h;
      Store(QuinticValue(c, s), QuinticSlope(c, s) / h);
    }
  }
  void Onset(const T&, const T&) {}
  void StartPressed(const T&) {}
  void Separation(const T&, const T&, const T&) {}
  void Recontact(const T&) {}
  void LevelUp(const T&, const T&) {}
  // Samples at the very end that no segment covered (a phase starting exactly at the end).
  void Finish(const T&, const T& x, const T& v, bool) {
    while (next < count) Store(x, v);
  }
};

}  // namespace detail

template <typename T>
SimulationStatus SimulateHubHeights(const ContactSetup& setup, const T* law_params, const T& onset_height_m,
                                    double start_time_s, const T& start_height_m, const T& start_velocity_mps,
                                    const double* sample_times_s, int num_samples, T* heights_m,
                                    std::type_identity_t<T>* velocities_mps, const ForwardModelOptions& options) {
  assert(num_samples >= 0);
  if (num_samples == 0) return SimulationStatus::kOk;
  assert(sample_times_s[0] >= start_time_s);
  assert(std::is_sorted(sample_times_s, sample_times_s + num_samples));
  detail::SampleObserver<T> observer{sample_times_s,  num_samples,       0, heights_m, velocities_mps,
                                     &onset_height_m, setup.gravity_mps2};
  const SimulationStatus status =
      detail::RunDrop(setup, law_params, onset_height_m, start_time_s, start_height_m, start_velocity_mps,
                      sample_times_s[num_samples - 1], options, observer);
  return status;
}

}  // namespace dropfit::analysis
