// The choice among fitted laws (analysis/law_choice.h, docs/methods.md §13) on hand-made fit
// results, and the effective sample count against the exact variance of the mean of a
// first-order autoregressive series.
#include "analysis/law_choice.h"

#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <vector>

namespace dropfit::analysis {
namespace {

// Var(mean) of N samples of an AR(1) series with lag-1 correlation rho, over sigma^2 / N:
// 1 + 2 sum_{k=1}^{N-1} (1 - k/N) rho^k (the variance of a sample mean of a stationary series,
// e.g. Priestley, Spectral Analysis and Time Series, 1981, eq. 5.3.5, FROM MEMORY; rho^k is
// the AR(1) autocorrelation). N / N_eff must equal it for large N.
double ExactVarianceRatio(int n, double rho) {
  double sum = 0.0;
  for (int k = 1; k < n; ++k) sum += (1.0 - static_cast<double>(k) / n) * std::pow(rho, k);
  return 1.0 + 2.0 * sum;
}

TEST(EffectiveSampleCount, MatchesTheExactVarianceOfTheMeanOfAnAutoregressiveSeries) {
  for (double rho : {0.1, 0.5, 0.9}) {
    const int n = 20000;
    EXPECT_NEAR(n / EffectiveSampleCount(n, rho), ExactVarianceRatio(n, rho), 2e-3 * ExactVarianceRatio(n, rho)) << rho;
  }
  EXPECT_DOUBLE_EQ(EffectiveSampleCount(1000, 0.0), 1000.0);
  EXPECT_DOUBLE_EQ(EffectiveSampleCount(1000, -0.3), 1000.0);  // anti-correlation not rewarded
  EXPECT_DOUBLE_EQ(EffectiveSampleCount(1000, std::nan("")), 1000.0);
  EXPECT_NEAR(EffectiveSampleCount(990, 1.0), 990.0 * 0.02 / 1.98, 1e-9);  // clamped at 0.98
}

// The integrated autocorrelation time by Geyer's initial positive sequence (law_choice.h):
// for an AR(1) autocorrelation rho^k it is the closed form (1 + rho) / (1 - rho) (the same
// exact variance ratio as above, large N); for a first-order moving average (rho_1 only) it
// is 1 + 2 rho_1 (the same sum, finite); white noise gives 1; anti-correlation is not
// rewarded; the long tail of a slowly varying error counts where the lag-1 formula misses it.
TEST(CorrelationTime, MatchesTheClosedFormsOfAutoregressiveAndMovingAverageSeries) {
  for (double rho : {0.1, 0.5, 0.9}) {
    std::vector<double> acf(201);
    for (size_t k = 0; k < acf.size(); ++k) acf[k] = std::pow(rho, static_cast<double>(k));
    EXPECT_NEAR(CorrelationTime(acf), (1.0 + rho) / (1.0 - rho), 1e-6 * (1.0 + rho) / (1.0 - rho)) << rho;
    EXPECT_NEAR(CorrelationTime(acf), ExactVarianceRatio(20000, rho), 2e-3 * ExactVarianceRatio(20000, rho)) << rho;
  }
  EXPECT_DOUBLE_EQ(CorrelationTime({1.0, 0.4, 0.0, 0.0, 0.0}), 1.8);
  EXPECT_DOUBLE_EQ(CorrelationTime({1.0, 0.0, 0.0, 0.0}), 1.0);
  EXPECT_DOUBLE_EQ(CorrelationTime({1.0, -0.4, 0.1, 0.0}), 1.0);  // anti-correlated: 1, not below
  // lag 1 at 0.15, then a tail of 0.08 over 20 lags: tau = 1 + 2 (0.15 + 19 x 0.08) = 4.34,
  // where the lag-1 formula gives 1.35.
  std::vector<double> tail(40, 0.0);
  tail[0] = 1.0;
  tail[1] = 0.15;
  for (int k = 2; k <= 20; ++k) tail[static_cast<size_t>(k)] = 0.08;
  EXPECT_NEAR(CorrelationTime(tail), 1.0 + 2.0 * (0.15 + 19 * 0.08), 1e-12);
  std::vector<double> flat(10, 1.0);
  EXPECT_DOUBLE_EQ(CorrelationTime(flat), 19.0);  // five pairs of 2, as far as the lags go
  EXPECT_DOUBLE_EQ(CorrelationTime(std::vector<double>(400, 1.0)), kMaxCorrelationTime);
}

// A hand-made fit: parameters 2.0, SDs 1 % except the last (worst_rel_sd), p = 10, N = 1000.
LawFitResult Fit(LawId law, double bic, double rms_m, bool converged, double worst_rel_sd) {
  LawFitResult f;
  f.law = law;
  f.param_names = ParameterNames(law);
  f.params.assign(f.param_names.size(), 2.0);
  f.param_sd.assign(f.param_names.size(), 0.02);
  f.param_sd.back() = worst_rel_sd * 2.0;
  if (law == LawId::kHertz) f.params[1] = 1.5, f.param_sd[1] = 0.0;
  f.bic = bic;
  f.rms_residual_m = rms_m;
  f.rms_contact_m = rms_m;
  f.robust_sd_m = f.robust_sd_contact_m = rms_m;
  f.converged = converged;
  f.samples = 1000;
  f.free_parameters = 10;
  return f;
}

TEST(RankLaws, AFitAtTheIterationCapKeepsItsPlaceByBic) {
  std::vector<LawFitResult> fits{Fit(LawId::kKelvinVoigt, -100, 50e-6, true, 0.01),
                                 Fit(LawId::kHuntCrossley, -3500, 9e-6, /*converged=*/false, 0.01),
                                 Fit(LawId::kBilinear, -200, 45e-6, true, 0.01)};
  fits.push_back(Fit(LawId::kVolumetric, 0, 0, true, 0.01));
  fits.back().failure = "no complete bounce";
  EXPECT_EQ(RankLaws(fits), (std::vector<int>{1, 2, 0, 3}));
}

TEST(RankLaws, AnUndeterminedParameterNeverRanksAboveADeterminedLawWithNoLargerResidual) {
  // Bilinear with an undetermined parameter (SD 90 %) has the lowest BIC but a larger residual
  // than hunt-crossley -> hunt-crossley first; kelvin-voigt, determined but with a larger
  // residual than bilinear, stays below it.
  const std::vector<LawFitResult> fits{Fit(LawId::kKelvinVoigt, -900, 60e-6, true, 0.01),
                                       Fit(LawId::kHuntCrossley, -950, 9.3e-6, true, 0.01),
                                       Fit(LawId::kBilinear, -1000, 50.7e-6, true, 0.9)};
  EXPECT_TRUE(HasUndeterminedParameter(fits[2]));
  EXPECT_FALSE(HasUndeterminedParameter(fits[1]));
  EXPECT_EQ(RankLaws(fits), (std::vector<int>{1, 2, 0}));
  // An infinite SD counts as undetermined too; with no determined law of residual <= its own,
  // the undetermined law keeps its place.
  std::vector<LawFitResult> alone{Fit(LawId::kBilinear, -1000, 5e-6, true, 0.01),
                                  Fit(LawId::kKelvinVoigt, -900, 6e-6, true, 0.01)};
  alone[0].param_sd[1] = std::numeric_limits<double>::infinity();
  EXPECT_EQ(RankLaws(alone), (std::vector<int>{0, 1}));
  // Hertz's fixed exponent (SD 0) is not a parameter the data must determine.
  EXPECT_FALSE(HasUndeterminedParameter(Fit(LawId::kHertz, 0, 1e-5, true, 0.01)));
}

TEST(ChooseLaw, CorrelatedResidualsShrinkTheGainOfASpareParameter) {
  // Bilinear buys 2 % of RSS with 2 more parameters. Over N = 1000 independent samples that
  // wins (1000 ln 0.98 = -20.2 against a penalty of 2 ln 1000 = 13.8); with residuals
  // correlated at rho = 0.9 (N_eff = 52.6) it does not (-1.06 against 2 ln 52.6 = 7.9).
  LawFitResult kv = Fit(LawId::kKelvinVoigt, 0, 10e-6, true, 0.01);
  LawFitResult bl = Fit(LawId::kBilinear, 0, 10e-6 * std::sqrt(0.98), true, 0.01);
  bl.params = {1e5, 1.3e5, 0.004, 100};  // a resolved knee: k1 and k2 differ by 30 SDs
  bl.param_sd = {1e3, 1e3, 1e-4, 2};
  bl.free_parameters = 12;
  BounceFitFigures b;
  b.max_deflection_m = 0.01;
  bl.figures = {b};
  for (double rho : {0.0, 0.9}) {
    kv.residual_lag1_correlation = bl.residual_lag1_correlation = rho;
    std::vector<LawFitResult> fits{kv, bl};
    const LawChoice c = ChooseLaw(fits, std::nan(""));
    ASSERT_TRUE(c.best);
    EXPECT_EQ(fits[*c.best].law, rho == 0.0 ? LawId::kBilinear : LawId::kKelvinVoigt) << rho;
    EXPECT_NEAR(c.effective_samples, EffectiveSampleCount(1000, rho), 1e-9);
    EXPECT_NEAR(fits[0].rank_criterion, c.effective_samples * std::log(1e-10) + 10 * std::log(c.effective_samples),
                1e-6);
  }
}

TEST(ChooseLaw, NestedLawsTheDataCannotTellApartGiveTheSimplerOneWithTheOtherListed) {
  // hunt-crossley with n = 1.56 +- 0.05 (within 2 SD of 1.5) ranks first: hertz is the best law.
  LawFitResult hc = Fit(LawId::kHuntCrossley, -1010, 10e-6, true, 0.01);
  hc.params = {1e7, 1.56, 0.2};
  hc.param_sd = {1e5, 0.05, 0.002};
  LawFitResult hz = Fit(LawId::kHertz, -1000, 10.05e-6, true, 0.01);  // criterion +10: distinguished
  LawFitResult kv = Fit(LawId::kKelvinVoigt, -500, 40e-6, true, 0.01);
  std::vector<LawFitResult> fits{kv, hc, hz};
  LawChoice c = ChooseLaw(fits, std::nan(""));
  ASSERT_TRUE(c.best);
  EXPECT_EQ(fits[*c.best].law, LawId::kHertz);
  EXPECT_EQ(c.equivalent, std::vector<int>{1});
  // n = 1.8 +- 0.05 is resolved: hunt-crossley stays.
  fits[1].params[1] = 1.8;
  c = ChooseLaw(fits, std::nan(""));
  EXPECT_EQ(fits[*c.best].law, LawId::kHuntCrossley);
  EXPECT_TRUE(c.equivalent.empty());

  // bilinear whose k1 and k2 agree within 2 SD of their difference, or whose knee lies beyond
  // every measured deflection, is kelvin-voigt.
  LawFitResult bl = Fit(LawId::kBilinear, -1010, 10e-6, true, 0.01);
  bl.params = {1.00e5, 1.01e5, 0.004, 100};
  bl.param_sd = {1e3, 1e3, 1e-4, 2};
  bl.param_covariance = {{1e6, 0, 0, 0}, {0, 1e6, 0, 0}, {0, 0, 1e-8, 0}, {0, 0, 0, 4}};
  BounceFitFigures b;
  b.max_deflection_m = 0.01;
  bl.figures = {b};
  LawFitResult kv2 = Fit(LawId::kKelvinVoigt, -1000, 10.01e-6, true, 0.01);
  EXPECT_TRUE(NestedLawUnresolved(bl, kv2));
  bl.params[1] = 1.5e5;  // 35 SDs apart, knee inside the deflections: resolved
  EXPECT_FALSE(NestedLawUnresolved(bl, kv2));
  bl.params[2] = 0.012;  // knee beyond the largest deflection: k2 never acts
  EXPECT_TRUE(NestedLawUnresolved(bl, kv2));
  std::vector<LawFitResult> pair{kv2, bl};
  c = ChooseLaw(pair, std::nan(""));
  EXPECT_EQ(pair[*c.best].law, LawId::kKelvinVoigt);
  EXPECT_EQ(c.equivalent, std::vector<int>{1});
  EXPECT_FALSE(LawNests(LawId::kKelvinVoigt, LawId::kBilinear));
}

TEST(ChooseLaw, NoLawFitsWhenTheBestLeavesMoreThanThreeTimesTheTracksNoise) {
  std::vector<LawFitResult> fits{Fit(LawId::kKelvinVoigt, -900, 40e-6, true, 0.01),
                                 Fit(LawId::kHertz, -950, 35e-6, true, 0.01)};
  LawChoice c = ChooseLaw(fits, 10e-6);
  ASSERT_TRUE(c.no_law_fits);
  EXPECT_NE(c.no_law_fits->find("hertz"), std::string::npos) << *c.no_law_fits;
  EXPECT_NE(c.no_law_fits->find("10.0 um"), std::string::npos) << *c.no_law_fits;
  c = ChooseLaw(fits, 12e-6);  // 35 < 3 x 12
  EXPECT_FALSE(c.no_law_fits);
  EXPECT_TRUE(std::isnan(TrackNoise({})));
}

}  // namespace
}  // namespace dropfit::analysis
