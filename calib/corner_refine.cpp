#include "calib/corner_refine.h"

#include <opencv2/imgproc.hpp>

#include <algorithm>
#include <cmath>
#include <sstream>
#include <stdexcept>

namespace dropfit::calib {

namespace {

std::string Num(double v) {
  std::ostringstream s;
  s << v;
  return s.str();
}

// Weighted least-squares fit of (1) to the pixels around `centre`, in coordinates relative to
// it. Nothing when the window leaves the image or the normal equations are singular.
std::optional<QuadraticSurface> FitQuadratic(const cv::Mat1d& smoothed, cv::Point2d centre, const SaddleOptions& o) {
  const double h = o.half_window_px;
  const double s_w = o.weight_sigma_fraction * h;
  // Weights taper to zero at |p - c| = h, so they (and the fit) change continuously with c.
  const double edge = std::exp(-h * h / (2 * s_w * s_w));
  const int u0 = static_cast<int>(std::ceil(centre.x - h)), u1 = static_cast<int>(std::floor(centre.x + h));
  const int v0 = static_cast<int>(std::ceil(centre.y - h)), v1 = static_cast<int>(std::floor(centre.y + h));
  if (u0 < 0 || v0 < 0 || u1 >= smoothed.cols || v1 >= smoothed.rows) return std::nullopt;
  // Coordinates scaled by 1/h keep the normal equations well conditioned.
  cv::Matx66d ata = cv::Matx66d::zeros();
  cv::Vec6d atb = cv::Vec6d::all(0);
  for (int v = v0; v <= v1; ++v) {
    const double y = (v - centre.y) / h;
    const double* row = smoothed.ptr<double>(v);
    for (int u = u0; u <= u1; ++u) {
      const double x = (u - centre.x) / h;
      const double r2 = x * x + y * y;
      if (r2 > 1.0) continue;
      const double w = std::exp(-r2 * h * h / (2 * s_w * s_w)) - edge;
      if (w <= 0) continue;
      const cv::Vec6d m(x * x, x * y, y * y, x, y, 1.0);
      for (int i = 0; i < 6; ++i) {
        const double wm = w * m[i];
        atb[i] += wm * row[u];
        for (int j = i; j < 6; ++j) ata(i, j) += wm * m[j];
      }
    }
  }
  for (int i = 0; i < 6; ++i) {
    for (int j = 0; j < i; ++j) ata(i, j) = ata(j, i);
  }
  cv::Vec6d p;
  if (!cv::solve(ata, atb, p, cv::DECOMP_CHOLESKY)) return std::nullopt;
  QuadraticSurface q;
  q.a = p[0] / (h * h);
  q.b = p[1] / (h * h);
  q.c = p[2] / (h * h);
  q.d = p[3] / h;
  q.e = p[4] / h;
  q.g = p[5];
  return q;
}

// Edge angles [rad] along the asymptotes of a saddle: the directions t = (cos phi, sin phi) with
// a cos^2 + b cos sin + c sin^2 = 0, i.e. A0 + R cos(2 phi - psi) = 0 with A0 = (a + c) / 2,
// R cos psi = (a - c) / 2, R sin psi = b / 2. Nothing when R <= |A0| (no saddle).
std::optional<std::pair<double, double>> Asymptotes(const QuadraticSurface& q) {
  const double a0 = (q.a + q.c) / 2, r = std::hypot((q.a - q.c) / 2, q.b / 2);
  if (!(r > std::abs(a0))) return std::nullopt;
  const double psi = std::atan2(q.b / 2, (q.a - q.c) / 2), delta = std::acos(-a0 / r);
  return std::make_pair((psi + delta) / 2, (psi - delta) / 2);
}

// The window's pixels (u, v, value) within `half` of `centre`; empty when it leaves the image.
struct Sample {
  double u, v, value;
};
template <typename T>
void CollectWindow(const cv::Mat& image, cv::Point2d centre, double half, std::vector<Sample>& out) {
  const int u0 = static_cast<int>(std::ceil(centre.x - half)), u1 = static_cast<int>(std::floor(centre.x + half));
  const int v0 = static_cast<int>(std::ceil(centre.y - half)), v1 = static_cast<int>(std::floor(centre.y + half));
  out.clear();
  if (u0 < 0 || v0 < 0 || u1 >= image.cols || v1 >= image.rows) return;
  for (int v = v0; v <= v1; ++v) {
    const T* row = image.ptr<T>(v);
    for (int u = u0; u <= u1; ++u) {
      if (std::hypot(u - centre.x, v - centre.y) <= half) out.push_back({double(u), double(v), double(row[u])});
    }
  }
}

using Vec7 = cv::Vec<double, 7>;
using Mat7 = cv::Matx<double, 7, 7>;

XCornerModel FromVector(const Vec7& p) {
  XCornerModel m;
  m.corner_px = {p[0], p[1]};
  m.angle1_rad = p[2];
  m.angle2_rad = p[3];
  m.sigma_px = p[4];
  m.mean = p[5];
  m.amplitude = p[6];
  return m;
}

// Sum of squared residuals of (3) over the samples, and optionally J^T J and J^T r.
double XCornerCost(const Vec7& p, const std::vector<Sample>& samples, Mat7* jtj, Vec7* jtr) {
  constexpr double kTwoOverSqrtPi = 1.1283791670955126;
  const double k = 1.0 / (std::sqrt(2.0) * p[4]);
  const double s1n = std::sin(p[2]), c1 = std::cos(p[2]), s2n = std::sin(p[3]), c2 = std::cos(p[3]);
  double cost = 0;
  if (jtj) *jtj = Mat7::zeros();
  if (jtr) *jtr = Vec7::all(0);
  for (const Sample& q : samples) {
    const double dx = q.u - p[0], dy = q.v - p[1];
    const double d1 = -s1n * dx + c1 * dy, d2 = -s2n * dx + c2 * dy;
    const double e1 = std::erf(k * d1), e2 = std::erf(k * d2);
    const double r = p[5] + p[6] * e1 * e2 - q.value;
    cost += r * r;
    if (!jtj) continue;
    // d erf(k d)/dz = 2/sqrt(pi) exp(-(k d)^2) d(k d)/dz
    const double g1 = kTwoOverSqrtPi * std::exp(-k * k * d1 * d1), g2 = kTwoOverSqrtPi * std::exp(-k * k * d2 * d2);
    const double a1 = p[6] * g1 * e2, a2 = p[6] * e1 * g2;  // dr/d(k d1), dr/d(k d2)
    Vec7 j;
    j[0] = a1 * k * s1n + a2 * k * s2n;          // d/dx_c
    j[1] = -a1 * k * c1 - a2 * k * c2;           // d/dy_c
    j[2] = a1 * k * (-c1 * dx - s1n * dy);       // d/dtheta1
    j[3] = a2 * k * (-c2 * dx - s2n * dy);       // d/dtheta2
    j[4] = -(a1 * k * d1 + a2 * k * d2) / p[4];  // d/dsigma
    j[5] = 1.0;                                  // d/dm
    j[6] = e1 * e2;                              // d/dA
    for (int i = 0; i < 7; ++i) {
      (*jtr)[i] += j[i] * r;
      for (int m = i; m < 7; ++m) (*jtj)(i, m) += j[i] * j[m];
    }
  }
  if (jtj) {
    for (int i = 0; i < 7; ++i) {
      for (int m = 0; m < i; ++m) (*jtj)(i, m) = (*jtj)(m, i);
    }
  }
  return cost;
}

}  // namespace

std::optional<std::string> ValidateSaddleOptions(const SaddleOptions& o) {
  const auto bad = [](const std::string& name, double value, const std::string& range) {
    return std::optional<std::string>(name + " = " + Num(value) + " is out of range (" + range + ")");
  };
  if (o.half_window_px < 2 || o.half_window_px > 30) return bad("half_window_px", o.half_window_px, "2..30 px");
  if (!(o.smoothing_sigma_px >= 0 && o.smoothing_sigma_px <= 5))
    return bad("smoothing_sigma_px", o.smoothing_sigma_px, "0..5 px");
  if (!(o.weight_sigma_fraction > 0 && o.weight_sigma_fraction <= 10))
    return bad("weight_sigma_fraction", o.weight_sigma_fraction, "(0, 10]");
  if (!(o.max_shift_px > 0 && std::isfinite(o.max_shift_px))) return bad("max_shift_px", o.max_shift_px, "> 0 px");
  if (o.max_iterations < 1 || o.max_iterations > 100) return bad("max_iterations", o.max_iterations, "1..100");
  if (!(o.tolerance_px > 0 && o.tolerance_px <= 0.1)) return bad("tolerance_px", o.tolerance_px, "(0, 0.1] px");
  return std::nullopt;
}

std::optional<cv::Point2d> SaddlePointOf(const QuadraticSurface& q) {
  const double det = 4 * q.a * q.c - q.b * q.b;  // determinant of the Hessian [2a b; b 2c]
  if (!(det < 0)) return std::nullopt;
  return cv::Point2d((q.b * q.e - 2 * q.c * q.d) / det, (q.b * q.d - 2 * q.a * q.e) / det);
}

cv::Mat1d SmoothForSaddle(const cv::Mat& image, double smoothing_sigma_px) {
  if (image.empty() || image.channels() != 1) {
    throw std::invalid_argument("SmoothForSaddle needs a non-empty single-channel image");
  }
  if (!(smoothing_sigma_px >= 0)) {
    throw std::invalid_argument("smoothing sigma " + Num(smoothing_sigma_px) + " px is negative");
  }
  cv::Mat1d out;
  image.convertTo(out, CV_64F);
  if (smoothing_sigma_px > 0) {
    cv::GaussianBlur(out, out, cv::Size(), smoothing_sigma_px, smoothing_sigma_px, cv::BORDER_REPLICATE);
  }
  return out;
}

SaddleFit RefineSaddlePoint(const cv::Mat1d& smoothed, cv::Point2d start_px, const SaddleOptions& options) {
  if (const auto problem = ValidateSaddleOptions(options)) throw std::invalid_argument(*problem);
  SaddleFit fit;
  fit.point_px = start_px;
  cv::Point2d c = start_px;
  for (int it = 1; it <= options.max_iterations; ++it) {
    fit.iterations = it;
    const std::optional<QuadraticSurface> q = FitQuadratic(smoothed, c, options);
    if (!q) {
      fit.failure = "the fit window leaves the image or holds no corner";
      return fit;
    }
    fit.surface = *q;
    const std::optional<cv::Point2d> step = SaddlePointOf(*q);
    if (!step) {
      fit.failure = "the fitted surface is no saddle (4ac - b^2 >= 0)";
      return fit;
    }
    c += *step;
    const double moved = cv::norm(c - start_px);
    if (!(moved <= options.max_shift_px)) {
      fit.failure =
          "the saddle point moved " + Num(moved) + " px from the start (limit " + Num(options.max_shift_px) + " px)";
      return fit;
    }
    if (cv::norm(*step) < options.tolerance_px) {
      fit.point_px = c;
      return fit;
    }
  }
  fit.failure = "the saddle point did not settle within " + std::to_string(options.max_iterations) + " iterations";
  return fit;
}

std::optional<std::string> ValidateXCornerOptions(const XCornerOptions& o) {
  const auto bad = [](const std::string& name, double value, const std::string& range) {
    return std::optional<std::string>(name + " = " + Num(value) + " is out of range (" + range + ")");
  };
  if (o.half_window_px < 2 || o.half_window_px > 30) return bad("half_window_px", o.half_window_px, "2..30 px");
  if (!(o.max_shift_px > 0 && std::isfinite(o.max_shift_px))) return bad("max_shift_px", o.max_shift_px, "> 0 px");
  if (o.max_iterations < 1 || o.max_iterations > 200) return bad("max_iterations", o.max_iterations, "1..200");
  if (!(o.tolerance_px > 0 && o.tolerance_px <= 0.1)) return bad("tolerance_px", o.tolerance_px, "(0, 0.1] px");
  return std::nullopt;
}

double XCornerValue(const XCornerModel& m, double u, double v) {
  const double dx = u - m.corner_px.x, dy = v - m.corner_px.y, k = 1.0 / (std::sqrt(2.0) * m.sigma_px);
  const double d1 = -std::sin(m.angle1_rad) * dx + std::cos(m.angle1_rad) * dy;
  const double d2 = -std::sin(m.angle2_rad) * dx + std::cos(m.angle2_rad) * dy;
  return m.mean + m.amplitude * std::erf(k * d1) * std::erf(k * d2);
}

XCornerFit FitXCorner(const cv::Mat& image, const SaddleFit& start, const XCornerOptions& options) {
  if (const auto problem = ValidateXCornerOptions(options)) throw std::invalid_argument(*problem);
  if (image.empty() || image.channels() != 1) {
    throw std::invalid_argument("FitXCorner needs a non-empty single-channel image");
  }
  XCornerFit fit;
  fit.point_px = start.point_px;
  const auto angles = Asymptotes(start.surface);
  if (!angles) {
    fit.failure = "the start surface is no saddle, so it gives no edge directions";
    return fit;
  }
  std::vector<Sample> samples;
  switch (image.depth()) {
    case CV_8U:
      CollectWindow<uchar>(image, start.point_px, options.half_window_px, samples);
      break;
    case CV_32F:
      CollectWindow<float>(image, start.point_px, options.half_window_px, samples);
      break;
    case CV_64F:
      CollectWindow<double>(image, start.point_px, options.half_window_px, samples);
      break;
    default:
      throw std::invalid_argument("FitXCorner needs an 8U, 32F or 64F image");
  }
  if (samples.size() < 12) {
    fit.failure = "the fit window leaves the image";
    return fit;
  }
  double lo = INFINITY, hi = -INFINITY, sum = 0;
  for (const Sample& q : samples) {
    lo = std::min(lo, q.value);
    hi = std::max(hi, q.value);
    sum += q.value;
  }
  // The amplitude's sign: the quadratic's sign along the bisector of the two edges, against
  // s1 s2 there (erf(s1) erf(s2) has the sign of s1 s2).
  const double t1 = angles->first, t2 = angles->second;
  const cv::Point2d bis(std::cos(t1) + std::cos(t2), std::sin(t1) + std::sin(t2));
  const QuadraticSurface& q = start.surface;
  const double q_bis = q.a * bis.x * bis.x + q.b * bis.x * bis.y + q.c * bis.y * bis.y;
  const double s_bis = (-std::sin(t1) * bis.x + std::cos(t1) * bis.y) * (-std::sin(t2) * bis.x + std::cos(t2) * bis.y);
  Vec7 p(start.point_px.x, start.point_px.y, t1, t2, 1.0, sum / static_cast<double>(samples.size()),
         (q_bis * s_bis > 0 ? 0.5 : -0.5) * (hi - lo));
  Mat7 jtj;
  Vec7 jtr;
  double cost = XCornerCost(p, samples, &jtj, &jtr);
  double lambda = 1e-3;
  bool converged = false;
  for (int it = 1; it <= options.max_iterations && !converged; ++it) {
    fit.iterations = it;
    // Up to 10 tries of the damping per iteration.
    bool stepped = false;
    for (int attempt = 0; attempt < 10 && !stepped; ++attempt) {
      Mat7 a = jtj;
      for (int i = 0; i < 7; ++i) a(i, i) += lambda * std::max(jtj(i, i), 1e-12);
      Vec7 delta;
      if (!cv::solve(a, -jtr, delta, cv::DECOMP_CHOLESKY)) {
        lambda *= 10;
        continue;
      }
      Vec7 trial = p + delta;
      if (!(trial[4] > 0)) {
        lambda *= 10;
        continue;
      }
      const double trial_cost = XCornerCost(trial, samples, nullptr, nullptr);
      if (trial_cost < cost) {
        const double moved = std::hypot(delta[0], delta[1]);
        p = trial;
        cost = XCornerCost(p, samples, &jtj, &jtr);
        lambda = std::max(lambda / 10, 1e-12);
        stepped = true;
        if (moved < options.tolerance_px) converged = true;
      } else {
        lambda *= 10;
      }
    }
    // No step lowers the cost any more: at the minimum to rounding.
    if (!stepped) converged = true;
  }
  fit.model = FromVector(p);
  fit.rms_grey = std::sqrt(cost / static_cast<double>(samples.size()));
  const cv::Point2d corner(p[0], p[1]);
  const double moved = cv::norm(corner - start.point_px);
  const double sin_between = std::abs(std::sin(p[2] - p[3]));
  if (!converged) {
    fit.failure = "the X-corner fit did not converge within " + std::to_string(options.max_iterations) + " iterations";
  } else if (!(moved <= options.max_shift_px)) {
    fit.failure = "the X-corner fit moved the corner " + Num(moved) + " px from the saddle point (limit " +
                  Num(options.max_shift_px) + " px)";
  } else if (!(p[4] > 0.1 && p[4] < options.half_window_px)) {
    fit.failure = "the X-corner fit's edge blur " + Num(p[4]) + " px is outside (0.1, " +
                  std::to_string(options.half_window_px) + ") px";
  } else if (!(sin_between > std::sin(10.0 * 3.14159265358979323846 / 180.0))) {
    fit.failure = "the X-corner fit's edges are within 10 degrees of parallel";
  } else {
    fit.point_px = corner;
  }
  return fit;
}

int SaddleHalfWindowPx(const std::vector<cv::Point2f>& corners_px, const BoardSpec& board, int max_half_window_px) {
  if (corners_px.size() != static_cast<size_t>(board.columns) * static_cast<size_t>(board.rows)) {
    throw std::invalid_argument("SaddleHalfWindowPx: " + std::to_string(corners_px.size()) + " corners for a " +
                                std::to_string(board.columns) + "x" + std::to_string(board.rows) + " board");
  }
  double height = INFINITY;
  for (int j = 0; j + 1 < board.rows; ++j) {
    for (int i = 0; i + 1 < board.columns; ++i) {
      const size_t k = static_cast<size_t>(j * board.columns + i);
      const cv::Point2d a = corners_px[k];
      const cv::Point2d along_row = cv::Point2d(corners_px[k + 1]) - a;
      const cv::Point2d along_col = cv::Point2d(corners_px[k + static_cast<size_t>(board.columns)]) - a;
      const double area = std::abs(along_row.cross(along_col));
      const double lr = cv::norm(along_row), lc = cv::norm(along_col);
      if (lr > 0) height = std::min(height, area / lr);
      if (lc > 0) height = std::min(height, area / lc);
    }
  }
  if (!std::isfinite(height)) height = 0;
  const int cap = std::max(2, max_half_window_px);
  return std::clamp(static_cast<int>(std::min(0.4 * height, static_cast<double>(cap))), 2, cap);
}

RefinedCorners RefineCornersBySaddle(const cv::Mat& grey, const std::vector<cv::Point2f>& start_px,
                                     const SaddleOptions& options) {
  if (const auto problem = ValidateSaddleOptions(options)) throw std::invalid_argument(*problem);
  const cv::Mat1d smoothed = SmoothForSaddle(grey, options.smoothing_sigma_px);
  RefinedCorners out;
  out.corners_px.reserve(start_px.size());
  for (size_t k = 0; k < start_px.size(); ++k) {
    const SaddleFit fit = RefineSaddlePoint(smoothed, start_px[k], options);
    if (fit.failure) {
      out.corners_px.push_back(start_px[k]);
      out.fallbacks.push_back("corner " + std::to_string(k) + ": " + *fit.failure);
    } else {
      out.corners_px.emplace_back(static_cast<float>(fit.point_px.x), static_cast<float>(fit.point_px.y));
    }
  }
  return out;
}

std::optional<std::string> ValidateCornerRefineOptions(const CornerRefineOptions& o) {
  if (auto problem = ValidateSaddleOptions(o.saddle)) return "saddle." + *problem;
  if (auto problem = ValidateXCornerOptions(o.xcorner)) return "xcorner." + *problem;
  return std::nullopt;
}

RefinedCorners RefineCorners(const cv::Mat& grey, const std::vector<cv::Point2f>& start_px,
                             const CornerRefineOptions& options) {
  if (const auto problem = ValidateCornerRefineOptions(options)) throw std::invalid_argument(*problem);
  const cv::Mat1d smoothed = SmoothForSaddle(grey, options.saddle.smoothing_sigma_px);
  RefinedCorners out;
  out.corners_px.reserve(start_px.size());
  for (size_t k = 0; k < start_px.size(); ++k) {
    const SaddleFit saddle = RefineSaddlePoint(smoothed, start_px[k], options.saddle);
    cv::Point2d corner = start_px[k];
    if (saddle.failure) {
      out.fallbacks.push_back("corner " + std::to_string(k) + ": " + *saddle.failure + "; kept the start point");
    } else if (!options.fit_xcorner) {
      corner = saddle.point_px;
    } else {
      const XCornerFit x = FitXCorner(grey, saddle, options.xcorner);
      if (x.failure) {
        out.fallbacks.push_back("corner " + std::to_string(k) + ": " + *x.failure + "; kept the saddle point");
        corner = saddle.point_px;
      } else {
        corner = x.point_px;
      }
    }
    out.corners_px.emplace_back(static_cast<float>(corner.x), static_cast<float>(corner.y));
  }
  return out;
}

}  // namespace dropfit::calib
