#include "tracker/marker_detect.h"

#include <opencv2/imgproc.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <stdexcept>

#include "tracker/symmetry_fit.h"

namespace dropfit::tracker {

namespace {

constexpr double kPi = 3.14159265358979323846;
// Smoothing of the saddle response [px]: wide enough to calm 2-5 grey levels of noise, narrow
// enough for discs of radius >= 3 px.
constexpr double kSaddleSigmaPx = 1.5;

std::string Num(double v, const char* fmt = "%g") {
  char buf[48];
  std::snprintf(buf, sizeof buf, fmt, v);
  return buf;
}

bool Bilinear(const cv::Mat& g, double x, double y, double& out) {
  if (!(x >= 0 && y >= 0 && x < g.cols - 1 && y < g.rows - 1)) return false;
  const int x0 = static_cast<int>(x), y0 = static_cast<int>(y);
  const double fx = x - x0, fy = y - y0;
  const uchar* r0 = g.ptr<uchar>(y0) + x0;
  const uchar* r1 = g.ptr<uchar>(y0 + 1) + x0;
  out = (1 - fy) * ((1 - fx) * r0[0] + fx * r0[1]) + fy * ((1 - fx) * r1[0] + fx * r1[1]);
  return true;
}

// Mean over a ring of radius rho about c (rho = 0: the centre sample). NaN when off the frame.
double RingMean(const cv::Mat& g, cv::Point2d c, double rho) {
  if (rho < 1e-9) {
    double v;
    return Bilinear(g, c.x, c.y, v) ? v : std::nan("");
  }
  const int n = std::clamp(static_cast<int>(std::ceil(2 * kPi * rho)), 8, 256);
  double sum = 0;
  for (int i = 0; i < n; ++i) {
    const double t = 2 * kPi * i / n;
    double v;
    if (!Bilinear(g, c.x + rho * std::cos(t), c.y + rho * std::sin(t), v)) return std::nan("");
    sum += v;
  }
  return sum / n;
}

// Mean |I(c + d) - I(c + R90 d)| over a ring of radius rho. NaN when off the frame.
double RingQuarterTurnDifference(const cv::Mat& g, cv::Point2d c, double rho) {
  const int n = std::clamp(static_cast<int>(std::ceil(2 * kPi * rho)), 8, 256);
  double sum = 0;
  for (int i = 0; i < n; ++i) {
    const double t = 2 * kPi * i / n;
    const double dx = rho * std::cos(t), dy = rho * std::sin(t);
    double a, b;
    if (!Bilinear(g, c.x + dx, c.y + dy, a) || !Bilinear(g, c.x - dy, c.y + dx, b)) return std::nan("");
    sum += std::abs(a - b);
  }
  return sum / n;
}

void LocalMaxima(const cv::Mat& response, double threshold, int nms_radius, cv::Point offset,
                 std::vector<std::pair<double, cv::Point>>& out) {
  cv::Mat dil;
  cv::dilate(response, dil, cv::getStructuringElement(cv::MORPH_RECT, {2 * nms_radius + 1, 2 * nms_radius + 1}));
  for (int y = 1; y < response.rows - 1; ++y) {
    const float* r = response.ptr<float>(y);
    const float* d = dil.ptr<float>(y);
    for (int x = 1; x < response.cols - 1; ++x) {
      if (r[x] > threshold && r[x] >= d[x]) out.push_back({r[x], cv::Point(x, y) + offset});
    }
  }
}

void KeepStrongest(std::vector<std::pair<double, cv::Point>>& v, int n) {
  std::sort(v.begin(), v.end(), [](const auto& a, const auto& b) { return a.first > b.first; });
  if (static_cast<int>(v.size()) > n) v.resize(static_cast<size_t>(n));
}

std::optional<MarkerCandidate> VerifyQuadrant(const cv::Mat& g, cv::Point2d p, const DetectOptions& o) {
  SymmetryFitOptions so;
  so.window_radius_px = std::max(2.5, 0.75 * o.min_radius_px);
  so.max_shift_px = 3.0;
  so.fit_light_gradient = false;
  const SymmetryFitResult fit = SymmetryFitter(so).Fit(g, p);
  const cv::Point2d c = fit.converged ? fit.centre_px : p;
  // Quarter-turn difference profile: high inside the disc, low in the background.
  double peak = 0, peak_rho = 0;
  std::vector<std::pair<double, double>> prof;
  for (double rho = 1.0; rho <= o.max_radius_px * 1.3 + 2; rho += 0.5) {
    const double a = RingQuarterTurnDifference(g, c, rho);
    if (!std::isfinite(a)) break;
    prof.push_back({rho, a});
    if (a > peak) {
      peak = a;
      peak_rho = rho;
    }
  }
  if (peak < 0.7 * o.min_contrast) return std::nullopt;
  double radius = 0;
  for (size_t i = 1; i < prof.size(); ++i) {
    if (prof[i].first > peak_rho && prof[i].second < 0.5 * peak) {
      const auto [r0, a0] = prof[i - 1];
      const auto [r1, a1] = prof[i];
      radius = r0 + (a0 - 0.5 * peak) / (a0 - a1) * (r1 - r0);
      break;
    }
  }
  if (radius < o.min_radius_px || radius > o.max_radius_px) return std::nullopt;
  // Refine the centre with the window the tracker will use, then verify.
  so.window_radius_px = std::max(2.5, 0.75 * radius);
  so.fit_light_gradient = true;
  const SymmetryFitResult fit2 = SymmetryFitter(so).Fit(g, c);
  MarkerCandidate cand;
  cand.kind = MarkerKind::kQuadrant;
  cand.centre_px = fit2.converged ? fit2.centre_px : c;
  cand.radius_px = radius;
  cand.contrast = peak;
  if (!RotationCorrelations(g, cand.centre_px, 1.0, std::max(2.0, 0.75 * radius), cand.half_turn_corr,
                            cand.quarter_turn_corr))
    return std::nullopt;
  if (cand.half_turn_corr < o.min_half_turn_corr || cand.quarter_turn_corr > o.max_quadrant_quarter_turn_corr)
    return std::nullopt;
  cand.score = 0.5 * (cand.half_turn_corr - cand.quarter_turn_corr);
  return cand;
}

// Radius where the ring-mean profile crosses halfway between inside and outside levels.
bool DotProfile(const cv::Mat& g, cv::Point2d c, double r_guess, double& radius, double& level_in, double& level_out) {
  // The profile runs out to 2 r + 5, or to the last ring inside the frame: a marker near the
  // frame's edge (a hub entering the view) keeps the rings it has, as long as they reach past
  // the background window below (and, once the radius is found, radius + 5).
  double rho_max = 2.0 * r_guess + 5.0;
  std::vector<std::pair<double, double>> prof;
  for (double rho = 0; rho <= rho_max; rho += 0.5) {
    const double m = RingMean(g, c, rho);
    if (!std::isfinite(m)) {
      rho_max = rho - 0.5;
      break;
    }
    prof.push_back({rho, m});
  }
  if (rho_max < 1.5 * r_guess + 3.5) return false;
  auto mean_over = [&](double lo, double hi) {
    double s = 0;
    int n = 0;
    for (const auto& [rho, m] : prof) {
      if (rho >= lo && rho <= hi) {
        s += m;
        ++n;
      }
    }
    return n ? s / n : std::nan("");
  };
  level_in = mean_over(0, std::max(0.5, 0.35 * r_guess));
  level_out = mean_over(1.5 * r_guess + 2.5, rho_max);
  for (int pass = 0; pass < 2; ++pass) {
    const double half = 0.5 * (level_in + level_out);
    radius = 0;
    for (size_t i = 1; i < prof.size(); ++i) {
      const double a0 = prof[i - 1].second - half, a1 = prof[i].second - half;
      if ((a0 > 0) != (a1 > 0)) {
        radius = prof[i - 1].first + a0 / (a0 - a1) * 0.5;
        break;
      }
    }
    if (radius <= 0 || radius + 5.0 > rho_max) return false;
    level_in = mean_over(0, std::max(0.5, 0.5 * radius - 0.5));
    const double out = mean_over(radius + 2.5, std::min(rho_max, radius + 5.0));
    if (!std::isfinite(out)) return false;
    level_out = out;
  }
  return true;
}

std::optional<MarkerCandidate> VerifyDot(const cv::Mat& g, cv::Point2d p, double r_guess, const DetectOptions& o) {
  double radius = 0, in = 0, out = 0;
  if (!DotProfile(g, p, r_guess, radius, in, out)) return std::nullopt;
  if (std::abs(in - out) < o.min_contrast || radius < o.min_radius_px || radius > o.max_radius_px) return std::nullopt;
  SymmetryFitOptions so;
  so.window_radius_px = radius + 3.0;
  so.max_shift_px = std::max(2.0, 0.5 * radius);
  const SymmetryFitResult fit = SymmetryFitter(so).Fit(g, p);
  if (!fit.converged) return std::nullopt;
  MarkerCandidate cand;
  cand.kind = MarkerKind::kDot;
  cand.centre_px = fit.centre_px;
  if (!DotProfile(g, cand.centre_px, radius, radius, in, out)) return std::nullopt;
  cand.radius_px = radius;
  cand.contrast = std::abs(in - out);
  cand.bright = in > out;
  if (cand.contrast < o.min_contrast || radius < o.min_radius_px || radius > o.max_radius_px) return std::nullopt;
  if (!RotationCorrelations(g, cand.centre_px, 0.0, radius + 3.0, cand.half_turn_corr, cand.quarter_turn_corr))
    return std::nullopt;
  if (cand.half_turn_corr < o.min_half_turn_corr || cand.quarter_turn_corr < o.min_dot_quarter_turn_corr)
    return std::nullopt;
  cand.score = std::min(cand.half_turn_corr, cand.quarter_turn_corr);
  return cand;
}

}  // namespace

std::optional<std::string> ValidateDetectOptions(const DetectOptions& o) {
  if (!(o.min_contrast >= 5 && o.min_contrast <= 255))
    return "min_contrast = " + Num(o.min_contrast) + " grey levels is outside [5, 255]";
  if (!(o.min_radius_px >= 2 && o.min_radius_px < o.max_radius_px && o.max_radius_px <= 300))
    return "marker radius range [" + Num(o.min_radius_px) + ", " + Num(o.max_radius_px) +
           "] px is not 2 <= min < max <= 300";
  for (double v : {o.min_half_turn_corr, std::abs(o.max_quadrant_quarter_turn_corr), o.min_dot_quarter_turn_corr}) {
    if (!(v > 0 && v < 1)) return "a correlation threshold (" + Num(v) + ") is outside (0, 1)";
  }
  if (o.max_proposals < 1 || o.max_proposals > 1000)
    return "max_proposals = " + std::to_string(o.max_proposals) + " is outside [1, 1000]";
  return std::nullopt;
}

std::string MarkerCandidate::Describe() const {
  std::string s = kind == MarkerKind::kQuadrant ? "quadrant disc" : (bright ? "bright dot" : "dark dot");
  s += " of radius " + Num(radius_px, "%.1f") + " px at (" + Num(centre_px.x, "%.2f") + ", " +
       Num(centre_px.y, "%.2f") + "): half-turn correlation " + Num(half_turn_corr, "%.3f") + ", quarter-turn " +
       Num(quarter_turn_corr, "%.3f") + ", contrast " + Num(contrast, "%.0f");
  return s;
}

bool RotationCorrelations(const cv::Mat& grey, cv::Point2d c, double inner_px, double outer_px, double& half_turn,
                          double& quarter_turn) {
  CV_Assert(grey.type() == CV_8UC1);
  const int r = static_cast<int>(std::floor(outer_px));
  double s0 = 0, s1 = 0, s2 = 0, s00 = 0, s11 = 0, s22 = 0, s01 = 0, s02 = 0;
  int n = 0;
  for (int dy = -r; dy <= r; ++dy) {
    for (int dx = -r; dx <= r; ++dx) {
      const double d2 = dx * dx + dy * dy;
      if (d2 > outer_px * outer_px || d2 < inner_px * inner_px) continue;
      double a, b, q;
      if (!Bilinear(grey, c.x + dx, c.y + dy, a) || !Bilinear(grey, c.x - dx, c.y - dy, b) ||
          !Bilinear(grey, c.x - dy, c.y + dx, q))
        return false;
      s0 += a, s1 += b, s2 += q;
      s00 += a * a, s11 += b * b, s22 += q * q, s01 += a * b, s02 += a * q;
      ++n;
    }
  }
  if (n < 4) return false;
  const double v0 = s00 - s0 * s0 / n, v1 = s11 - s1 * s1 / n, v2 = s22 - s2 * s2 / n;
  if (v0 <= 1e-9 || v1 <= 1e-9 || v2 <= 1e-9) return false;
  half_turn = (s01 - s0 * s1 / n) / std::sqrt(v0 * v1);
  quarter_turn = (s02 - s0 * s2 / n) / std::sqrt(v0 * v2);
  return true;
}

std::vector<MarkerCandidate> FindMarkerCandidates(const cv::Mat& grey, const cv::Rect& region, MarkerKind kind,
                                                  const DetectOptions& o) {
  if (auto msg = ValidateDetectOptions(o)) throw std::invalid_argument("marker detection: " + *msg);
  CV_Assert(grey.type() == CV_8UC1);
  std::vector<MarkerCandidate> found;
  const cv::Rect frame(0, 0, grey.cols, grey.rows);
  const cv::Rect inner = region & frame;
  if (inner.width < 8 || inner.height < 8) return found;

  const bool want_quadrant = kind == MarkerKind::kAuto || kind == MarkerKind::kQuadrant;
  const bool want_dot = kind == MarkerKind::kAuto || kind == MarkerKind::kDot;

  if (want_quadrant) {
    const int pad = 6;
    const cv::Rect ext = cv::Rect(inner.x - pad, inner.y - pad, inner.width + 2 * pad, inner.height + 2 * pad) & frame;
    cv::Mat f, s, ixx, iyy, ixy;
    grey(ext).convertTo(f, CV_32F);
    cv::GaussianBlur(f, s, cv::Size(), kSaddleSigmaPx);
    cv::Sobel(s, ixx, CV_32F, 2, 0, 3);
    cv::Sobel(s, iyy, CV_32F, 0, 2, 3);
    cv::Sobel(s, ixy, CV_32F, 1, 1, 3);
    cv::Mat resp = ixy.mul(ixy) - ixx.mul(iyy);
    // Response of an X-corner of the least contrast (see the header), at half strength.
    const double sigma2 = kSaddleSigmaPx * kSaddleSigmaPx + 0.5;
    const double thr = std::pow(0.5 * 4.0 * o.min_contrast / (kPi * sigma2), 2);
    std::vector<std::pair<double, cv::Point>> peaks;
    LocalMaxima(resp, thr, std::max(2, static_cast<int>(o.min_radius_px)), ext.tl(), peaks);
    KeepStrongest(peaks, o.max_proposals);
    for (const auto& [value, p] : peaks) {
      if (!inner.contains(p)) continue;
      if (auto c = VerifyQuadrant(grey, cv::Point2d(p), o)) found.push_back(*c);
    }
  }

  if (want_dot) {
    std::vector<std::pair<double, cv::Point>> peaks;
    std::vector<double> peak_radius;
    // Large scales run on a reduced image (area averaging by 2^level) so that the Gaussian
    // stays small: the proposal only needs to be within a fraction of the radius.
    cv::Mat base;
    cv::Rect base_rect;
    int base_level = -1;
    for (double r = o.min_radius_px; r <= o.max_radius_px * 1.0001; r *= 1.4) {
      const double sigma = r / std::sqrt(2.0);
      const int level = std::max(0, static_cast<int>(std::floor(std::log2(sigma / 2.0))));
      const double f = std::ldexp(1.0, level);
      const double sigma_l = sigma / f;
      const int pad = static_cast<int>(std::ceil(3 * sigma)) + 2 * static_cast<int>(f);
      const cv::Rect ext =
          cv::Rect(inner.x - pad, inner.y - pad, inner.width + 2 * pad, inner.height + 2 * pad) & frame;
      if (level != base_level || ext != base_rect) {
        grey(ext).convertTo(base, CV_32F);
        if (level > 0) {
          cv::resize(
              base, base,
              cv::Size(std::max(1, static_cast<int>(ext.width / f)), std::max(1, static_cast<int>(ext.height / f))), 0,
              0, cv::INTER_AREA);
        }
        base_level = level;
        base_rect = ext;
      }
      if (base.cols < 5 || base.rows < 5) continue;
      cv::Mat s, lap;
      cv::GaussianBlur(base, s, cv::Size(), sigma_l);
      cv::Laplacian(s, lap, CV_32F, 1);
      lap *= static_cast<float>(sigma_l * sigma_l);
      const cv::Mat neg = -lap;
      std::vector<std::pair<double, cv::Point>> here;
      const double thr = 0.25 * o.min_contrast;
      const int nms = std::max(1, static_cast<int>(r / f));
      LocalMaxima(neg, thr, nms, cv::Point(0, 0), here);  // bright blobs
      LocalMaxima(lap, thr, nms, cv::Point(0, 0), here);  // dark blobs
      for (auto& h : here) {
        // Level-`level` pixel (x, y) covers frame pixels f x .. f x + f - 1 of the extended rect.
        const cv::Point p(ext.x + static_cast<int>(h.second.x * f + 0.5 * (f - 1)),
                          ext.y + static_cast<int>(h.second.y * f + 0.5 * (f - 1)));
        if (!inner.contains(p)) continue;
        peaks.push_back({h.first, p});
        peak_radius.push_back(r);
      }
    }
    // Strongest first; one proposal per place (across scales).
    std::vector<size_t> order(peaks.size());
    for (size_t i = 0; i < order.size(); ++i) order[i] = i;
    std::sort(order.begin(), order.end(), [&](size_t a, size_t b) { return peaks[a].first > peaks[b].first; });
    std::vector<std::pair<cv::Point, double>> taken;
    for (size_t i : order) {
      if (static_cast<int>(taken.size()) >= o.max_proposals) break;
      const cv::Point p = peaks[i].second;
      bool near = false;
      for (const auto& [q, rq] : taken) {
        if (std::hypot(p.x - q.x, p.y - q.y) < std::max(rq, peak_radius[i])) near = true;
      }
      if (near) continue;
      taken.push_back({p, peak_radius[i]});
      if (auto c = VerifyDot(grey, cv::Point2d(p), peak_radius[i], o)) {
        // Not a part of an accepted quadrant disc.
        bool inside_quadrant = false;
        for (const MarkerCandidate& q : found) {
          if (q.kind == MarkerKind::kQuadrant && cv::norm(q.centre_px - c->centre_px) < q.radius_px)
            inside_quadrant = true;
        }
        if (!inside_quadrant) found.push_back(*c);
      }
    }
  }

  // One candidate per place: keep the better-scoring of two whose centres are within a radius.
  std::sort(found.begin(), found.end(), [](const auto& a, const auto& b) { return a.score > b.score; });
  std::vector<MarkerCandidate> unique;
  for (const MarkerCandidate& c : found) {
    bool dup = false;
    for (const MarkerCandidate& u : unique) {
      if (cv::norm(u.centre_px - c.centre_px) < std::max(2.0, 0.5 * std::max(u.radius_px, c.radius_px))) dup = true;
    }
    if (!dup) unique.push_back(c);
  }
  return unique;
}

}  // namespace dropfit::tracker
