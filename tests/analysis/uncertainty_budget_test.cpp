// The uncertainty budget (analysis/uncertainty_budget.h, docs/methods.md §23).
// Sources:
//  - JCGM 100:2008 (GUM), eq. 10 and eq. 13 (the law of propagation of uncertainty);
//  - GUM Annex H.1, the end-gauge calibration: its budget (Table H.1) and combined standard
//    uncertainty u_c(l) = 32 nm (the table's values FROM MEMORY: u(l_s) = 25 nm, u(d) = 9.7 nm,
//    u(delta alpha) = 0.58e-6 /degC with c = -l_s theta, l_s = 50 mm, theta = -0.1 degC,
//    u(delta theta) = 0.029 degC with c = -l_s alpha_s, alpha_s = 11.5e-6 /degC; alpha_s and
//    theta have sensitivity 0);
//  - GUM 5.2.2, Note 1: ten 1000-ohm resistors calibrated against one standard, each with
//    u = 100 mOhm fully correlated (r = 1), in series: u_c = 1 Ohm (0.32 Ohm if they were
//    independent) (FROM MEMORY);
//  - free fall: v = sqrt(2 g h) (textbook kinematics, docs/methods.md §2).
#include "analysis/uncertainty_budget.h"

#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <stdexcept>

namespace dropfit::analysis {
namespace {

std::vector<std::vector<double>> Filled(size_t n, double off_diagonal) {
  std::vector<std::vector<double>> r(n, std::vector<double>(n, off_diagonal));
  for (size_t i = 0; i < n; ++i) r[i][i] = 1.0;
  return r;
}

TEST(UncertaintyBudget, TheEndGaugeOfGumAnnexH1CombinesTo32Nanometres) {
  const double ls = 0.05, theta = -0.1, alpha_s = 11.5e-6;
  // inputs: l_s, d, alpha_s, theta, delta alpha, delta theta (SI units: m, m, /degC, degC, /degC, degC)
  const std::vector<double> c = {1.0, 1.0, 0.0, 0.0, -ls * theta, -ls * alpha_s};
  const std::vector<double> u = {25e-9, 9.7e-9, 1.2e-6, 0.41, 0.58e-6, 0.029};
  const double uc = CombineUncorrelated(c, u);
  EXPECT_NEAR(uc * 1e9, 32.0, 0.5);  // GUM H.1: u_c(l) = 32 nm
  // The same with eq. 13 and an identity correlation matrix.
  EXPECT_NEAR(CombineCorrelated(c, u, Filled(6, 0.0)), uc, 1e-15);
}

TEST(UncertaintyBudget, FullyCorrelatedResistorsOfGum522AddLinearly) {
  const std::vector<double> c(10, 1.0), u(10, 0.1);
  EXPECT_NEAR(CombineCorrelated(c, u, Filled(10, 1.0)), 1.0, 1e-12);    // r = 1
  EXPECT_NEAR(CombineCorrelated(c, u, Filled(10, 0.0)), 0.316, 0.001);  // r = 0
  // A matrix that is not one of correlations is refused.
  std::vector<std::vector<double>> bad = Filled(10, 0.0);
  bad[0][1] = 0.5;
  EXPECT_THROW(CombineCorrelated(c, u, bad), std::invalid_argument);
  EXPECT_THROW(CombineCorrelated(c, u, Filled(9, 0.0)), std::invalid_argument);
  EXPECT_THROW(CombineUncorrelated({1.0}, {-1.0}), std::invalid_argument);
  EXPECT_THROW(CombineUncorrelated({1.0, 2.0}, {1.0}), std::invalid_argument);
}

TEST(UncertaintyBudget, AFigureDominatedByOnePartNamesIt) {
  ScaleUncertainty s;
  s.rig_scale_rel = 2e-3;  // a poor rig
  s.capture_rate_rel = 50e-6 / std::sqrt(3.0);
  // An impact speed of 2.4 m/s with a fit sd of 50 um/s: the rig's 0.2 % dominates.
  FigureBudget b = BudgetOf({1.0, -1.0}, 2.4, 5e-5, 0.0, s);
  EXPECT_EQ(b.dominant, BudgetPart::kRigScale);
  EXPECT_NEAR(b.part(BudgetPart::kRigScale), 4.8e-3, 1e-12);
  EXPECT_NEAR(b.sd, std::hypot(std::hypot(4.8e-3, 5e-5), 2.4 * s.capture_rate_rel), 1e-15);
  // The COR is a ratio of two speeds: no scale part reaches it; the fit dominates.
  b = BudgetOf({0.0, 0.0}, 0.73, 1.4e-5, 2e-6, s);
  EXPECT_EQ(b.dominant, BudgetPart::kFit);
  EXPECT_EQ(b.part(BudgetPart::kRigScale), 0.0);
  EXPECT_EQ(b.part(BudgetPart::kCaptureRate), 0.0);
  // A duration: only time; the onset height's part dominates when larger than the fit's.
  b = BudgetOf({0.0, 1.0}, 0.027, 1e-5, 4e-5, s);
  EXPECT_EQ(b.dominant, BudgetPart::kOnsetHeight);
  EXPECT_EQ(ToString(b.dominant), "onset_height");
  EXPECT_EQ(BudgetPartFromString("marker_plane"), BudgetPart::kMarkerPlane);
  EXPECT_THROW(BudgetPartFromString("tape"), std::invalid_argument);
  // A fit that gave no sd gives no combined sd.
  EXPECT_TRUE(std::isnan(BudgetOf({1.0, -1.0}, 2.4, std::nan(""), 0.0, s).sd));
  // A parameter the data do not determine keeps its infinite sd, and the fit is its dominant part.
  b = BudgetOf({0.0, -2.0}, 4e4, std::numeric_limits<double>::infinity(), 0.0, s);
  EXPECT_TRUE(std::isinf(b.sd));
  EXPECT_EQ(b.dominant, BudgetPart::kFit);
}

// With the gravity ruler the lengths follow g and the rate: check the sensitivities against the
// impact speed of a free fall read through a wrong rate and a wrong gravity, exactly.
TEST(UncertaintyBudget, UnderTheGravityRulerTheSpeedFollowsGravityAndTheRate) {
  const double g = 9.80665, h = 0.3, v = std::sqrt(2.0 * g * h);
  for (const auto& [eg, et] : {std::pair{1e-3, 0.0}, std::pair{0.0, 1e-3}}) {
    // Times read (1 + et) too long; the ruler scales lengths until the flight falls at g (1 + eg):
    // acceleration (1 + eL) / (1 + et)^2 = (1 + eg), so 1 + eL = (1 + eg)(1 + et)^2.
    const double el = (1.0 + eg) * (1.0 + et) * (1.0 + et) - 1.0;
    const double v_read = std::sqrt(2.0 * g * (1.0 + eg) * h * (1.0 + el));  // v = sqrt(2 a h)
    ScaleUncertainty s;
    s.gravity_ruler = true;
    s.rig_scale_rel = 5e-3;  // drops out under the ruler
    s.gravity_rel = eg;
    s.capture_rate_rel = et;
    const FigureBudget b = BudgetOf({1.0, -1.0}, v, 0.0, 0.0, s);
    EXPECT_EQ(b.part(BudgetPart::kRigScale), 0.0);
    EXPECT_NEAR(b.sd, std::abs(v_read - v), 2e-3 * std::abs(v_read - v));  // first order
  }
  // A force from the track's acceleration plus m g: under the ruler the rate drops out and
  // gravity moves the whole force.
  ScaleUncertainty s;
  s.gravity_ruler = true;
  s.gravity_rel = 1e-3;
  s.capture_rate_rel = 1e-3;
  const double m = 5.0, f_track = 1500.0;
  const FigureBudget f = BudgetOf({1.0, -2.0}, f_track, 0.0, 0.0, s, m * g);
  EXPECT_EQ(f.part(BudgetPart::kCaptureRate), 0.0);
  EXPECT_NEAR(f.part(BudgetPart::kGravity), (f_track + m * g) * 1e-3, 1e-9);
  // Without the ruler, gravity reaches the force only through m g.
  s.gravity_ruler = false;
  EXPECT_NEAR(BudgetOf({1.0, -2.0}, f_track, 0.0, 0.0, s, m * g).part(BudgetPart::kGravity), m * g * 1e-3, 1e-12);
}

TEST(UncertaintyBudget, LawParametersScaleByTheirUnits) {
  // Kelvin-Voigt k = F / delta: m a / delta ~ T^-2; a Hertz k ~ L^(1 - n) T^-2.
  EXPECT_EQ(ParameterDimension("k_n_per_m", 0.0)->length, 0.0);
  EXPECT_EQ(ParameterDimension("k_n_per_m", 0.0)->time, -2.0);
  EXPECT_NEAR(ParameterDimension("k", 1.5)->length, -0.5, 1e-15);
  EXPECT_EQ(ParameterDimension("alpha_s_per_m", 0.0)->length, -1.0);
  EXPECT_EQ(ParameterDimension("c_ns_per_m", 0.0)->time, -1.0);
  EXPECT_FALSE(ParameterDimension("colour", 0.0).has_value());
}

TEST(UncertaintyBudget, AMeanOverRepeatsKeepsTheSharedPartsWhole) {
  ScaleUncertainty s;
  s.rig_scale_rel = 1e-3;
  std::vector<FigureBudget> budgets;
  std::vector<double> values;
  for (double v : {2.40, 2.41, 2.39, 2.40}) {
    values.push_back(v);
    budgets.push_back(BudgetOf({1.0, -1.0}, v, 1e-3, 0.0, s));
  }
  const MeanBudget m = MeanOf(values, budgets);
  // The rig's part is fully correlated between clips (GUM eq. 13, r = 1): the mean of the parts.
  EXPECT_NEAR(m.budget.part(BudgetPart::kRigScale), 2.40e-3, 1e-9);
  // The clips' own parts: the spread over repeats (sd 0.00816, /2) is larger than sqrt(4)/4 mm/s.
  EXPECT_NEAR(m.spread_sd, 0.008165, 1e-5);
  EXPECT_NEAR(m.budget.part(BudgetPart::kFit), m.repeats_sd_of_mean, 1e-12);
  EXPECT_NEAR(m.budget.sd, std::hypot(2.40e-3, 0.008165 / 2.0), 1e-5);
  // One clip: its own budget.
  const MeanBudget one = MeanOf({2.4}, {budgets[0]});
  EXPECT_NEAR(one.budget.sd, budgets[0].sd, 1e-15);
  EXPECT_TRUE(std::isnan(one.spread_sd));
  EXPECT_THROW(MeanOf({}, {}), std::invalid_argument);
}

}  // namespace
}  // namespace dropfit::analysis
