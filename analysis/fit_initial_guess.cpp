#include "analysis/fit_initial_guess.h"

#include <algorithm>
#include <cmath>
#include <sstream>
#include <stdexcept>

namespace dropfit::analysis {

namespace {

// Bisection for a function with f(lo) and f(hi) of opposite signs.
template <typename F>
double Bisect(F f, double lo, double hi) {
  double f_lo = f(lo);
  for (int i = 0; i < 200 && hi - lo > 1e-15 * std::max(1.0, std::abs(hi)); ++i) {
    const double mid = 0.5 * (lo + hi);
    const double f_mid = f(mid);
    if ((f_mid > 0.0) == (f_lo > 0.0)) {
      lo = mid;
      f_lo = f_mid;
    } else {
      hi = mid;
    }
  }
  return 0.5 * (lo + hi);
}

// w - ln(1 + w), accurate for small w.
double CompressionWork(double w) {
  if (w < 1e-4) return w * w * (0.5 - w / 3.0 + w * w / 4.0);
  return w - std::log1p(w);
}

// Int_0^delta_max V(d) dd by composite Simpson (V is smooth for d > 0).
double VolumeIntegral(const TreadGeometry& tread, double delta_max_m) {
  constexpr int kIntervals = 200;  // even; V ~ d^1.5..d^2, Simpson error far below a guess's needs
  const double h = delta_max_m / kIntervals;
  double sum = 0.0;
  for (int i = 0; i <= kIntervals; ++i) {
    const double w = (i == 0 || i == kIntervals) ? 1.0 : (i % 2 == 1 ? 4.0 : 2.0);
    sum += w * InterpenetrationVolume(tread, i * h);
  }
  return sum * h / 3.0;
}

bool Known(double x) { return std::isfinite(x) && x > 0.0; }

}  // namespace

double KelvinVoigtOmegaContactTime(double zeta) {
  if (zeta < 1.0) {
    const double s = std::sqrt(1.0 - zeta * zeta);
    return (M_PI - std::atan2(2.0 * zeta * s, 1.0 - 2.0 * zeta * zeta)) / s;
  }
  if (zeta == 1.0) return 2.0;
  const double omega = std::sqrt(zeta * zeta - 1.0);
  return 2.0 * std::log(zeta + omega) / omega;
}

double KelvinVoigtCor(double zeta) { return std::exp(-zeta * KelvinVoigtOmegaContactTime(zeta)); }

double KelvinVoigtZetaFromCor(double cor) {
  if (!(cor > 0.0 && cor < 1.0)) {
    std::ostringstream msg;
    msg << "KelvinVoigtZetaFromCor: COR " << cor << " is outside (0, 1); pass a COR of a damped impact";
    throw std::invalid_argument(msg.str());
  }
  // e(zeta) decreases from 1 (zeta = 0) towards 0 (e ~ 1/(4 zeta^2) for large zeta, S&P eq. 22).
  double hi = 1.0;
  while (KelvinVoigtCor(hi) > cor && hi < 1e8) hi *= 2.0;
  return Bisect([cor](double z) { return KelvinVoigtCor(z) - cor; }, 0.0, hi);
}

double KelvinVoigtDeflectionFactor(double zeta) {
  if (zeta <= 0.0) return 1.0;
  if (zeta < 1.0) {
    const double s = std::sqrt(1.0 - zeta * zeta);
    return std::exp(-zeta / s * std::atan(s / zeta));
  }
  if (zeta == 1.0) return std::exp(-1.0);
  const double omega = std::sqrt(zeta * zeta - 1.0);
  const double tau = std::log((zeta + omega) / (zeta - omega)) / (2.0 * omega);
  return (std::exp(-(zeta - omega) * tau) - std::exp(-(zeta + omega) * tau)) / (2.0 * omega);
}

double CorFromMultiplicativeDamping(double w) {
  if (w <= 0.0) return 1.0;
  // Solve e w + ln(1 - e w) = -(w - ln(1 + w)) for e in (0, 1/w) ∩ (0, 1].
  const double lhs = CompressionWork(w);
  const double hi = std::min(1.0, (1.0 - 1e-15) / w);
  return Bisect([&](double e) { return e * w + std::log1p(-e * w) + lhs; }, 0.0, hi);
}

double MultiplicativeDampingFromCor(double cor) {
  if (!(cor > 0.0 && cor <= 1.0)) {
    std::ostringstream msg;
    msg << "MultiplicativeDampingFromCor: COR " << cor << " is outside (0, 1]";
    throw std::invalid_argument(msg.str());
  }
  if (cor == 1.0) return 0.0;
  // CorFromMultiplicativeDamping decreases from 1 at w = 0 to 0 as w grows.
  double hi = 1.0;
  while (CorFromMultiplicativeDamping(hi) > cor && hi < 1e12) hi *= 2.0;
  return Bisect([cor](double w) { return CorFromMultiplicativeDamping(w) - cor; }, 0.0, hi);
}

double PowerLawContactTimeConstant(double n) {
  const double a = 1.0 / (n + 1.0);
  const double beta = std::tgamma(a) * std::tgamma(0.5) / std::tgamma(a + 0.5);
  return 2.0 / (n + 1.0) * beta;
}

double PowerLawExponentFromContactTimeConstant(double c) {
  constexpr double lo = kHuntCrossleyExponentMin, hi = kHuntCrossleyExponentMax;
  if (c >= PowerLawContactTimeConstant(lo)) return lo;
  if (c <= PowerLawContactTimeConstant(hi)) return hi;
  return Bisect([c](double n) { return PowerLawContactTimeConstant(n) - c; }, lo, hi);
}

InitialGuessResult GuessLawParameters(LawId law, const ImpactGuessFigures& figures, double mass_kg,
                                      const TreadGeometry& tread) {
  InitialGuessResult out;
  const double v = figures.impact_speed_mps;
  if (!Known(v) || !Known(mass_kg)) {
    out.failure = "no impact speed (or mass) to start the fit from";
    return out;
  }
  const bool have_deflection = Known(figures.max_deflection_m);
  const bool have_duration = Known(figures.contact_duration_s);
  if (!have_deflection && !have_duration) {
    out.failure = "neither a maximum deflection nor a contact duration to start the fit from";
    return out;
  }
  std::ostringstream note;
  // COR: a measured value, clamped into the range the relations accept.
  double e = figures.cor;
  if (!std::isfinite(e) || e <= 0.0) {
    e = 0.7;
    note << "no COR measured, assumed 0.7; ";
  }
  e = std::clamp(e, 0.02, 0.999);
  const double m = mass_kg;

  // Kelvin-Voigt from S&P eq. 21: stiffness from the deflection first, from the duration second.
  const double zeta = KelvinVoigtZetaFromCor(e);
  std::vector<double> omegas;
  if (have_deflection) omegas.push_back(v * KelvinVoigtDeflectionFactor(zeta) / figures.max_deflection_m);
  if (have_duration) {
    const double omega = KelvinVoigtOmegaContactTime(zeta) / figures.contact_duration_s;
    if (omegas.empty() || std::abs(omega / omegas[0] - 1.0) > 0.1) omegas.push_back(omega);
  }
  // The deflection used by the power laws: measured, else the elastic one implied by t_c.
  const double delta =
      have_deflection ? figures.max_deflection_m : figures.contact_duration_s * v / PowerLawContactTimeConstant(1.5);
  const double w = MultiplicativeDampingFromCor(e);
  const double alpha = w / v;
  // k delta^(n+1)/(n+1) = m (w - ln(1+w))/alpha^2 (exact compression work), -> m v^2/2.
  const double work_j = w > 0.0 ? m * CompressionWork(w) / (alpha * alpha) : 0.5 * m * v * v;
  const auto power_k = [&](double n) { return (n + 1.0) * work_j / std::pow(delta, n + 1.0); };

  InitialGuess guess;
  switch (law) {
    case LawId::kKelvinVoigt:
      for (double omega : omegas) {
        const double k = m * omega * omega;
        guess.starts.push_back({k, 2.0 * zeta * std::sqrt(k * m)});
      }
      note << "k from " << (have_deflection ? "deflection" : "duration")
           << " and c from the COR through Schwager & Poeschel 2007 eq. 21 (zeta = " << zeta << ")";
      break;
    case LawId::kHuntCrossley: {
      double n0 = 1.5;
      if (have_deflection && have_duration) {
        n0 = std::clamp(PowerLawExponentFromContactTimeConstant(figures.contact_duration_s * v / delta), 0.7, 3.0);
      }
      guess.starts.push_back({power_k(n0), n0, alpha});
      for (double n : {1.5, 1.1, 2.2}) {
        if (std::abs(n - n0) > 0.25) guess.starts.push_back({power_k(n), n, alpha});
      }
      note << "alpha from the exact COR relation (docs/methods.md §5), k from the exact compression work, "
           << "starting exponent " << n0;
      break;
    }
    case LawId::kHertz:
      guess.starts.push_back({power_k(1.5), 1.5, alpha});
      note << "alpha from the exact COR relation (docs/methods.md §5), k from the exact compression work";
      break;
    case LawId::kBilinear:
      for (double omega : omegas) {
        const double k = m * omega * omega;
        const double c = 2.0 * zeta * std::sqrt(k * m);
        guess.starts.push_back({k, k, 0.5 * delta, c});
        guess.starts.push_back({1.6 * k, 0.6 * k, 0.4 * delta, c});
        guess.starts.push_back({0.6 * k, 1.6 * k, 0.4 * delta, c});
        break;  // one stiffness estimate is enough with three shapes
      }
      note << "from the Kelvin-Voigt guess with three knee shapes";
      break;
    case LawId::kVolumetric: {
      const double integral = VolumeIntegral(tread, delta);
      if (!(integral > 0.0)) {
        out.failure = "the tread geometry gives no interpenetration volume at the measured deflection";
        return out;
      }
      guess.starts.push_back({work_j / integral, alpha});
      note << "a from the exact COR relation (docs/methods.md §5), kv from the exact compression work";
      break;
    }
    case LawId::kBottoming:
      out.failure = "bottoming is a rendering truth, not a law dropfit fits";
      return out;
  }
  guess.note = note.str();
  out.guess = std::move(guess);
  return out;
}

}  // namespace dropfit::analysis
