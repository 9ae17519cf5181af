#pragma once
// Test helper: renders a checkerboard seen by a pinhole camera with OpenCV's distortion model.
//
// Each pixel centre is undistorted with cv::undistortPoints (the inverse of the forward model
// cv::projectPoints uses), its ray is intersected with the board plane, and the board's
// brightness there is taken from an anti-aliased checkerboard: the square wave along each board
// axis is smoothed with a Gaussian whose width is the optical blur plus the pixel's box (variance
// 1/12 px^2), carried into board units by the local derivative of the mapping; the checker is the
// product of the two smoothed waves (the X-corner model erf(u/(sqrt2 s)) erf(v/(sqrt2 s)) of
// docs/methods.md §9). Gaussian noise is added, then the image is rounded to 8 bits.

#include <opencv2/calib3d.hpp>
#include <opencv2/core.hpp>

#include <cmath>
#include <random>
#include <vector>

#include "calib/rig.h"

namespace dropfit::test {

struct SyntheticCamera {
  cv::Size size{1024, 768};
  cv::Matx33d camera_matrix{1100, 0, 515.3, 0, 1102, 381.7, 0, 0, 1};
  std::vector<double> distortion{-0.15, 0.09, 0.0006, -0.0004, 0.0};
};

struct RenderSettings {
  double blur_px = 0.6;           // optical blur sigma [px]
  double noise_grey = 1.0;        // sensor noise sigma [grey levels]
  double dark = 30, white = 220;  // square and border brightness
  double background = 110;        // beyond the board's paper
  double margin_squares = 0.8;    // white border around the squares, in squares
};

// Board pose in the camera for a board whose centre sits on the ray through pixel (u, v) at
// depth z_m, tilted by (tilt_x, tilt_y) and turned in its plane by roll (radians).
inline void PoseLookingAt(const SyntheticCamera& cam, const calib::BoardSpec& b, double u, double v, double z_m,
                          double tilt_x, double tilt_y, double roll, cv::Vec3d& rvec, cv::Vec3d& tvec) {
  const cv::Matx33d rx(1, 0, 0, 0, std::cos(tilt_x), -std::sin(tilt_x), 0, std::sin(tilt_x), std::cos(tilt_x));
  const cv::Matx33d ry(std::cos(tilt_y), 0, std::sin(tilt_y), 0, 1, 0, -std::sin(tilt_y), 0, std::cos(tilt_y));
  const cv::Matx33d rz(std::cos(roll), -std::sin(roll), 0, std::sin(roll), std::cos(roll), 0, 0, 0, 1);
  const cv::Matx33d r = rx * ry * rz;
  cv::Rodrigues(r, rvec);
  const cv::Vec3d centre_cam((u - cam.camera_matrix(0, 2)) / cam.camera_matrix(0, 0) * z_m,
                             (v - cam.camera_matrix(1, 2)) / cam.camera_matrix(1, 1) * z_m, z_m);
  const cv::Vec3d centre_board(0.5 * (b.columns - 1) * b.square_m, 0.5 * (b.rows - 1) * b.square_m, 0);
  tvec = centre_cam - r * centre_board;
}

// True when the whole board with its border projects inside the image with `border_px` to spare.
inline bool BoardInView(const SyntheticCamera& cam, const calib::BoardSpec& b, const cv::Vec3d& rvec,
                        const cv::Vec3d& tvec, double margin_squares, double border_px) {
  const double s = b.square_m, m = (1 + margin_squares) * s;
  std::vector<cv::Point3d> pts;
  for (int k = 0; k <= 20; ++k) {
    const double f = k / 20.0;
    const double x0 = -m, x1 = (b.columns - 1) * s + m, y0 = -m, y1 = (b.rows - 1) * s + m;
    pts.emplace_back(x0 + f * (x1 - x0), y0, 0);
    pts.emplace_back(x0 + f * (x1 - x0), y1, 0);
    pts.emplace_back(x0, y0 + f * (y1 - y0), 0);
    pts.emplace_back(x1, y0 + f * (y1 - y0), 0);
  }
  std::vector<cv::Point2d> img;
  cv::projectPoints(pts, rvec, tvec, cam.camera_matrix, cam.distortion, img);
  for (const auto& p : img) {
    if (p.x < border_px || p.y < border_px || p.x > cam.size.width - 1 - border_px ||
        p.y > cam.size.height - 1 - border_px) {
      return false;
    }
  }
  return true;
}

inline cv::Mat RenderBoard(const SyntheticCamera& cam, const calib::BoardSpec& b, const cv::Vec3d& rvec,
                           const cv::Vec3d& tvec, const RenderSettings& rs, std::mt19937_64& rng) {
  const int w = cam.size.width, h = cam.size.height;
  std::vector<cv::Point2d> px;
  px.reserve(static_cast<size_t>(w) * h);
  for (int y = 0; y < h; ++y) {
    for (int x = 0; x < w; ++x) px.emplace_back(x, y);
  }
  std::vector<cv::Point2d> norm;
  cv::undistortPoints(px, norm, cam.camera_matrix, cam.distortion, cv::noArray(), cv::noArray(),
                      cv::TermCriteria(cv::TermCriteria::COUNT | cv::TermCriteria::EPS, 40, 1e-10));
  cv::Matx33d r;
  cv::Rodrigues(rvec, r);
  const cv::Vec3d n(r(0, 2), r(1, 2), r(2, 2));
  const double nt = n.dot(tvec);
  cv::Mat bx(h, w, CV_64F), by(h, w, CV_64F);
  for (int y = 0; y < h; ++y) {
    for (int x = 0; x < w; ++x) {
      const cv::Point2d q = norm[static_cast<size_t>(y) * w + x];
      const cv::Vec3d d(q.x, q.y, 1.0);
      const double s = nt / n.dot(d);
      const cv::Vec3d p = r.t() * (s * d - tvec);
      bx.at<double>(y, x) = s > 0 ? p[0] : 1e9;
      by.at<double>(y, x) = s > 0 ? p[1] : 1e9;
    }
  }
  const double sq = b.square_m, var_px = rs.blur_px * rs.blur_px + 1.0 / 12.0;
  const auto step = [](double u, double sigma) { return 0.5 * (1.0 + std::erf(u / (std::sqrt(2.0) * sigma))); };
  const auto wave = [&](double u, double sigma) {
    const double k = std::round(u / sq);
    const double sign = (static_cast<long long>(k) % 2 == 0) ? 1.0 : -1.0;
    return sign * std::erf((u - k * sq) / (std::sqrt(2.0) * sigma));
  };
  std::normal_distribution<double> noise(0.0, rs.noise_grey);
  cv::Mat out(h, w, CV_8U);
  const double mid = 0.5 * (rs.dark + rs.white), amp = 0.5 * (rs.white - rs.dark);
  for (int y = 0; y < h; ++y) {
    for (int x = 0; x < w; ++x) {
      const int x0 = std::max(0, x - 1), x1 = std::min(w - 1, x + 1), y0 = std::max(0, y - 1),
                y1 = std::min(h - 1, y + 1);
      const double X = bx.at<double>(y, x), Y = by.at<double>(y, x);
      double value = rs.background;
      if (std::abs(X) < 1e8 && std::abs(bx.at<double>(y0, x0)) < 1e8 && std::abs(bx.at<double>(y1, x1)) < 1e8) {
        const double gxx = (bx.at<double>(y, x1) - bx.at<double>(y, x0)) / (x1 - x0);
        const double gxy = (bx.at<double>(y1, x) - bx.at<double>(y0, x)) / (y1 - y0);
        const double gyx = (by.at<double>(y, x1) - by.at<double>(y, x0)) / (x1 - x0);
        const double gyy = (by.at<double>(y1, x) - by.at<double>(y0, x)) / (y1 - y0);
        const double sx = std::max(1e-9, std::sqrt(var_px * (gxx * gxx + gxy * gxy)));
        const double sy = std::max(1e-9, std::sqrt(var_px * (gyx * gyx + gyy * gyy)));
        const double m = rs.margin_squares * sq;
        const double paper = step(X + sq + m, sx) * step(b.columns * sq + m - X, sx) * step(Y + sq + m, sy) *
                             step(b.rows * sq + m - Y, sy);
        const double squares =
            step(X + sq, sx) * step(b.columns * sq - X, sx) * step(Y + sq, sy) * step(b.rows * sq - Y, sy);
        const double checker = mid + amp * wave(X, sx) * wave(Y, sy);
        value = rs.background + paper * (rs.white - rs.background) + squares * (checker - rs.white);
      }
      out.at<uchar>(y, x) = cv::saturate_cast<uchar>(std::round(value + noise(rng)));
    }
  }
  return out;
}

}  // namespace dropfit::test
