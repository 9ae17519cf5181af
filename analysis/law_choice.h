#pragma once
// The choice among the fitted contact laws (docs/methods.md §13, "Model choice"): a ranking
// criterion that counts correlated residuals honestly, a rule for parameters the data do not
// determine, nested laws the data cannot tell apart, and the verdict that no law fits.
//
// Effective sample count. Residuals of a fit to a tracked hub are not independent: the
// tracker's sub-pixel bias varies slowly from frame to frame, so residuals are correlated over
// many frames (on rendered reference clips the tracking error's autocorrelation is 0.1-0.17 at
// lag 1 and still 0.05-0.1 at lag 10). N samples carry about as much information as
//   N_eff = N / tau,   tau = 1 + 2 sum_(k>=1) rho_k
// independent ones, tau the integrated autocorrelation time (the large-N variance of the mean
// of a stationary series is (sigma^2 / N) tau; Sokal 1997, "Monte Carlo methods in statistical
// mechanics", eq. 2.19, FROM MEMORY). The sum is cut by Geyer's initial positive sequence
// (Geyer 1992, Statistical Science 7:473-483, §3.3, FROM MEMORY): with rho_0 = 1 and
// Gamma_m = rho_2m + rho_2m+1, tau = -1 + 2 sum_(m=0)^(M) Gamma_m over the Gammas while they are
// positive. rho_k is pooled over the fit's windows (each window's residuals in sample order)
// up to lag 200; tau is clamped to [1, kMaxCorrelationTime]. For a first-order autoregressive
// series (rho_k = rho^k) tau = (1 + rho) / (1 - rho), the lag-1 formula
//   N_eff = N (1 - rho) / (1 + rho)
// (Bretherton et al. 1999, J. Climate 12:1990-2009, eq. 31, equation number FROM MEMORY;
// EffectiveSampleCount, checked in the tests against the exact finite sum), which serves
// where a fit carries no correlation time; a lag-1 rho alone misses the long tail and
// overstates N_eff by 2-4 on tracked clips.
//
// Ranking criterion (field `rank_criterion`; `bic` keeps its formula):
//   C = N_eff ln(RSS / N) + p ln N_eff,
// the BIC of law_fit.h with the log-likelihood and the penalty counted over N_eff samples.
// One N_eff serves every law of a comparison: that of the fit with the smallest residual,
// whose residuals are the closest to the measurement's own error (a law that misfits has
// correlated residuals of its own, which must not soften its penalty).
//
// Rank order (RankLaws): ascending C (BIC where C is not set), fits that failed last; a fit
// that stopped at the iteration cap or on a bound keeps its place. On top: a law with a
// parameter the data do not determine (relative SD above 50 %) never ranks above a law whose
// parameters are all determined and whose RMS residual is not larger.
//
// Equivalent laws (ChooseLaw). Nested laws whose extra parameters the data do not resolve
// describe the same contact; the simpler one is the best law and the other is listed:
//   bilinear ~ kelvin-voigt   |k1 - k2| <= 2 SD(k1 - k2), or the knee outside the measured
//                             deflections (above the largest, or below 5 % of the smallest,
//                             where k1 knee is negligible);
//   hunt-crossley ~ hertz     |n - 1.5| <= 2 SD(n).
// Laws whose C lies within 2 of the best law's are also listed: the data do not distinguish
// them (Kass & Raftery 1995, J. Am. Stat. Assoc. 90:773-795, §3.2).
//
// No law fits. When even the best law leaves residuals whose robust SD (1.4826 x the median
// |residual|, unmoved by a few outlying frames), over all its samples or over those in
// contact (below the onset height), lies above kNoLawFitsRatio times the noise of the
// track (the law-free flight parabolas' residual RMS of analysis/impacts.h, which holds the
// tracker's error and no law's), the verdict names the numbers; the law-free figures (COR,
// impact and rebound speeds, track-only duration and deflection) are then the result.

#include <optional>
#include <string>
#include <vector>

#include "analysis/law_fit.h"

namespace dropfit::analysis {

constexpr double kMaxLag1Correlation = 0.98;
// The largest integrated autocorrelation time counted ((1 + 0.98) / (1 - 0.98)).
constexpr double kMaxCorrelationTime = 99.0;
// Residuals that differ by less than this fraction count as equal in RankLaws.
constexpr double kRankResidualTolerance = 1e-3;
// Residual RMS over the track's noise above which no law fits.
constexpr double kNoLawFitsRatio = 3.0;

// The integrated autocorrelation time tau of a series from its autocorrelation at lags
// 0, 1, 2, ... (element 0 is 1), by Geyer's initial positive sequence (above); in
// [1, kMaxCorrelationTime].
double CorrelationTime(const std::vector<double>& autocorrelation);
// N (1 - rho) / (1 + rho) with rho clamped to [0, kMaxLag1Correlation]; N for a NaN rho.
double EffectiveSampleCount(int samples, double lag1_correlation);

// N_eff ln(RSS / N) + p ln N_eff for the fit's RSS (rms_residual_m^2 N) and p; NaN for a
// failed fit.
double RankCriterion(const LawFitResult& fit, double effective_samples);

// True when a parameter the fit moves has a relative SD above 50 % (or an infinite one):
// the data do not determine it. Hertz's fixed exponent is not counted.
bool HasUndeterminedParameter(const LawFitResult& fit);

// Indices of `fits` in rank order (see above).
std::vector<int> RankLaws(const std::vector<LawFitResult>& fits);

// True when `outer` contains `inner` as a special case (bilinear with k1 = k2 is
// kelvin-voigt; hunt-crossley with n = 1.5 is hertz).
bool LawNests(LawId outer, LawId inner);

// True when the fit of `outer` does not resolve what sets it apart from `inner` (the rules
// above); false when the laws do not nest or a fit failed.
bool NestedLawUnresolved(const LawFitResult& outer, const LawFitResult& inner);

// The choice over fits of the same data (AllLaws() order or any order).
struct LawChoice {
  std::optional<int> best;                 // nothing when every fit failed
  std::vector<int> equivalent;             // laws the data cannot tell from the best, rank order
  double effective_samples = 0.0;          // the N_eff of the criterion
  std::optional<std::string> no_law_fits;  // the verdict, with the numbers
};
// Sets every fit's rank_criterion and returns the choice. noise_sd_m: the track's noise
// (median over the clips of FitClip::noise_sd_m); NaN or <= 0: no verdict on the fit.
LawChoice ChooseLaw(std::vector<LawFitResult>& fits, double noise_sd_m);
// The median of the clips' noise_sd_m (NaN when none is known).
double TrackNoise(const std::vector<FitClip>& clips);

// All five laws (AllLaws() order) fitted to the clips, and their choice.
struct LawComparison {
  std::vector<LawFitResult> fits;
  LawChoice choice;
};
LawComparison FitAllLaws(const std::vector<FitClip>& clips, const LawFitOptions& options);

}  // namespace dropfit::analysis
