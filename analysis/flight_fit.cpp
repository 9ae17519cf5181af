#include "analysis/flight_fit.h"

#include <ceres/loss_function.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <sstream>
#include <stdexcept>

namespace dropfit::analysis {
namespace {

// d^order/dt^order of tau^k at tau: k!/(k-order)! tau^(k-order).
Eigen::VectorXd DerivativeBasis(int degree, double tau, int order) {
  Eigen::VectorXd basis = Eigen::VectorXd::Zero(degree + 1);
  for (int k = order; k <= degree; ++k) {
    double factor = 1.0;
    for (int m = 0; m < order; ++m) factor *= (k - m);
    basis(k) = factor * std::pow(tau, k - order);
  }
  return basis;
}

}  // namespace

double PolynomialFit::Value(double t_s) const { return Derivative(t_s, 0); }

double PolynomialFit::Derivative(double t_s, int order) const {
  return DerivativeBasis(degree(), t_s - t_ref_s, order).dot(coef);
}

double PolynomialFit::ValueSd(double t_s) const { return DerivativeSd(t_s, 0); }

double PolynomialFit::DerivativeSd(double t_s, int order) const {
  const Eigen::VectorXd basis = DerivativeBasis(degree(), t_s - t_ref_s, order);
  return std::sqrt(std::max(0.0, basis.dot(covariance * basis)));
}

std::optional<PolynomialFit> FitPolynomial(const std::vector<double>& t_s, const std::vector<double>& values,
                                           const std::vector<bool>& valid, int first, int last, int degree,
                                           std::optional<double> noise_sd_m, bool robust) {
  const int n = static_cast<int>(t_s.size());
  if (values.size() != t_s.size() || valid.size() != t_s.size() || first < 0 || last >= n || degree < 0 || degree > 6) {
    std::ostringstream msg;
    msg << "FitPolynomial: sizes t_s " << t_s.size() << ", values " << values.size() << ", valid " << valid.size()
        << ", range [" << first << ", " << last << "], degree " << degree
        << ": sizes must agree, the range lie inside the vectors and degree be 0..6";
    throw std::invalid_argument(msg.str());
  }
  int count = 0;
  double t_sum = 0.0;
  for (int i = first; i <= last; ++i) {
    if (!valid[static_cast<size_t>(i)]) continue;
    ++count;
    t_sum += t_s[static_cast<size_t>(i)];
  }
  if (count < degree + 2) return std::nullopt;
  PolynomialFit fit;
  fit.t_ref_s = t_sum / count;
  fit.first_index = first;
  fit.last_index = last;
  fit.samples = count;
  // Scale time by the half span for conditioning, then undo on the coefficients.
  double span = 0.0;
  for (int i = first; i <= last; ++i)
    if (valid[static_cast<size_t>(i)]) span = std::max(span, std::abs(t_s[static_cast<size_t>(i)] - fit.t_ref_s));
  if (span <= 0.0) span = 1.0;
  Eigen::MatrixXd a(count, degree + 1);
  Eigen::VectorXd b(count);
  int row = 0;
  for (int i = first; i <= last; ++i) {
    if (!valid[static_cast<size_t>(i)]) continue;
    const double x = (t_s[static_cast<size_t>(i)] - fit.t_ref_s) / span;
    double p = 1.0;
    for (int k = 0; k <= degree; ++k) {
      a(row, k) = p;
      p *= x;
    }
    b(row) = values[static_cast<size_t>(i)];
    ++row;
  }
  Eigen::VectorXd w = Eigen::VectorXd::Ones(count);
  const auto solve = [&](Eigen::VectorXd* c, Eigen::MatrixXd* inverse) {
    const Eigen::MatrixXd ata = a.transpose() * w.asDiagonal() * a;
    const Eigen::LDLT<Eigen::MatrixXd> ldlt(ata);
    *c = ldlt.solve(a.transpose() * w.asDiagonal() * b);
    *inverse = ldlt.solve(Eigen::MatrixXd::Identity(degree + 1, degree + 1));
  };
  Eigen::VectorXd c_scaled;
  Eigen::MatrixXd ata_inv;
  solve(&c_scaled, &ata_inv);
  Eigen::VectorXd residual = b - a * c_scaled;
  double sigma = noise_sd_m ? *noise_sd_m : std::sqrt(residual.squaredNorm() / (count - degree - 1));
  if (robust) {
    if (!noise_sd_m) {
      std::vector<double> abs_r(residual.data(), residual.data() + count);
      for (double& r : abs_r) r = std::abs(r);
      sigma = RobustSd(std::move(abs_r));
    }
    const double delta = kHuberScaleSigmas * sigma;
    if (delta > 0.0) {
      for (int iteration = 0; iteration < 50; ++iteration) {
        Eigen::VectorXd next(count);
        for (int i = 0; i < count; ++i) next(i) = HuberWeight(residual(i), delta);
        const double change = (next - w).cwiseAbs().maxCoeff();
        w = next;
        if (change < 1e-9) break;
        solve(&c_scaled, &ata_inv);
        residual = b - a * c_scaled;
      }
      fit.downweighted = static_cast<int>((w.array() < 1.0).count());
      if (!noise_sd_m) {
        // The residual SD over the samples of full weight (dof: those samples - coefficients).
        const int full = count - fit.downweighted;
        double ss = 0.0;
        for (int i = 0; i < count; ++i) ss += w(i) >= 1.0 ? residual(i) * residual(i) : 0.0;
        if (full > degree + 1) sigma = std::sqrt(ss / (full - degree - 1));
      }
    }
  }
  double ss_full = 0.0;
  int n_full = 0;
  for (int i = 0; i < count; ++i) {
    if (w(i) < 1.0) continue;
    ss_full += residual(i) * residual(i);
    ++n_full;
  }
  fit.rms_residual_m = n_full > 0 ? std::sqrt(ss_full / n_full) : std::sqrt(residual.squaredNorm() / count);
  fit.noise_sd_m = sigma;
  Eigen::VectorXd unscale(degree + 1);
  for (int k = 0; k <= degree; ++k) unscale(k) = std::pow(span, -k);
  fit.coef = c_scaled.cwiseProduct(unscale);
  fit.covariance = fit.noise_sd_m * fit.noise_sd_m * unscale.asDiagonal() * ata_inv * unscale.asDiagonal();
  return fit;
}

double HuberWeight(double residual, double delta) {
  double rho[3];
  ceres::HuberLoss(delta).Evaluate(residual * residual, rho);
  return rho[1];
}

double RobustSd(std::vector<double> abs_residuals) {
  if (abs_residuals.empty()) return std::numeric_limits<double>::quiet_NaN();
  const auto mid = abs_residuals.begin() + static_cast<std::ptrdiff_t>(abs_residuals.size() / 2);
  std::nth_element(abs_residuals.begin(), mid, abs_residuals.end());
  return 1.4826 * *mid;
}

std::optional<double> CrossingTime(const PolynomialFit& parabola, double height_m, Branch branch) {
  if (parabola.degree() != 2) return std::nullopt;
  const double c0 = parabola.coef(0), c1 = parabola.coef(1), c2 = parabola.coef(2);
  if (!(c2 < 0.0)) return std::nullopt;
  // c2 tau^2 + c1 tau + (c0 - h) = 0 with c2 < 0: the earlier root is on the rising branch.
  const double disc = c1 * c1 - 4.0 * c2 * (c0 - height_m);
  if (disc < 0.0) return std::nullopt;
  const double root = std::sqrt(disc);
  // Numerically stable pair of roots.
  const double q = -0.5 * (c1 + (c1 >= 0.0 ? root : -root));
  double r1 = q / c2;
  double r2 = q != 0.0 ? (c0 - height_m) / q : r1;
  if (r1 > r2) std::swap(r1, r2);
  return parabola.t_ref_s + (branch == Branch::kRising ? r1 : r2);
}

std::optional<Apex> ParabolaApex(const PolynomialFit& parabola) {
  if (parabola.degree() != 2 || !(parabola.coef(2) < 0.0)) return std::nullopt;
  const double tau = -parabola.coef(1) / (2.0 * parabola.coef(2));
  return Apex{parabola.t_ref_s + tau,
              parabola.coef(0) - parabola.coef(1) * parabola.coef(1) / (4.0 * parabola.coef(2))};
}

double PropagatedSd(const std::function<double(const Eigen::VectorXd&)>& f, const Eigen::VectorXd& x,
                    const Eigen::MatrixXd& cov) {
  const int n = static_cast<int>(x.size());
  Eigen::VectorXd jac(n);
  for (int k = 0; k < n; ++k) {
    const double sd = std::sqrt(std::max(0.0, cov(k, k)));
    if (sd == 0.0) {
      jac(k) = 0.0;
      continue;
    }
    const double h = 1e-3 * sd;
    Eigen::VectorXd xp = x, xm = x;
    xp(k) += h;
    xm(k) -= h;
    const double fp = f(xp), fm = f(xm);
    if (!std::isfinite(fp) || !std::isfinite(fm)) return std::numeric_limits<double>::quiet_NaN();
    jac(k) = (fp - fm) / (2.0 * h);
  }
  return std::sqrt(std::max(0.0, jac.dot(cov * jac)));
}

}  // namespace dropfit::analysis
