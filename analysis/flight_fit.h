#pragma once
// Least-squares polynomial fits of stretches of a track, above all the parabola of a flight
// phase, with the covariance of the coefficients and the standard uncertainty of anything
// computed from them.
//
// A falling (or rising) body in free flight, without drag, moves on
//   y(t) = y0 + v0 (t - t0) - (g/2) (t - t0)^2,
// a parabola in time (textbook kinematics; docs/methods.md §2: v = sqrt(2 g h)).
// The fits here leave the acceleration free (3 coefficients): the measured acceleration is
// the self-check of the capture rate and scale (analysis/self_checks.h), and the speed at a
// height is read from the same fit, never from one differentiated frame.
//
// Coefficients: value(t) = sum_k coef[k] (t - t_ref_s)^k; t_ref_s is the mean time of the
// fitted samples (for conditioning). Covariance = s^2 (A^T A)^-1, with s the noise standard
// deviation given by the caller or, when none is given, the residual RMS with n - (degree+1)
// degrees of freedom (ordinary least squares, e.g. Press et al., Numerical Recipes, 3rd ed.
// 2007, §15.4; common practice).
//
// Robust fits (`robust`): Huber's M-estimator (Huber 1964, Ann. Math. Statist. 35:73-101) by
// iteratively reweighted least squares (Holland & Welsch 1977, Commun. Statist. A6:813-827;
// FROM MEMORY), the weight of a sample with residual r being rho'(r^2) of Ceres' HuberLoss
// with scale delta = kHuberScaleSigmas x the noise (the caller's, or 1.4826 x the median
// absolute residual of the plain fit): 1 for |r| <= delta, delta / |r| beyond. A few outlying
// frames then act as samples delta away, not as their full displacement. The covariance is
// s^2 (A^T W A)^-1; rms_residual_m is over the samples of full weight, and `downweighted`
// counts the others (docs/methods.md §10).

#include <Eigen/Dense>

#include <functional>
#include <optional>
#include <vector>

namespace dropfit::analysis {

struct PolynomialFit {
  double t_ref_s = 0.0;         // reference time of the coefficients [s]
  Eigen::VectorXd coef;         // coef[k]: [m / s^k]
  Eigen::MatrixXd covariance;   // of coef
  double rms_residual_m = 0.0;  // RMS of (data - fit) over the fitted samples
  double noise_sd_m = 0.0;      // the s used for `covariance`
  int samples = 0;              // valid samples fitted
  int downweighted = 0;         // robust fits: samples given less than full weight
  int first_index = 0;          // first and last index of the fitted range (inclusive)
  int last_index = -1;

  int degree() const { return static_cast<int>(coef.size()) - 1; }
  double Value(double t_s) const;
  // d^order value / dt^order at t_s [m / s^order].
  double Derivative(double t_s, int order = 1) const;
  // Standard uncertainty of Value(t_s) / Derivative(t_s, order) from `covariance`.
  double ValueSd(double t_s) const;
  double DerivativeSd(double t_s, int order = 1) const;
};

// Fits a polynomial of `degree` to the valid samples of values[first..last] (inclusive) at
// times t_s. Returns nothing when fewer than degree + 2 valid samples lie in the range (no
// residual left to judge the fit). noise_sd_m: the known noise; nothing = from residuals.
// Throws std::invalid_argument for sizes that differ, an index outside the vectors or
// degree outside [0, 6].
// robust: Huber's loss by reweighting (see above).
constexpr double kHuberScaleSigmas = 3.0;

// The weight rho'(r^2) Huber's loss (Ceres' HuberLoss, scale delta > 0) gives a residual r:
// 1 for |r| <= delta, delta / |r| beyond. Residual and scale in one unit. The robust fits
// here and in analysis/law_fit.h reweight by it.
double HuberWeight(double residual, double delta);

// 1.4826 x the median of |residual| (the abs values given): the SD of Gaussian residuals,
// unmoved by a few outliers (common practice, no source); NaN when empty.
double RobustSd(std::vector<double> abs_residuals);
std::optional<PolynomialFit> FitPolynomial(const std::vector<double>& t_s, const std::vector<double>& values,
                                           const std::vector<bool>& valid, int first, int last, int degree,
                                           std::optional<double> noise_sd_m = std::nullopt, bool robust = false);

// The flight parabola (degree 2) and what an impact analysis reads from it.
enum class Branch { kFalling, kRising };

// Time at which the parabola passes `height_m` on the falling (value decreasing) or rising
// branch; nothing when it never reaches that height or the fit is not a downward parabola
// (acceleration >= 0).
std::optional<double> CrossingTime(const PolynomialFit& parabola, double height_m, Branch branch);

// Time and height of the vertex (apex) of a downward parabola; nothing otherwise.
struct Apex {
  double t_s = 0.0;
  double height_m = 0.0;
};
std::optional<Apex> ParabolaApex(const PolynomialFit& parabola);

// Standard uncertainty of f(x) for a random vector x with covariance `cov`, by first-order
// propagation, sd^2 = J cov J^T (ISO/IEC Guide 98-3 (GUM), 2008, eq. 13), with J from central
// differences of step 1e-3 standard deviations (exact for f linear). Returns NaN when f is
// not finite near x.
double PropagatedSd(const std::function<double(const Eigen::VectorXd&)>& f, const Eigen::VectorXd& x,
                    const Eigen::MatrixXd& cov);

}  // namespace dropfit::analysis
