#include "tracker/symmetry_fit.h"

#include <opencv2/core.hpp>
#include <opencv2/imgproc.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <stdexcept>

namespace dropfit::tracker {

namespace {

std::string Num(double v) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%g", v);
  return buf;
}

// Value and central-difference gradient sampled on a float patch.
struct Sample {
  float value, gx, gy;
};

// Weights of one sub-pixel fraction (fx, fy) in [0, 1)²: four-point Lagrange weights for the
// value at the nodes -1, 0, 1, 2 (Abramowitz & Stegun 1964, 25.2.13, from memory; they reproduce
// cubics exactly) and bilinear ones for the gradient. Every sample of one Gauss-Newton iteration
// shares them: the offsets are whole pixels, so c + d and c - d both have the fraction of c.
struct Weights {
  float vx[4], vy[4];
  float b00, b01, b10, b11;
  Weights(float fx, float fy) {
    Cubic(fx, vx);
    Cubic(fy, vy);
    b00 = (1 - fx) * (1 - fy);
    b01 = fx * (1 - fy);
    b10 = (1 - fx) * fy;
    b11 = fx * fy;
  }
  static void Cubic(float t, float w[4]) {
    const float tm1 = t - 1.0f, tm2 = t - 2.0f, tp1 = t + 1.0f;
    w[0] = -t * tm1 * tm2 / 6.0f;
    w[1] = tp1 * tm1 * tm2 / 2.0f;
    w[2] = -tp1 * t * tm2 / 2.0f;
    w[3] = tp1 * t * tm1 / 6.0f;
  }
};

struct Patch {
  cv::Mat value, gx, gy;  // CV_32F
  cv::Point origin;       // image coordinates of the patch's (0, 0)

  // The sample at (x0 + fx, y0 + fy) in patch coordinates, (fx, fy) the fraction `w` was made for;
  // caller guarantees 0 <= x0 < cols-1, 0 <= y0 < rows-1.
  // The value is interpolated with the four-point Lagrange weights, the gradient bilinearly.
  // Why not bilinear for the value: bilinear weights w_k at offsets e_k = k - f have a third
  // moment sum(w_k e_k^3) = f (1 - f) (1 - 2 f) (so has Keys' cubic convolution), which leaves
  // a term in I(c + d) - I(c - d) that pulls the centre by up to ~0.01 px periodically with f
  // ("pixel locking"). Weights that reproduce cubics have no third moment, so that term is gone;
  // the gradient only steers the Gauss-Newton steps and does not move the fixed point.
  Sample At(int x0, int y0, const Weights& w) const {
    auto bilinear = [&](const cv::Mat& m) {
      const float* r0 = m.ptr<float>(y0) + x0;
      const float* r1 = m.ptr<float>(y0 + 1) + x0;
      return w.b00 * r0[0] + w.b01 * r0[1] + w.b10 * r1[0] + w.b11 * r1[1];
    };
    float v = 0.0f;
    if (x0 >= 1 && y0 >= 1 && x0 + 2 < value.cols && y0 + 2 < value.rows) {
      for (int j = 0; j < 4; ++j) {
        const float* row = value.ptr<float>(y0 - 1 + j) + x0 - 1;
        v += w.vy[j] * (w.vx[0] * row[0] + w.vx[1] * row[1] + w.vx[2] * row[2] + w.vx[3] * row[3]);
      }
    } else {  // at the patch border: nodes clamped to it
      for (int j = 0; j < 4; ++j) {
        const float* row = value.ptr<float>(std::clamp(y0 - 1 + j, 0, value.rows - 1));
        for (int k = 0; k < 4; ++k) v += w.vy[j] * w.vx[k] * row[std::clamp(x0 - 1 + k, 0, value.cols - 1)];
      }
    }
    return {v, bilinear(gx), bilinear(gy)};
  }
  float ValueAt(double x, double y) const {
    const int x0 = static_cast<int>(x), y0 = static_cast<int>(y);
    const float fx = static_cast<float>(x - x0), fy = static_cast<float>(y - y0);
    const float* r0 = value.ptr<float>(y0) + x0;
    const float* r1 = value.ptr<float>(y0 + 1) + x0;
    return (1 - fy) * ((1 - fx) * r0[0] + fx * r0[1]) + fy * ((1 - fx) * r1[0] + fx * r1[1]);
  }
};

// The fitted numbers, the centre in patch coordinates.
struct FitState {
  double cx = 0.0, cy = 0.0;  // centre [px], patch coordinates
  double a[2] = {0, 0};       // gain gradient term (header: a = 2g)
  double b[2] = {0, 0};       // offset term (header: b = 2(h - B0 g))
};

// Sampling: the patch around `start_px` holding every sample the fit may take (the window plus
// the largest shift, and a margin for interpolation), as float, smoothed by
// presmooth_sigma_px, with central-difference gradients; and `raw`, the unsmoothed values the
// quality is judged on. False when the patch is too small (the start is off the image).
bool CutPatch(const cv::Mat& grey, cv::Point2d start_px, const SymmetryFitOptions& options, Patch& patch, Patch& raw) {
  const int reach = static_cast<int>(std::ceil(options.window_radius_px + options.max_shift_px)) + 2;
  const cv::Rect want(static_cast<int>(std::floor(start_px.x)) - reach,
                      static_cast<int>(std::floor(start_px.y)) - reach, 2 * reach + 2, 2 * reach + 2);
  const cv::Rect rect = want & cv::Rect(0, 0, grey.cols, grey.rows);
  if (rect.width < 3 || rect.height < 3) return false;
  patch.origin = rect.tl();
  grey(rect).convertTo(patch.value, CV_32F);
  raw = patch;  // quality is judged on the unsmoothed samples
  if (options.presmooth_sigma_px > 0) {
    raw.value = patch.value.clone();
    cv::GaussianBlur(patch.value, patch.value, cv::Size(), options.presmooth_sigma_px, 0, cv::BORDER_REPLICATE);
  }
  patch.gx.create(rect.size(), CV_32F);
  patch.gy.create(rect.size(), CV_32F);
  const int rows = rect.height, cols = rect.width;
  for (int y = 0; y < rows; ++y) {
    const float* v = patch.value.ptr<float>(y);
    const float* up = patch.value.ptr<float>(std::max(y - 1, 0));
    const float* dn = patch.value.ptr<float>(std::min(y + 1, rows - 1));
    float* gx = patch.gx.ptr<float>(y);
    float* gy = patch.gy.ptr<float>(y);
    const float sy = (y == 0 || y == rows - 1) ? 1.0f : 0.5f;
    for (int x = 0; x < cols; ++x) {
      const int xl = std::max(x - 1, 0), xr = std::min(x + 1, cols - 1);
      gx[x] = (v[xr] - v[xl]) * ((xr - xl) == 2 ? 0.5f : 1.0f);
      gy[x] = (dn[x] - up[x]) * sy;
    }
  }
  return true;
}

// The samples at c + d and c - d for whole-pixel offsets d about one centre c. They all share
// the sub-pixel fraction of c, so the interpolation weights are made once per centre.
class PairSampler {
 public:
  PairSampler(const Patch& patch, double cx, double cy)
      : patch_(patch), cols_(patch.value.cols), rows_(patch.value.rows), weights_(0.0f, 0.0f) {
    const double fx = std::floor(cx), fy = std::floor(cy);
    base_x_ = static_cast<int>(fx);
    base_y_ = static_cast<int>(fy);
    weights_ = Weights(static_cast<float>(cx - fx), static_cast<float>(cy - fy));
  }
  // False when either sample would need pixels outside the patch.
  bool Pair(const cv::Point& d, Sample& plus, Sample& minus) const {
    const int xp = base_x_ + d.x, yp = base_y_ + d.y, xm = base_x_ - d.x, ym = base_y_ - d.y;
    if (std::min({xp, yp, xm, ym}) < 0 || std::max(xp, xm) > cols_ - 2 || std::max(yp, ym) > rows_ - 2) return false;
    plus = patch_.At(xp, yp, weights_);
    minus = patch_.At(xm, ym, weights_);
    return true;
  }

 private:
  const Patch& patch_;
  int cols_, rows_;
  int base_x_ = 0, base_y_ = 0;
  Weights weights_;
};

// One pair's residual and Jacobian row (centre x, y; a x, y; b x, y) at the fitted centre.
struct PairRow {
  double r;
  double j[6];
};

enum class StepOutcome {
  kTaken,     // `state` moved by the step
  kOutside,   // a sample fell outside the patch; `state` unchanged
  kSingular,  // the normal equations could not be solved; `state` unchanged
};

// One Gauss-Newton step on r(d) = I(c+d) - I(c-d) - a.d S(d) - b.d (header, "Method"): the
// normal equations J^T J step = -J^T r over the offsets, solved by Cholesky; with
// `fit_light_gradient` false only the centre moves (a, b stay zero). `step_px` is the length of
// the centre's step [px].
StepOutcome GaussNewtonStep(const Patch& patch, const std::vector<cv::Point>& offsets, bool fit_light_gradient,
                            FitState& state, double& step_px, double tukey_inv_c2 = 0.0) {
  const int n_params = fit_light_gradient ? 6 : 2;
  const double(&a)[2] = state.a;
  const double(&b)[2] = state.b;
  cv::Matx<double, 6, 6> jtj = cv::Matx<double, 6, 6>::zeros();
  cv::Vec<double, 6> jtr = cv::Vec<double, 6>::all(0.0);
  const PairSampler sampler(patch, state.cx, state.cy);
  for (const cv::Point& d : offsets) {
    Sample p, m;
    if (!sampler.Pair(d, p, m)) return StepOutcome::kOutside;
    const double s = 0.5 * (p.value + m.value);
    const double r = (p.value - m.value) - (a[0] * d.x + a[1] * d.y) * s - (b[0] * d.x + b[1] * d.y);
    const double j[6] = {
        p.gx - m.gx, p.gy - m.gy, -d.x * s, -d.y * s, -static_cast<double>(d.x), -static_cast<double>(d.y)};
    double w = 1.0;
    if (tukey_inv_c2 > 0.0) {  // Tukey's biweight (RobustCentre)
      const double u = 1.0 - r * r * tukey_inv_c2;
      if (u <= 0.0) continue;
      w = u * u;
    }
    for (int i = 0; i < n_params; ++i) {
      jtr[i] += w * j[i] * r;
      for (int k = 0; k <= i; ++k) jtj(i, k) += w * j[i] * j[k];
    }
  }
  for (int i = 0; i < n_params; ++i)
    for (int k = i + 1; k < n_params; ++k) jtj(i, k) = jtj(k, i);
  for (int i = n_params; i < 6; ++i) jtj(i, i) = 1.0;  // unused parameters stay at zero

  cv::Vec<double, 6> step;
  if (!cv::solve(jtj, -jtr, step, cv::DECOMP_CHOLESKY)) return StepOutcome::kSingular;
  state.cx += step[0];
  state.cy += step[1];
  state.a[0] += step[2];
  state.a[1] += step[3];
  state.b[0] += step[4];
  state.b[1] += step[5];
  step_px = std::hypot(step[0], step[1]);
  return StepOutcome::kTaken;
}

constexpr double kTukeyC = 4.685;      // 95 % efficiency for normal residuals (Holland & Welsch 1977)
constexpr double kMinScaleGrey = 1.0;  // a few times the 8-bit rounding noise of a pair difference

// 1 / (c s)^2 of Tukey's biweight for the residuals of `rows` (not empty): c = 4.685,
// s = 1.4826 median |r|, at least kMinScaleGrey.
double TukeyInvC2(const std::vector<PairRow>& rows) {
  std::vector<double> abs_r(rows.size());
  for (size_t i = 0; i < rows.size(); ++i) abs_r[i] = std::abs(rows[i].r);
  const auto mid = abs_r.begin() + static_cast<std::ptrdiff_t>(abs_r.size() / 2);
  std::nth_element(abs_r.begin(), mid, abs_r.end());
  const double scale = std::max(1.4826 * *mid, kMinScaleGrey);
  return 1.0 / (kTukeyC * kTukeyC * scale * scale);
}

// The robust shift (header, "Robust shift"): the length of one Gauss-Newton step, weighted with
// Tukey's biweight w = (1 - (r / (c s))²)² (0 beyond c s; c = 4.685, s = 1.4826 median |r|, at
// least kMinScaleGrey), from the fitted state whose pair rows are `rows`. -1 when the weighted
// normal equations cannot be solved.
double RobustShift(const std::vector<PairRow>& rows, bool fit_light_gradient) {
  if (rows.empty()) return -1.0;
  const double inv_c2 = TukeyInvC2(rows);
  const int n_params = fit_light_gradient ? 6 : 2;
  cv::Matx<double, 6, 6> jtj = cv::Matx<double, 6, 6>::zeros();
  cv::Vec<double, 6> jtr = cv::Vec<double, 6>::all(0.0);
  for (const PairRow& row : rows) {
    const double u = 1.0 - row.r * row.r * inv_c2;
    if (u <= 0) continue;
    const double w = u * u;
    for (int i = 0; i < n_params; ++i) {
      jtr[i] += w * row.j[i] * row.r;
      for (int k = 0; k <= i; ++k) jtj(i, k) += w * row.j[i] * row.j[k];
    }
  }
  for (int i = 0; i < n_params; ++i)
    for (int k = i + 1; k < n_params; ++k) jtj(i, k) = jtj(k, i);
  for (int i = n_params; i < 6; ++i) jtj(i, i) = 1.0;
  cv::Vec<double, 6> step;
  if (!cv::solve(jtj, -jtr, step, cv::DECOMP_CHOLESKY)) return -1.0;
  return std::hypot(step[0], step[1]);
}

// The robust centre (header, "Robust centre"): Gauss-Newton steps weighted with Tukey's biweight,
// its scale fixed from the fitted state's residuals `rows` as in RobustShift, from the fitted
// state until a step moves less than 1e-4 px (at most 10). The fitted centre when a step fails.
cv::Point2d RobustCentre(const Patch& patch, const std::vector<cv::Point>& offsets, const std::vector<PairRow>& rows,
                         FitState state, bool fit_light_gradient, cv::Point origin) {
  const cv::Point2d fitted(state.cx + origin.x, state.cy + origin.y);
  if (rows.empty()) return fitted;
  const double inv_c2 = TukeyInvC2(rows);
  for (int it = 0; it < 10; ++it) {
    double step_px = 0.0;
    if (GaussNewtonStep(patch, offsets, fit_light_gradient, state, step_px, inv_c2) != StepOutcome::kTaken)
      return fitted;
    if (std::hypot(state.cx + origin.x - fitted.x, state.cy + origin.y - fitted.y) > 2.0) return fitted;
    if (step_px < 1e-4) break;
  }
  return {state.cx + origin.x, state.cy + origin.y};
}

// Quality and residual (header, "Quality") at the final centre, on the unsmoothed samples (`raw`).
// `rows` receives the fit's own residual and Jacobian row of every pair there (smoothed samples
// of `patch`), for RobustShift. False, leaving `res` alone, when part of the window falls outside
// the patch.
bool MeasureQuality(const Patch& patch, const Patch& raw, const std::vector<cv::Point>& offsets, const FitState& state,
                    SymmetryFitResult& res, std::vector<PairRow>& rows) {
  rows.clear();
  rows.reserve(offsets.size());
  const double cx = state.cx, cy = state.cy;
  const double(&a)[2] = state.a;
  const double(&b)[2] = state.b;
  const PairSampler sampler(patch, cx, cy);
  double sum = 0.0, sum2 = 0.0, rss = 0.0;
  for (const cv::Point& d : offsets) {
    Sample p, m;
    if (!sampler.Pair(d, p, m)) return false;
    const double s_fit = 0.5 * (p.value + m.value);
    rows.push_back(
        {(p.value - m.value) - (a[0] * d.x + a[1] * d.y) * s_fit - (b[0] * d.x + b[1] * d.y),
         {p.gx - m.gx, p.gy - m.gy, -d.x * s_fit, -d.y * s_fit, -static_cast<double>(d.x), -static_cast<double>(d.y)}});
    p.value = raw.ValueAt(cx + d.x, cy + d.y);
    m.value = raw.ValueAt(cx - d.x, cy - d.y);
    const double s = 0.5 * (p.value + m.value);
    const double r = (p.value - m.value) - (a[0] * d.x + a[1] * d.y) * s - (b[0] * d.x + b[1] * d.y);
    rss += r * r;
    sum += p.value + m.value;
    sum2 += double(p.value) * p.value + double(m.value) * m.value;
  }
  const double n = 2.0 * static_cast<double>(offsets.size());
  const double sst = sum2 - sum * sum / n;
  res.residual_rms = std::sqrt(rss / static_cast<double>(offsets.size()));
  res.window_sd = std::sqrt(std::max(sst, 0.0) / n);
  res.quality = sst > 0 ? std::clamp(1.0 - rss / sst, 0.0, 1.0) : 0.0;
  return true;
}

}  // namespace

std::optional<std::string> ValidateSymmetryFitOptions(const SymmetryFitOptions& o) {
  if (!(o.window_radius_px > 1.0 && o.window_radius_px <= 200.0))
    return "window_radius_px = " + Num(o.window_radius_px) + " px is outside (1, 200]";
  if (!(o.inner_radius_px >= 0.0 && o.inner_radius_px < o.window_radius_px))
    return "inner_radius_px = " + Num(o.inner_radius_px) + " px is outside [0, window_radius_px)";
  if (!(o.max_shift_px > 0.0 && o.max_shift_px <= 100.0))
    return "max_shift_px = " + Num(o.max_shift_px) + " px is outside (0, 100]";
  if (o.max_iterations < 1 || o.max_iterations > 100)
    return "max_iterations = " + std::to_string(o.max_iterations) + " is outside [1, 100]";
  if (!(o.presmooth_sigma_px >= 0.0 && o.presmooth_sigma_px <= 3.0))
    return "presmooth_sigma_px = " + Num(o.presmooth_sigma_px) + " px is outside [0, 3]";
  if (!(o.tolerance_px > 0.0 && o.tolerance_px <= 0.1))
    return "tolerance_px = " + Num(o.tolerance_px) + " px is outside (0, 0.1]";
  return std::nullopt;
}

SymmetryFitter::SymmetryFitter(const SymmetryFitOptions& options) : options_(options) {
  if (auto msg = ValidateSymmetryFitOptions(options)) throw std::invalid_argument("symmetry fit: " + *msg);
  const int r = static_cast<int>(std::floor(options.window_radius_px));
  const double r2_out = options.window_radius_px * options.window_radius_px;
  const double r2_in = options.inner_radius_px * options.inner_radius_px;
  for (int dy = 0; dy <= r; ++dy) {
    for (int dx = -r; dx <= r; ++dx) {
      if (dy == 0 && dx <= 0) continue;  // one of each pair (d, -d); d = 0 carries nothing
      const double d2 = dx * dx + dy * dy;
      if (d2 > r2_out || d2 < r2_in) continue;
      offsets_.emplace_back(dx, dy);
    }
  }
}

SymmetryFitResult SymmetryFitter::Fit(const cv::Mat& grey, cv::Point2d start_px) const {
  CV_Assert(grey.type() == CV_8UC1);
  SymmetryFitResult res;
  res.centre_px = start_px;
  if (!std::isfinite(start_px.x) || !std::isfinite(start_px.y)) {
    res.inside = false;
    return res;
  }
  Patch patch, raw;
  if (!CutPatch(grey, start_px, options_, patch, raw)) {
    res.inside = false;
    return res;
  }
  FitState state;
  state.cx = start_px.x - patch.origin.x;  // patch coordinates
  state.cy = start_px.y - patch.origin.y;
  const auto image_centre = [&] { return cv::Point2d(state.cx + patch.origin.x, state.cy + patch.origin.y); };

  for (int it = 0; it < options_.max_iterations; ++it) {
    double step_px = 0.0;
    const StepOutcome outcome = GaussNewtonStep(patch, offsets_, options_.fit_light_gradient, state, step_px);
    if (outcome == StepOutcome::kOutside) {
      res.inside = false;
      res.centre_px = image_centre();
      return res;
    }
    if (outcome == StepOutcome::kSingular) break;
    res.iterations = it + 1;
    const double moved = std::hypot(state.cx + patch.origin.x - start_px.x, state.cy + patch.origin.y - start_px.y);
    if (!std::isfinite(moved) || moved > options_.max_shift_px) {
      res.centre_px = image_centre();
      return res;
    }
    if (step_px < options_.tolerance_px) {
      res.converged = true;
      break;
    }
  }
  res.centre_px = image_centre();
  std::vector<PairRow> rows;
  if (!MeasureQuality(patch, raw, offsets_, state, res, rows)) {
    res.inside = false;
    res.converged = false;
  }
  if (res.converged) {
    res.robust_shift_px = RobustShift(rows, options_.fit_light_gradient);
    if (options_.robust_centre)
      res.robust_centre_px = RobustCentre(patch, offsets_, rows, state, options_.fit_light_gradient, patch.origin);
  }
  return res;
}

}  // namespace dropfit::tracker
