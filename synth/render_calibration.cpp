#include "synth/render_calibration.h"

#include <opencv2/calib3d.hpp>

#include <algorithm>
#include <cmath>
#include <numbers>
#include <random>
#include <sstream>
#include <stdexcept>

namespace dropfit::synth {

namespace {

constexpr double kBoardWhiteGrey = 210.0;
constexpr double kBoardBlackGrey = 35.0;
constexpr int kSamples = 4;
constexpr double kFitMarginPx = 8.0;

double Ramp(double x) { return std::clamp(0.5 + x, 0.0, 1.0); }

cv::Matx33d Rx(double a) { return {1, 0, 0, 0, std::cos(a), -std::sin(a), 0, std::sin(a), std::cos(a)}; }
cv::Matx33d Ry(double a) { return {std::cos(a), 0, std::sin(a), 0, 1, 0, -std::sin(a), 0, std::cos(a)}; }
cv::Matx33d Rz(double a) { return {std::cos(a), -std::sin(a), 0, std::sin(a), std::cos(a), 0, 0, 0, 1}; }

// Smoothed square wave along one board axis: +-1 by the parity of the square, ramping through 0
// over the footprint w at every line (odd-symmetric about the line).
double CheckerSign(double b, double s, double w) {
  const double f = b / s;
  const double k = std::floor(f);
  const double frac = f - k;
  const double d = std::min(frac, 1.0 - frac) * s;
  const double parity = std::fmod(k, 2.0) == 0.0 ? 1.0 : -1.0;
  return parity * std::min(1.0, 2.0 * d / w);
}

// Radiance of the board at board point (bx, by) with footprint w, over background `bg`.
double BoardSample(const CheckerboardSpec& board, double bx, double by, double w, double bg) {
  const double s = board.square_m;
  const double x0 = -s, x1 = board.inner_cols * s, y0 = -s, y1 = board.inner_rows * s;  // checkered area
  const double inv_w = 1.0 / w;
  const double a_board =
      Ramp((std::min(bx - (x0 - s), (x1 + s) - bx)) * inv_w) * Ramp((std::min(by - (y0 - s), (y1 + s) - by)) * inv_w);
  if (a_board <= 0) return bg;
  const double a_area = Ramp(std::min(bx - x0, x1 - bx) * inv_w) * Ramp(std::min(by - y0, y1 - by) * inv_w);
  double value = kBoardWhiteGrey;
  if (a_area > 0) {
    // Clamped into the checkered area so that its border is not drawn as a checker line.
    const double cx = std::clamp(bx, x0 + w / 2, x1 - w / 2), cy = std::clamp(by, y0 + w / 2, y1 - w / 2);
    const double white = 0.5 * (1.0 - CheckerSign(cx, s, w) * CheckerSign(cy, s, w));
    const double checker = kBoardBlackGrey + white * (kBoardWhiteGrey - kBoardBlackGrey);
    value += (checker - value) * a_area;
  }
  return bg + (value - bg) * a_board;
}

// Distance [m] from a board point to the nearest drawn edge.
double BoardEdgeDistance(const CheckerboardSpec& board, double bx, double by) {
  const double s = board.square_m;
  const double x0 = -s, x1 = board.inner_cols * s, y0 = -s, y1 = board.inner_rows * s;
  double e =
      std::min({std::abs(bx - (x0 - s)), std::abs(bx - (x1 + s)), std::abs(by - (y0 - s)), std::abs(by - (y1 + s))});
  if (bx > x0 - s && bx < x1 + s && by > y0 - s && by < y1 + s) {
    // Grid lines (including the checkered area's border) inside the checkered area's reach.
    const double fx = bx / s, fy = by / s;
    e = std::min(e, std::min(fx - std::floor(fx), std::ceil(fx) - fx) * s);
    e = std::min(e, std::min(fy - std::floor(fy), std::ceil(fy) - fy) * s);
  }
  return e;
}

struct BoardPose {
  cv::Matx33d camera_from_board;
  cv::Vec3d t_m;
};

std::vector<cv::Point2d> BoardOutline(const CheckerboardSpec& board) {
  const double s = board.square_m;
  const double x0 = -2 * s, x1 = (board.inner_cols + 1) * s, y0 = -2 * s, y1 = (board.inner_rows + 1) * s;
  std::vector<cv::Point2d> pts;
  for (int i = 0; i <= 8; ++i) {
    const double f = i / 8.0;
    pts.emplace_back(x0 + f * (x1 - x0), y0);
    pts.emplace_back(x0 + f * (x1 - x0), y1);
    pts.emplace_back(x0, y0 + f * (y1 - y0));
    pts.emplace_back(x1, y0 + f * (y1 - y0));
  }
  return pts;
}

cv::Point2d ProjectBoardPoint(const PinholeCamera& camera, const BoardPose& pose, double bx, double by) {
  const cv::Vec3d p = pose.camera_from_board * cv::Vec3d(bx, by, 0) + pose.t_m;
  const CameraIntrinsics& k = camera.intrinsics;
  const cv::Point2d d = DistortNormalized(k, {p[0] / p[2], p[1] / p[2]});
  return {k.fx_px * d.x + k.cx_px, k.fy_px * d.y + k.cy_px};
}

bool BoardFits(const PinholeCamera& camera, const CheckerboardSpec& board, const BoardPose& pose) {
  const cv::Size size = camera.intrinsics.image_size;
  for (const cv::Point2d& b : BoardOutline(board)) {
    const cv::Vec3d p = pose.camera_from_board * cv::Vec3d(b.x, b.y, 0) + pose.t_m;
    if (p[2] < 0.05) return false;
    const cv::Point2d q = ProjectBoardPoint(camera, pose, b.x, b.y);
    if (q.x < kFitMarginPx || q.y < kFitMarginPx || q.x > size.width - 1 - kFitMarginPx ||
        q.y > size.height - 1 - kFitMarginPx) {
      return false;
    }
  }
  return true;
}

// Lens-view poses: tilts about the camera's x and y axes, an in-plane turn, and where in the
// frame the board centre goes (fractions of the half field of view).
struct ViewPlan {
  double tilt_x_deg, tilt_y_deg, turn_deg, frame_x, frame_y;
};
constexpr ViewPlan kViewPlans[] = {
    {8, -6, 3, 0, 0},           {28, 0, 4, 0, -0.35},      {-28, 0, -4, 0, 0.35},
    {0, 32, 3, -0.4, 0},        {0, -32, -3, 0.4, 0},      {22, 22, 10, -0.35, -0.35},
    {-22, 22, -8, -0.35, 0.35}, {22, -22, 8, 0.35, -0.35}, {-22, -22, -10, 0.35, 0.35},
    {12, -12, 30, 0, 0},        {-15, 10, -25, 0.2, -0.2}, {18, 15, 15, -0.2, 0.25},
};

BoardPose PlanLensView(const PinholeCamera& camera, const CheckerboardSpec& board, const ViewPlan& plan) {
  const CameraIntrinsics& k = camera.intrinsics;
  constexpr double kDeg = std::numbers::pi / 180.0;
  // Board axes in the camera: b_x right, b_y up (-y_camera), b_z towards the camera.
  const cv::Matx33d facing(1, 0, 0, 0, -1, 0, 0, 0, -1);
  BoardPose pose;
  pose.camera_from_board = Rx(plan.tilt_x_deg * kDeg) * Ry(plan.tilt_y_deg * kDeg) * Rz(plan.turn_deg * kDeg) * facing;
  const cv::Vec3d centre_in_board((board.inner_cols - 1) * board.square_m / 2,
                                  (board.inner_rows - 1) * board.square_m / 2, 0);
  const double board_width_m = (board.inner_cols + 3) * board.square_m;
  const double tan_half_w = k.image_size.width / 2.0 / k.fx_px, tan_half_h = k.image_size.height / 2.0 / k.fy_px;
  // Start where the board spans ~60 % of the frame width, then step back until it fits,
  // pulling the centre towards the middle of the frame as needed.
  const double start = board_width_m / (1.2 * tan_half_w);
  for (double pull = 1.0; pull >= 0.0; pull -= 0.25) {
    for (double depth = start; depth < 40 * start; depth *= 1.03) {
      const cv::Vec3d centre(depth * plan.frame_x * pull * tan_half_w, depth * plan.frame_y * pull * tan_half_h, depth);
      pose.t_m = centre - pose.camera_from_board * centre_in_board;
      if (BoardFits(camera, board, pose)) return pose;
    }
  }
  throw std::invalid_argument(
      "the checkerboard cannot be placed wholly in the frame at any distance; "
      "use fewer or larger squares");
}

cv::Mat1b RenderBoardView(const SceneRenderer& scene, const cv::Mat2d& normalized, const CheckerboardSpec& board,
                          const BoardPose& pose, const ExposureSettings& exposure, std::mt19937_64* rng) {
  const cv::Size size = scene.image_size();
  // Board point seen at every pixel centre: the ray (x', y', 1) meets the board plane.
  const cv::Vec3d normal(pose.camera_from_board(0, 2), pose.camera_from_board(1, 2), pose.camera_from_board(2, 2));
  const cv::Matx33d board_from_camera = pose.camera_from_board.t();
  cv::Mat2d board_xy(size);
  cv::Mat1b valid(size, 0);
  for (int v = 0; v < size.height; ++v) {
    for (int u = 0; u < size.width; ++u) {
      const cv::Vec2d n = normalized(v, u);
      const cv::Vec3d ray(n[0], n[1], 1.0);
      const double denom = normal.dot(ray);
      if (std::abs(denom) < 1e-12) continue;
      const double s = normal.dot(pose.t_m) / denom;
      if (!(s > 0)) continue;
      const cv::Vec3d b = board_from_camera * (s * ray - pose.t_m);
      board_xy(v, u) = cv::Vec2d(b[0], b[1]);
      valid(v, u) = 1;
    }
  }
  cv::Mat1f radiance = scene.static_radiance().clone();
  for (int v = 1; v < size.height - 1; ++v) {
    for (int u = 1; u < size.width - 1; ++u) {
      if (!valid(v, u) || !valid(v, u - 1) || !valid(v, u + 1) || !valid(v - 1, u) || !valid(v + 1, u)) continue;
      const cv::Vec2d b = board_xy(v, u);
      const double bg = radiance(v, u);
      const cv::Vec2d du = (board_xy(v, u + 1) - board_xy(v, u - 1)) * 0.5;
      const cv::Vec2d dv = (board_xy(v + 1, u) - board_xy(v - 1, u)) * 0.5;
      const double pixel_m = std::sqrt(std::abs(du[0] * dv[1] - du[1] * dv[0]));
      const double reach = 0.75 * std::max(cv::norm(du), cv::norm(dv));
      double value;
      if (BoardEdgeDistance(board, b[0], b[1]) > reach) {
        value = BoardSample(board, b[0], b[1], 1e-12, bg);
      } else {
        double sum = 0;
        const double w = pixel_m / kSamples;
        for (int iv = 0; iv < kSamples; ++iv) {
          const double ov = (iv + 0.5) / kSamples - 0.5;
          for (int iu = 0; iu < kSamples; ++iu) {
            const double ou = (iu + 0.5) / kSamples - 0.5;
            sum += BoardSample(board, b[0] + du[0] * ou + dv[0] * ov, b[1] + du[1] * ou + dv[1] * ov, w, bg);
          }
        }
        value = sum / (kSamples * kSamples);
      }
      radiance(v, u) = static_cast<float>(value);
    }
  }
  ApplyLensBlur(radiance, exposure.psf_sigma_px);
  return scene.Expose(radiance, 0.0, exposure, rng);
}

}  // namespace

std::optional<std::string> ValidateCheckerboard(const CheckerboardSpec& board) {
  std::ostringstream msg;
  if (board.inner_cols < 3 || board.inner_cols > 40 || board.inner_rows < 3 || board.inner_rows > 40) {
    msg << "checkerboard of " << board.inner_cols << "x" << board.inner_rows
        << " inner corners: each count must be in 3..40";
    return msg.str();
  }
  if (board.inner_cols == board.inner_rows) {
    msg << "checkerboard of " << board.inner_cols << "x" << board.inner_rows
        << " inner corners is square, so its orientation is ambiguous; use different counts (e.g. 9x6)";
    return msg.str();
  }
  if (!(board.square_m >= 0.002 && board.square_m <= 0.5)) {
    msg << "square size " << board.square_m << " m is outside [0.002, 0.5] m";
    return msg.str();
  }
  return std::nullopt;
}

double PlaneBoardCornerHeight(const CheckerboardSpec& board) { return 2.0 * board.square_m; }

std::vector<CalibrationImage> RenderCalibrationImages(const SceneRenderer& scene, const CheckerboardSpec& board,
                                                      int lens_views, const ExposureSettings& exposure, bool add_noise,
                                                      uint64_t seed) {
  if (auto msg = ValidateCheckerboard(board)) throw std::invalid_argument(*msg);
  constexpr int kMaxViews = static_cast<int>(std::size(kViewPlans));
  if (lens_views < 1 || lens_views > kMaxViews) {
    throw std::invalid_argument("lens views " + std::to_string(lens_views) + " is outside 1.." +
                                std::to_string(kMaxViews));
  }
  const PinholeCamera& camera = scene.camera();
  const CameraIntrinsics& k = camera.intrinsics;
  const cv::Size size = k.image_size;
  cv::Mat2d normalized(size);
  for (int v = 0; v < size.height; ++v) {
    for (int u = 0; u < size.width; ++u) {
      const cv::Point2d n = UndistortNormalized(k, {(u - k.cx_px) / k.fx_px, (v - k.cy_px) / k.fy_px});
      normalized(v, u) = cv::Vec2d(n.x, n.y);
    }
  }
  std::vector<std::pair<std::string, BoardPose>> poses;
  for (int i = 0; i < lens_views; ++i) {
    char name[32];  // room for any int: GCC checks snprintf truncation at -O1
    std::snprintf(name, sizeof name, "lens_%02d", i + 1);
    poses.emplace_back(name, PlanLensView(camera, board, kViewPlans[i]));
  }
  // Plane view: camera_from_board = camera_from_world * world_from_board, world_from_board a
  // shift by the corner height along y_m.
  BoardPose plane;
  plane.camera_from_board = CameraFromWorldRotation(camera);
  plane.t_m = plane.camera_from_board * cv::Vec3d(0, PlaneBoardCornerHeight(board), 0) + camera.tvec_m;
  poses.emplace_back("plane", plane);

  std::mt19937_64 rng(seed);
  std::vector<CalibrationImage> images;
  for (const auto& [name, pose] : poses) {
    CalibrationImage image;
    image.name = name;
    image.drop_plane = name == "plane";
    image.image = RenderBoardView(scene, normalized, board, pose, exposure, add_noise ? &rng : nullptr);
    cv::Rodrigues(pose.camera_from_board, image.board_rvec_rad);
    image.board_tvec_m = pose.t_m;
    for (int j = 0; j < board.inner_rows; ++j) {
      for (int i = 0; i < board.inner_cols; ++i) {
        image.inner_corners_px.push_back(ProjectBoardPoint(camera, pose, i * board.square_m, j * board.square_m));
      }
    }
    images.push_back(std::move(image));
  }
  return images;
}

}  // namespace dropfit::synth
