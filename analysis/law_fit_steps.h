#pragma once
// The linear-algebra steps of FitLaw (analysis/law_fit.h), public for their unit tests. The
// fit, its unknowns and its sources are described in analysis/law_fit.h and
// docs/methods.md §13; these functions are not a stable interface. The other steps (problem
// building, the multi-start solve, the Ceres covariance, the per-bounce figures) need the
// Ceres problem and are internal to law_fit.cpp.
//
// Units: a covariance is in the units of its unknowns squared; a Jacobian is d residual /
// d unknown, residuals in any one unit, the residual variance in that unit squared.

#include <Eigen/Dense>
#include <vector>

namespace dropfit::analysis::detail {

// BIC = N ln(RSS / N) + p ln N (Schwarz 1978, Ann. Statist. 6:461-464, for Gaussian errors
// with unknown variance; docs/methods.md §13), N = samples, p = free_parameters, RSS [m^2]
// floored at 1e-300 so that a perfect fit gives a finite value.
double BayesianInformationCriterion(double rss_m2, int samples, int free_parameters);

// The covariance fallback when J^T J is (near) rank-deficient: s^2 (J^T J)^+ with the
// columns of J scaled to unit norm first (a zero column left as it is) and the
// pseudo-inverse from the eigen-decomposition of the scaled J^T J, eigenvalues at or below
// 1e-12 x the largest dropped (Moore-Penrose pseudo-inverse by a truncated eigen-
// decomposition; Golub & Van Loan, Matrix Computations, 4th ed. 2013, §5.5.2, FROM MEMORY).
// An unknown whose squared weight in a dropped eigenvector exceeds 1e-6 is undetermined:
// its row and column are NaN and its variance +infinity. The others keep finite variances,
// s^2 = residual_variance (RSS / (N - p), law_fit.h "Uncertainty").
//   jacobian           N x p, d residual / d unknown at the solution.
//   covariance         p x p.
//   undetermined       p flags.
struct PseudoInverseCovariance {
  Eigen::MatrixXd covariance;
  std::vector<bool> undetermined;
};
PseudoInverseCovariance CovarianceByPseudoInverse(const Eigen::MatrixXd& jacobian, double residual_variance);

// The covariance of the contract-unit law parameters from that of the internal ones, by
// first-order propagation G C G^T (ISO/IEC Guide 98-3 (GUM), 2008, eq. 13; law_fit.h).
//   jacobian               G = d params / d internal (ParameterCount x InternalParameterCount).
//   internal_covariance    C, the internal parameters' block of the fit's covariance.
//   undetermined           flags of the fit's unknowns; the first G.cols() are the internal
//                          law parameters'.
//   have_covariance        false: no covariance was computed (all NaN returned).
// With an undetermined internal parameter only the diagonal is filled: +infinity for a
// parameter that depends on it (G(i, j) != 0), else the propagation with C's non-finite
// entries taken as 0; the off-diagonal entries are NaN.
Eigen::MatrixXd LawParameterCovariance(const Eigen::MatrixXd& jacobian, const Eigen::MatrixXd& internal_covariance,
                                       const std::vector<bool>& undetermined, bool have_covariance);

}  // namespace dropfit::analysis::detail
