#include "analysis/savgol.h"

#include <Eigen/Dense>

#include <cmath>
#include <limits>
#include <sstream>
#include <stdexcept>

namespace dropfit::analysis {
namespace {

constexpr int kMaxWindow = 201;
constexpr int kMaxOrder = 6;

void ThrowIfInvalid(const SavgolOptions& options) {
  if (auto message = ValidateSavgolOptions(options)) throw std::invalid_argument("Savitzky-Golay: " + *message);
}

double Factorial(int n) {
  double f = 1.0;
  for (int k = 2; k <= n; ++k) f *= k;
  return f;
}

}  // namespace

std::optional<std::string> ValidateSavgolOptions(const SavgolOptions& options) {
  std::ostringstream msg;
  if (options.order < 1 || options.order > kMaxOrder) {
    msg << "order = " << options.order << " is outside 1.." << kMaxOrder;
    return msg.str();
  }
  if (options.window % 2 == 0 || options.window < options.order + 2 || options.window > kMaxWindow) {
    msg << "window = " << options.window << " must be odd, >= order + 2 = " << options.order + 2
        << " and <= " << kMaxWindow;
    return msg.str();
  }
  return std::nullopt;
}

std::vector<double> SavgolCoefficients(const SavgolOptions& options, int derivative) {
  ThrowIfInvalid(options);
  if (derivative < 0 || derivative > options.order) {
    std::ostringstream msg;
    msg << "Savitzky-Golay: derivative = " << derivative << " is outside 0..order (" << options.order << ")";
    throw std::invalid_argument(msg.str());
  }
  const int half = options.window / 2;
  Eigen::MatrixXd a(options.window, options.order + 1);
  for (int j = 0; j < options.window; ++j) {
    const double x = j - half;
    double p = 1.0;
    for (int k = 0; k <= options.order; ++k) {
      a(j, k) = p;
      p *= x;
    }
  }
  // Least-squares solution operator (A^T A)^-1 A^T; row `derivative` gives coef[derivative],
  // and the derivative at the centre is derivative! * coef[derivative].
  const Eigen::MatrixXd pinv = (a.transpose() * a).ldlt().solve(a.transpose());
  std::vector<double> w(static_cast<size_t>(options.window));
  for (int j = 0; j < options.window; ++j) w[static_cast<size_t>(j)] = Factorial(derivative) * pinv(derivative, j);
  return w;
}

double SavgolNoiseGain(const SavgolOptions& options, int derivative) {
  double sum = 0.0;
  for (double w : SavgolCoefficients(options, derivative)) sum += w * w;
  return std::sqrt(sum);
}

SmoothedSeries SavgolFilter(const std::vector<double>& values, const std::vector<bool>& valid, double spacing_s,
                            const SavgolOptions& options) {
  ThrowIfInvalid(options);
  if (!(spacing_s > 0.0) || values.size() != valid.size()) {
    std::ostringstream msg;
    msg << "SavgolFilter: need spacing_s > 0 and as many flags as values, got spacing_s = " << spacing_s << ", "
        << values.size() << " values, " << valid.size() << " flags";
    throw std::invalid_argument(msg.str());
  }
  const int n = static_cast<int>(values.size());
  const int half = options.window / 2;
  const int order = options.order;
  const double nan = std::numeric_limits<double>::quiet_NaN();
  SmoothedSeries out;
  out.value.assign(values.size(), nan);
  out.rate.assign(values.size(), nan);
  out.accel.assign(values.size(), nan);
  out.valid.assign(values.size(), false);
  out.accel_noise_gain.assign(values.size(), nan);

  const std::vector<double> w0 = SavgolCoefficients(options, 0);
  const std::vector<double> w1 = SavgolCoefficients(options, 1);
  const std::vector<double> w2 = order >= 2 ? SavgolCoefficients(options, 2) : std::vector<double>(w0.size(), 0.0);
  const double full_gain = order >= 2 ? SavgolNoiseGain(options, 2) : 0.0;

  for (int i = 0; i < n; ++i) {
    const int lo = std::max(0, i - half);
    const int hi = std::min(n - 1, i + half);
    int count = 0, before = 0, after = 0;
    for (int j = lo; j <= hi; ++j) {
      if (!valid[static_cast<size_t>(j)]) continue;
      ++count;
      before += j <= i ? 1 : 0;
      after += j >= i ? 1 : 0;
    }
    if (count < order + 2 || before == 0 || after == 0) continue;
    double v = 0.0, r = 0.0, acc = 0.0, gain = full_gain;
    if (count == options.window) {
      // Full window: the published convolution.
      for (int j = 0; j < options.window; ++j) {
        const double y = values[static_cast<size_t>(i - half + j)];
        v += w0[static_cast<size_t>(j)] * y;
        r += w1[static_cast<size_t>(j)] * y;
        acc += w2[static_cast<size_t>(j)] * y;
      }
    } else {
      Eigen::MatrixXd a(count, order + 1);
      Eigen::VectorXd b(count);
      int row = 0;
      for (int j = lo; j <= hi; ++j) {
        if (!valid[static_cast<size_t>(j)]) continue;
        const double x = j - i;
        double p = 1.0;
        for (int k = 0; k <= order; ++k) {
          a(row, k) = p;
          p *= x;
        }
        b(row) = values[static_cast<size_t>(j)];
        ++row;
      }
      const Eigen::VectorXd c = a.colPivHouseholderQr().solve(b);
      v = c(0);
      r = c(1);
      acc = order >= 2 ? 2.0 * c(2) : 0.0;
      if (order >= 2) {
        // sd of 2 c2 for unit white noise: 2 sqrt([(A^T A)^-1]_22).
        const Eigen::MatrixXd ata = a.transpose() * a;
        const Eigen::VectorXd e2 = Eigen::VectorXd::Unit(order + 1, 2);
        gain = 2.0 * std::sqrt(std::max(0.0, e2.dot(ata.ldlt().solve(e2))));
      }
    }
    out.accel_noise_gain[static_cast<size_t>(i)] = gain / (spacing_s * spacing_s);
    out.value[static_cast<size_t>(i)] = v;
    out.rate[static_cast<size_t>(i)] = r / spacing_s;
    out.accel[static_cast<size_t>(i)] = acc / (spacing_s * spacing_s);
    out.valid[static_cast<size_t>(i)] = true;
  }
  return out;
}

}  // namespace dropfit::analysis
