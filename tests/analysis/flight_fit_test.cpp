// Flight-phase polynomial fits, crossings, apex and uncertainty propagation (analysis/flight_fit.h).
#include "analysis/flight_fit.h"

#include <gtest/gtest.h>

#include <cmath>
#include <random>
#include <vector>

namespace dropfit::analysis {
namespace {

// Standard gravity, exact (3rd CGPM 1901; docs/methods.md §1).
constexpr double kG = 9.80665;

struct Samples {
  std::vector<double> t, y;
  std::vector<bool> valid;
};

// A body released at rest from height y0 at t = 0, sampled at `fps` until it has fallen `fall_m`.
Samples FreeFall(double y0, double fall_m, double fps, double noise_sd, std::mt19937& rng) {
  std::normal_distribution<double> noise(0.0, noise_sd);
  Samples s;
  const double t_end = std::sqrt(2.0 * fall_m / kG);
  for (int i = 0; i / fps <= t_end; ++i) {
    const double t = i / fps;
    s.t.push_back(t);
    s.y.push_back(y0 - 0.5 * kG * t * t + (noise_sd > 0 ? noise(rng) : 0.0));
    s.valid.push_back(true);
  }
  return s;
}

TEST(FlightFit, FreeFallFromHeightGivesTheTextbookImpactSpeed) {
  // v = sqrt(2 g h) (docs/methods.md §2 table, g = 9.80665): a parabola fit to the fall, read at
  // the height h below release, within 0.1 %. Noise 10 um at 1000 frames/s (0.02 px at 0.5 mm/px).
  constexpr double kSpeedTolerance = 1e-3;  // acceptance: 0.1 %
  const std::vector<std::pair<double, double>> table = {
      {0.05, 0.990285312}, {0.10, 1.400474919}, {0.20, 1.980570625}, {0.50, 3.131557121}, {1.00, 4.428690551}};
  std::mt19937 rng(7);
  for (const auto& [h, v_published] : table) {
    const Samples s = FreeFall(1.2, h, 1000.0, 10e-6, rng);
    const auto fit = FitPolynomial(s.t, s.y, s.valid, 0, static_cast<int>(s.t.size()) - 1, 2);
    ASSERT_TRUE(fit.has_value());
    const auto t = CrossingTime(*fit, 1.2 - h, Branch::kFalling);
    ASSERT_TRUE(t.has_value());
    const double v = -fit->Derivative(*t);
    EXPECT_NEAR(v / v_published - 1.0, 0.0, kSpeedTolerance) << "h = " << h;
    EXPECT_NEAR(fit->Derivative(0.0, 2), -kG, 0.01 * kG);
  }
}

TEST(FlightFit, NoiseFreeParabolaIsRecoveredToRounding) {
  std::mt19937 rng(1);
  const Samples s = FreeFall(0.8, 0.3, 2000.0, 0.0, rng);
  const auto fit = FitPolynomial(s.t, s.y, s.valid, 0, static_cast<int>(s.t.size()) - 1, 2);
  ASSERT_TRUE(fit.has_value());
  EXPECT_NEAR(-fit->Derivative(*CrossingTime(*fit, 0.5, Branch::kFalling)), 2.425693715, 1e-8);  // §2, h = 0.3
  const auto apex = ParabolaApex(*fit);
  ASSERT_TRUE(apex.has_value());
  EXPECT_NEAR(apex->t_s, 0.0, 1e-9);
  EXPECT_NEAR(apex->height_m, 0.8, 1e-10);
  // The rising branch of the same parabola passes 0.5 m before the apex, symmetrically.
  EXPECT_NEAR(*CrossingTime(*fit, 0.5, Branch::kRising), -*CrossingTime(*fit, 0.5, Branch::kFalling), 1e-9);
  EXPECT_FALSE(CrossingTime(*fit, 0.9, Branch::kFalling).has_value());  // above the apex
}

TEST(FlightFit, PropagatedSpeedUncertaintyMatchesTheScatterOfRepeatedFits) {
  // Monte Carlo check of first-order propagation (GUM, JCGM 100:2008, eq. 13): the sd predicted
  // from one fit's covariance agrees with the spread over 400 noisy repetitions within 15 %
  // (400 samples estimate an sd to about 3.5 %; the predicted sd itself varies a little).
  std::mt19937 rng(99);
  std::vector<double> speeds;
  double predicted = 0.0;
  for (int trial = 0; trial < 400; ++trial) {
    const Samples s = FreeFall(1.0, 0.2, 1000.0, 50e-6, rng);
    const auto fit = FitPolynomial(s.t, s.y, s.valid, 0, static_cast<int>(s.t.size()) - 1, 2);
    ASSERT_TRUE(fit.has_value());
    auto speed = [&](const Eigen::VectorXd& c) {
      PolynomialFit f = *fit;
      f.coef = c;
      return -f.Derivative(*CrossingTime(f, 0.8, Branch::kFalling));
    };
    speeds.push_back(speed(fit->coef));
    predicted += PropagatedSd(speed, fit->coef, fit->covariance) / 400.0;
  }
  double mean = 0.0, var = 0.0;
  for (double v : speeds) mean += v / speeds.size();
  for (double v : speeds) var += (v - mean) * (v - mean) / (speeds.size() - 1);
  EXPECT_NEAR(std::sqrt(var) / predicted, 1.0, 0.15);
}

TEST(FlightFit, GapsAreSkippedAndTooFewSamplesGiveNoFit) {
  std::mt19937 rng(3);
  Samples s = FreeFall(0.6, 0.2, 1000.0, 0.0, rng);
  for (size_t i = 50; i < 56; ++i) {
    s.valid[i] = false;
    s.y[i] = std::nan("");  // must not be read
  }
  const auto fit = FitPolynomial(s.t, s.y, s.valid, 0, static_cast<int>(s.t.size()) - 1, 2);
  ASSERT_TRUE(fit.has_value());
  EXPECT_EQ(fit->samples, static_cast<int>(s.t.size()) - 6);
  EXPECT_NEAR(fit->Derivative(0.1), -kG * 0.1, 1e-9);
  EXPECT_FALSE(FitPolynomial(s.t, s.y, s.valid, 0, 2, 2).has_value());
  EXPECT_THROW(FitPolynomial(s.t, s.y, s.valid, 0, static_cast<int>(s.t.size()), 2), std::invalid_argument);
}

}  // namespace
}  // namespace dropfit::analysis
