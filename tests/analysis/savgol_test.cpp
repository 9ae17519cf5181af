// Savitzky-Golay coefficients and filtering with gaps (analysis/savgol.h).
#include "analysis/savgol.h"

#include <gtest/gtest.h>

#include <cmath>
#include <random>
#include <vector>

namespace dropfit::analysis {
namespace {

// The tables are exact fractions; the least-squares solve is good to rounding.
constexpr double kCoefficientTolerance = 1e-12;

void ExpectTable(const std::vector<double>& actual, const std::vector<double>& numerators, double denominator) {
  ASSERT_EQ(actual.size(), numerators.size());
  for (size_t i = 0; i < actual.size(); ++i)
    EXPECT_NEAR(actual[i], numerators[i] / denominator, kCoefficientTolerance) << "weight " << i;
}

// Savitzky & Golay 1964 (Anal. Chem. 36:1627), convolution tables, as quoted in
// docs/methods.md §6 (values reproduced there with scipy.signal.savgol_coeffs).
TEST(SavgolCoefficients, FivePointQuadraticSmoothingEqualsThePublishedTable) {
  ExpectTable(SavgolCoefficients({5, 2}, 0), {-3, 12, 17, 12, -3}, 35.0);
}

TEST(SavgolCoefficients, SevenPointQuadraticSmoothingEqualsThePublishedTable) {
  ExpectTable(SavgolCoefficients({7, 2}, 0), {-2, 3, 6, 7, 6, 3, -2}, 21.0);
}

TEST(SavgolCoefficients, FivePointQuadraticFirstDerivativeEqualsThePublishedTable) {
  ExpectTable(SavgolCoefficients({5, 2}, 1), {-2, -1, 0, 1, 2}, 10.0);
}

TEST(SavgolCoefficients, FurtherPublishedTablesAreReproduced) {
  // Same source (docs/methods.md §6): 9-point smoothing, 5-point cubic derivative, second derivatives.
  ExpectTable(SavgolCoefficients({9, 2}, 0), {-21, 14, 39, 54, 59, 54, 39, 14, -21}, 231.0);
  ExpectTable(SavgolCoefficients({5, 3}, 1), {1, -8, 0, 8, -1}, 12.0);
  ExpectTable(SavgolCoefficients({5, 2}, 2), {2, -1, -2, -1, 2}, 7.0);
  ExpectTable(SavgolCoefficients({7, 2}, 2), {5, 0, -3, -4, -3, 0, 5}, 42.0);
}

TEST(SavgolNoiseGain, MatchesThePublishedVarianceGains) {
  // docs/methods.md §6: sum c^2 = 0.485714 (5-point smoothing), 0.1 (5-point first derivative).
  EXPECT_NEAR(std::pow(SavgolNoiseGain({5, 2}, 0), 2), 17.0 / 35.0, 1e-12);
  EXPECT_NEAR(std::pow(SavgolNoiseGain({5, 2}, 1), 2), 0.1, 1e-12);
}

TEST(SavgolFilter, ReproducesAFreeFallParabolaExactly) {
  // docs/methods.md §6 exactness check: y = 1 + 2 t - 4.903325 t^2, dt = 1 ms.
  const double dt = 1e-3;
  std::vector<double> y(50);
  std::vector<bool> valid(50, true);
  for (size_t i = 0; i < y.size(); ++i) {
    const double t = static_cast<double>(i) * dt;
    y[i] = 1.0 + 2.0 * t - 4.903325 * t * t;
  }
  const SmoothedSeries out = SavgolFilter(y, valid, dt, {7, 2});
  constexpr double kRounding = 1e-9;  // double rounding amplified by 1/dt^2
  for (size_t i = 0; i < y.size(); ++i) {
    ASSERT_TRUE(out.valid[i]);
    const double t = static_cast<double>(i) * dt;
    EXPECT_NEAR(out.value[i], y[i], 1e-12);
    EXPECT_NEAR(out.rate[i], 2.0 - 9.80665 * t, kRounding);
    EXPECT_NEAR(out.accel[i], -9.80665, 1e-5);
  }
}

TEST(SavgolFilter, BridgesAGapWithoutInventingAValueOutsideItsSupport) {
  const double dt = 2e-4;
  std::vector<double> y(60);
  std::vector<bool> valid(60, true);
  for (size_t i = 0; i < y.size(); ++i) {
    const double t = static_cast<double>(i) * dt;
    y[i] = 0.5 - 1.5 * t - 4.903325 * t * t;
  }
  for (size_t i = 20; i < 26; ++i) valid[i] = false;  // 6-frame gap
  for (size_t i = 40; i < 60; ++i) valid[i] = false;  // the tail is lost
  const SmoothedSeries out = SavgolFilter(y, valid, dt, {11, 2});
  // Inside the 6-frame gap an 11-point window still holds enough samples on both sides.
  EXPECT_TRUE(out.valid[22]);
  EXPECT_NEAR(out.value[22], y[22], 1e-10);
  EXPECT_NEAR(out.rate[22], -1.5 - 9.80665 * 22 * dt, 1e-6);
  // Past the last tracked sample there is nothing after: no value.
  EXPECT_FALSE(out.valid[41]);
  EXPECT_FALSE(out.valid[59]);
}

TEST(SavgolFilter, NoiseOfTheSmoothedValueFollowsTheGain) {
  std::mt19937 rng(20240611);
  std::normal_distribution<double> noise(0.0, 1.0);
  std::vector<double> y(20000);
  for (double& v : y) v = noise(rng);
  const SmoothedSeries out = SavgolFilter(y, std::vector<bool>(y.size(), true), 1.0, {7, 2});
  double sum = 0.0;
  int n = 0;
  for (size_t i = 3; i + 3 < y.size(); ++i, ++n) sum += out.value[i] * out.value[i];
  // 20000 samples: the variance estimate is good to a few percent (correlated samples).
  EXPECT_NEAR(sum / n, 1.0 / 3.0, 0.03);
}

TEST(SavgolOptions, AnEvenWindowIsRejectedWithItsValue) {
  const auto message = ValidateSavgolOptions({6, 2});
  ASSERT_TRUE(message.has_value());
  EXPECT_NE(message->find("window = 6"), std::string::npos);
  EXPECT_THROW(SavgolCoefficients({6, 2}, 0), std::invalid_argument);
  EXPECT_THROW(SavgolCoefficients({7, 2}, 3), std::invalid_argument);
}

}  // namespace
}  // namespace dropfit::analysis
