// The linear-algebra steps of FitLaw (analysis/law_fit_steps.h) on small problems whose
// answer is known in closed form.
#include "analysis/law_fit_steps.h"

#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <vector>

namespace dropfit::analysis::detail {
namespace {

// Closed forms evaluated in doubles: only rounding separates them from the code's result.
constexpr double kRoundingRelTolerance = 1e-12;

// A Jacobian with N rows: column 0 centred on zero (so orthogonal to a constant column),
// column 1 constant, column 2 = column 1 + epsilon x column 0 (epsilon = 0: duplicate).
Eigen::MatrixXd JacobianWithTwinColumns(int rows, double epsilon) {
  Eigen::MatrixXd j(rows, 3);
  for (int r = 0; r < rows; ++r) {
    j(r, 0) = r - 0.5 * (rows - 1);
    j(r, 1) = 1.0;
    j(r, 2) = 1.0 + epsilon * j(r, 0);
  }
  return j;
}

// Ordinary least squares: cov = s^2 (J^T J)^-1 (Seber & Wild, Nonlinear Regression, 1989,
// §2.1). For a full-rank J the pseudo-inverse is the inverse (Moore-Penrose; from memory), so
// the fallback must agree with the direct formula.
TEST(LawFitSteps, PseudoInverseCovarianceOfAFullRankJacobianIsTheLeastSquaresCovariance) {
  constexpr double kResidualVariance = 2.5;
  Eigen::MatrixXd j(6, 3);
  j << 1.0, 0.2, -0.3, 0.5, 1.0, 0.1, -0.4, 0.3, 2.0, 0.9, -1.0, 0.4, 0.1, 0.7, -0.6, 1.5, 0.2, 0.8;
  const PseudoInverseCovariance p = CovarianceByPseudoInverse(j, kResidualVariance);
  const Eigen::MatrixXd expected = kResidualVariance * (j.transpose() * j).inverse();
  for (bool u : p.undetermined) EXPECT_FALSE(u);
  for (int a = 0; a < 3; ++a)
    for (int b = 0; b < 3; ++b)
      EXPECT_NEAR(p.covariance(a, b), expected(a, b), kRoundingRelTolerance * expected.cwiseAbs().maxCoeff());
}

// Two identical columns: their difference is in the null space, so neither is determined,
// while the unknown orthogonal to both keeps its least-squares variance s^2 / |column|^2
// (Seber & Wild 1989 §2.1 for that variance; the null-space rule is law_fit_steps.h's).
TEST(LawFitSteps, PseudoInverseCovarianceOfARankDeficientJacobianKeepsFiniteSdsForTheDeterminedUnknown) {
  constexpr double kResidualVariance = 1e-2;
  // The near-twin couples to the determined unknown at order epsilon^2 ~ 1e-18; rounding in the
  // eigen-decomposition of a matrix with a ~1e-20 eigenvalue ratio is far larger: 1e-6 bounds both.
  constexpr double kDeterminedRelTolerance = 1e-6;
  for (double epsilon : {0.0, 1e-9}) {  // exactly and nearly rank-deficient (eigenvalue ratio ~1e-20)
    SCOPED_TRACE("epsilon " + std::to_string(epsilon));
    const Eigen::MatrixXd j = JacobianWithTwinColumns(10, epsilon);
    const PseudoInverseCovariance p = CovarianceByPseudoInverse(j, kResidualVariance);
    ASSERT_EQ(p.undetermined.size(), 3u);
    EXPECT_FALSE(p.undetermined[0]);
    EXPECT_TRUE(p.undetermined[1]);
    EXPECT_TRUE(p.undetermined[2]);
    const double expected = kResidualVariance / j.col(0).squaredNorm();
    EXPECT_TRUE(std::isfinite(p.covariance(0, 0)));
    EXPECT_NEAR(p.covariance(0, 0) / expected, 1.0, kDeterminedRelTolerance);
    EXPECT_EQ(p.covariance(1, 1), std::numeric_limits<double>::infinity());
    EXPECT_EQ(p.covariance(2, 2), std::numeric_limits<double>::infinity());
    EXPECT_TRUE(std::isnan(p.covariance(0, 1)));
    EXPECT_TRUE(std::isnan(p.covariance(2, 0)));
  }
}

// Log-parametrised law (p = exp(x), so G = diag(p)): G C G^T element by element
// (ISO/IEC Guide 98-3 (GUM), 2008, eq. 13).
TEST(LawFitSteps, LawParameterCovarianceIsTheFirstOrderPropagationOfTheInternalOne) {
  const double k = 2e5, c = 300.0;
  Eigen::MatrixXd g = Eigen::MatrixXd::Zero(2, 2);
  g(0, 0) = k;
  g(1, 1) = c;
  Eigen::MatrixXd cov_x(2, 2);
  cov_x << 1e-4, -2e-5, -2e-5, 9e-4;
  const Eigen::MatrixXd cov_p = LawParameterCovariance(g, cov_x, {false, false}, true);
  EXPECT_NEAR(cov_p(0, 0), k * k * 1e-4, kRoundingRelTolerance * k * k * 1e-4);
  EXPECT_NEAR(cov_p(1, 1), c * c * 9e-4, kRoundingRelTolerance * c * c * 9e-4);
  EXPECT_NEAR(cov_p(0, 1), -k * c * 2e-5, kRoundingRelTolerance * k * c * 2e-5);
  EXPECT_EQ(cov_p(0, 1), cov_p(1, 0));
  // No covariance: nothing to propagate.
  EXPECT_TRUE(std::isnan(LawParameterCovariance(g, cov_x, {false, false}, false)(0, 0)));
}

// An undetermined internal parameter makes every parameter that depends on it undetermined
// (infinite variance) and leaves the others their own propagated variance (law_fit_steps.h).
TEST(LawFitSteps, AnUndeterminedInternalParameterGivesAnInfiniteVarianceOnlyWhereItEnters) {
  const double k = 2e5, c = 300.0;
  Eigen::MatrixXd g = Eigen::MatrixXd::Zero(2, 2);
  g(0, 0) = k;
  g(1, 1) = c;
  Eigen::MatrixXd cov_x(2, 2);
  const double nan = std::numeric_limits<double>::quiet_NaN();
  cov_x << 1e-4, nan, nan, std::numeric_limits<double>::infinity();
  const Eigen::MatrixXd cov_p = LawParameterCovariance(g, cov_x, {false, true, false}, true);
  EXPECT_NEAR(cov_p(0, 0), k * k * 1e-4, kRoundingRelTolerance * k * k * 1e-4);
  EXPECT_EQ(cov_p(1, 1), std::numeric_limits<double>::infinity());
  EXPECT_TRUE(std::isnan(cov_p(0, 1)));
}

// BIC = N ln(RSS / N) + p ln N (Schwarz 1978, Ann. Statist. 6:461-464).
TEST(LawFitSteps, BicIsSchwarzsCriterionForGaussianErrors) {
  const double expected = 100.0 * std::log(0.01 / 100.0) + 5.0 * std::log(100.0);
  EXPECT_NEAR(BayesianInformationCriterion(0.01, 100, 5), expected, kRoundingRelTolerance * std::abs(expected));
  EXPECT_TRUE(std::isfinite(BayesianInformationCriterion(0.0, 100, 5)));  // a perfect fit stays comparable
}

}  // namespace
}  // namespace dropfit::analysis::detail
