#include "analysis/law_choice.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>
#include <numeric>

namespace dropfit::analysis {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kInf = std::numeric_limits<double>::infinity();
// Laws whose criteria differ by less than this are not distinguished by the data (Kass &
// Raftery 1995, §3.2).
constexpr double kIndistinctCriterion = 2.0;
// A knee below this fraction of the smallest measured deflection carries a negligible k1 knee.
constexpr double kNegligibleKneeFraction = 0.05;

double Key(const LawFitResult& f) {
  if (f.failure) return kInf;
  if (std::isfinite(f.rank_criterion)) return f.rank_criterion;
  return std::isnan(f.bic) ? kInf : f.bic;
}

int ParamIndex(const LawFitResult& f, const char* name) {
  for (size_t i = 0; i < f.param_names.size(); ++i) {
    if (f.param_names[i] == name) return static_cast<int>(i);
  }
  return -1;
}

std::string Micrometres(double m) {
  char b[32];
  std::snprintf(b, sizeof b, "%.1f um", 1e6 * m);
  return b;
}

}  // namespace

double EffectiveSampleCount(int samples, double lag1_correlation) {
  if (std::isnan(lag1_correlation)) return samples;
  const double rho = std::clamp(lag1_correlation, 0.0, kMaxLag1Correlation);
  return samples * (1.0 - rho) / (1.0 + rho);
}

double CorrelationTime(const std::vector<double>& autocorrelation) {
  // Geyer's initial positive sequence: Gamma_m = rho_2m + rho_2m+1 summed while positive.
  double sum = 0.0;
  for (size_t m = 0; 2 * m + 1 < autocorrelation.size(); ++m) {
    const double gamma = autocorrelation[2 * m] + autocorrelation[2 * m + 1];
    if (!(gamma > 0.0)) break;
    sum += gamma;
  }
  const double tau = -1.0 + 2.0 * sum;
  return std::clamp(std::isfinite(tau) ? tau : 1.0, 1.0, kMaxCorrelationTime);
}

double RankCriterion(const LawFitResult& fit, double effective_samples) {
  if (fit.failure || !(fit.samples > 0) || !(effective_samples > 0.0)) return kNaN;
  const double n = fit.samples;
  const double rss = std::max(fit.rms_residual_m * fit.rms_residual_m * n, 1e-300);
  return effective_samples * std::log(rss / n) + fit.free_parameters * std::log(effective_samples);
}

bool HasUndeterminedParameter(const LawFitResult& fit) {
  for (size_t i = 0; i < fit.params.size() && i < fit.param_sd.size(); ++i) {
    if (ParameterUndetermined(fit, i)) return true;
  }
  return false;
}

std::vector<int> RankLaws(const std::vector<LawFitResult>& fits) {
  std::vector<int> order(fits.size());
  std::iota(order.begin(), order.end(), 0);
  std::stable_sort(order.begin(), order.end(), [&](int a, int b) { return Key(fits[a]) < Key(fits[b]); });
  // An undetermined fit moves to just below the last determined fit with a residual not
  // larger; undetermined fits only move down, and determined ones keep their order.
  const auto outranks = [&](int determined, int undetermined) {
    const LawFitResult& d = fits[determined];
    const LawFitResult& u = fits[undetermined];
    return !d.failure && !u.failure && !HasUndeterminedParameter(d) && HasUndeterminedParameter(u) &&
           d.rms_residual_m <= u.rms_residual_m * (1.0 + kRankResidualTolerance);
  };
  for (bool moved = true; moved;) {
    moved = false;
    for (size_t p = 0; p < order.size() && !moved; ++p) {
      for (size_t q = order.size(); q-- > p + 1;) {
        if (outranks(order[q], order[p])) {
          const auto first = order.begin() + static_cast<std::ptrdiff_t>(p);
          std::rotate(first, first + 1, order.begin() + static_cast<std::ptrdiff_t>(q) + 1);
          moved = true;
          break;
        }
      }
    }
  }
  return order;
}

bool LawNests(LawId outer, LawId inner) {
  return (outer == LawId::kBilinear && inner == LawId::kKelvinVoigt) ||
         (outer == LawId::kHuntCrossley && inner == LawId::kHertz);
}

bool NestedLawUnresolved(const LawFitResult& outer, const LawFitResult& inner) {
  if (outer.failure || inner.failure || !LawNests(outer.law, inner.law)) return false;
  if (outer.law == LawId::kHuntCrossley) {
    const int n = ParamIndex(outer, "n");
    return n >= 0 && !(std::abs(outer.params[n] - 1.5) > 2.0 * outer.param_sd[n]);
  }
  // bilinear ~ kelvin-voigt
  const int k1 = ParamIndex(outer, "k1_n_per_m"), k2 = ParamIndex(outer, "k2_n_per_m"),
            knee = ParamIndex(outer, "knee_m");
  if (k1 < 0 || k2 < 0 || knee < 0) return false;
  const auto& c = outer.param_covariance;
  const double var = c.size() > static_cast<size_t>(std::max(k1, k2))
                         ? c[k1][k1] + c[k2][k2] - 2.0 * c[k1][k2]
                         : outer.param_sd[k1] * outer.param_sd[k1] + outer.param_sd[k2] * outer.param_sd[k2];
  const double diff = std::abs(outer.params[k1] - outer.params[k2]);
  // NaN or infinite variance: the difference is not resolved.
  if (!(diff > 2.0 * std::sqrt(std::max(0.0, var))) || std::isnan(var)) return true;
  double smallest = kInf, largest = 0.0;
  for (const BounceFitFigures& f : outer.figures) {
    if (!std::isfinite(f.max_deflection_m)) continue;
    smallest = std::min(smallest, f.max_deflection_m);
    largest = std::max(largest, f.max_deflection_m);
  }
  if (!(largest > 0.0)) return false;
  return outer.params[knee] >= largest || outer.params[knee] < kNegligibleKneeFraction * smallest;
}

double TrackNoise(const std::vector<FitClip>& clips) {
  std::vector<double> v;
  for (const FitClip& c : clips) {
    if (std::isfinite(c.noise_sd_m) && c.noise_sd_m > 0.0) v.push_back(c.noise_sd_m);
  }
  if (v.empty()) return kNaN;
  std::sort(v.begin(), v.end());
  const size_t m = v.size() / 2;
  return v.size() % 2 ? v[m] : 0.5 * (v[m - 1] + v[m]);
}

LawChoice ChooseLaw(std::vector<LawFitResult>& fits, double noise_sd_m) {
  LawChoice out;
  // The common effective sample count: that of the fit with the smallest residual.
  const LawFitResult* closest = nullptr;
  for (const LawFitResult& f : fits) {
    if (!f.failure && std::isfinite(f.rms_residual_m) && (!closest || f.rms_residual_m < closest->rms_residual_m)) {
      closest = &f;
    }
  }
  if (!closest) return out;
  out.effective_samples = closest->effective_samples > 0.0
                              ? closest->effective_samples
                              : EffectiveSampleCount(closest->samples, closest->residual_lag1_correlation);
  for (LawFitResult& f : fits) f.rank_criterion = RankCriterion(f, out.effective_samples);

  const std::vector<int> order = RankLaws(fits);
  int best = order.front();
  if (fits[best].failure) return out;
  // The simpler of two nested laws the data cannot tell apart.
  for (int i : order) {
    if (LawNests(fits[best].law, fits[i].law) && NestedLawUnresolved(fits[best], fits[i])) {
      best = i;
      break;
    }
  }
  out.best = best;
  for (int i : order) {
    if (i == best || fits[i].failure) continue;
    const bool nested = (LawNests(fits[i].law, fits[best].law) && NestedLawUnresolved(fits[i], fits[best])) ||
                        (LawNests(fits[best].law, fits[i].law) && NestedLawUnresolved(fits[best], fits[i]));
    const bool close = std::abs(Key(fits[i]) - Key(fits[best])) < kIndistinctCriterion;
    if (nested || close) out.equivalent.push_back(i);
  }
  const LawFitResult& b = fits[best];
  // The robust spreads: a few outlying frames are not a law that misfits.
  const double worst = std::max(std::isfinite(b.robust_sd_m) ? b.robust_sd_m : 0.0,
                                std::isfinite(b.robust_sd_contact_m) ? b.robust_sd_contact_m : 0.0);
  if (std::isfinite(noise_sd_m) && noise_sd_m > 0.0 && worst > kNoLawFitsRatio * noise_sd_m) {
    out.no_law_fits = "no law fits: the best of them (" + ToString(b.law) + ") leaves residuals of " +
                      Micrometres(worst) + " (robust SD; " + Micrometres(b.robust_sd_contact_m) +
                      " in contact), over " + std::to_string(static_cast<int>(kNoLawFitsRatio)) +
                      " times the track's noise of " + Micrometres(noise_sd_m) +
                      "; the law-free figures (COR, impact and rebound speeds, track-only contact duration and "
                      "deflection) are the result";
  }
  return out;
}

LawComparison FitAllLaws(const std::vector<FitClip>& clips, const LawFitOptions& options) {
  LawComparison out;
  for (LawId law : AllLaws()) out.fits.push_back(FitLaw(law, clips, options));
  out.choice = ChooseLaw(out.fits, TrackNoise(clips));
  return out;
}

}  // namespace dropfit::analysis
