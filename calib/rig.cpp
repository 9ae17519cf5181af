#include "calib/rig.h"

#include <opencv2/calib3d.hpp>

#include <cmath>
#include <limits>
#include <sstream>
#include <stdexcept>

#include "calib/rig_uncertainty.h"

namespace dropfit::calib {

namespace {

template <typename Enum, size_t N>
Enum FromString(const std::string& text, const std::pair<Enum, const char*> (&table)[N], const char* what) {
  for (const auto& [value, name] : table) {
    if (text == name) return value;
  }
  std::ostringstream msg;
  msg << "unknown " << what << " '" << text << "'; valid: ";
  for (size_t i = 0; i < N; ++i) msg << (i ? ", " : "") << table[i].second;
  throw std::invalid_argument(msg.str());
}

constexpr std::pair<UpSide, const char*> kUpSides[] = {
    {UpSide::kTop, "top"}, {UpSide::kBottom, "bottom"}, {UpSide::kLeft, "left"}, {UpSide::kRight, "right"}};
constexpr std::pair<YOrigin, const char*> kYOrigins[] = {{YOrigin::kFloor, "floor"}, {YOrigin::kBoard, "board"}};

bool AllFinite(const cv::Matx33d& m) {
  for (int i = 0; i < 9; ++i) {
    if (!std::isfinite(m.val[i])) return false;
  }
  return true;
}

cv::Point2d ApplyHomography(const cv::Matx33d& h, cv::Point2d p) {
  const cv::Vec3d q = h * cv::Vec3d(p.x, p.y, 1.0);
  return {q[0] / q[2], q[1] / q[2]};
}

}  // namespace

std::string ToString(UpSide side) {
  for (const auto& [value, name] : kUpSides) {
    if (value == side) return name;
  }
  return "top";
}
UpSide UpSideFromString(const std::string& text) { return FromString(text, kUpSides, "up side"); }

std::string ToString(YOrigin origin) { return origin == YOrigin::kFloor ? "floor" : "board"; }
YOrigin YOriginFromString(const std::string& text) { return FromString(text, kYOrigins, "y_origin"); }

BoardSpec BoardSizeFromString(const std::string& text, double square_m) {
  BoardSpec board;
  board.square_m = square_m;
  const auto x = text.find_first_of("xX");
  bool ok = x != std::string::npos && x > 0 && x + 1 < text.size();
  if (ok) {
    try {
      size_t used_c = 0, used_r = 0;
      board.columns = std::stoi(text.substr(0, x), &used_c);
      board.rows = std::stoi(text.substr(x + 1), &used_r);
      ok = used_c == x && used_r == text.size() - x - 1;
    } catch (const std::exception&) {
      ok = false;
    }
  }
  if (!ok || board.columns < 3 || board.rows < 3) {
    throw std::invalid_argument("board size '" + text +
                                "' is not COLUMNSxROWS of inner corners, each at least 3 (e.g. 9x6 for a board of "
                                "10 x 7 squares)");
  }
  if (!(std::isfinite(square_m) && square_m > 0)) {
    throw std::invalid_argument("square size " + std::to_string(square_m) +
                                " m is not a positive number; give the side of one square in metres (e.g. 0.025)");
  }
  return board;
}

std::string BoardSizeToString(const BoardSpec& board) {
  return std::to_string(board.columns) + "x" + std::to_string(board.rows);
}

std::optional<std::string> ValidateRig(const Rig& rig) {
  if (rig.schema_version != Rig::kSchemaVersion) {
    return "unknown rig schema version " + std::to_string(rig.schema_version) + " (this dropfit reads " +
           std::to_string(Rig::kSchemaVersion) + ")";
  }
  if (rig.image_size.width <= 0 || rig.image_size.height <= 0) {
    return "image size " + std::to_string(rig.image_size.width) + "x" + std::to_string(rig.image_size.height) +
           " is not positive";
  }
  if (!AllFinite(rig.plane_from_undistorted)) return "the plane mapping holds a non-finite number";
  const double det = cv::determinant(rig.plane_from_undistorted);
  if (!std::isfinite(det) || std::abs(det) < 1e-300) return "the plane mapping is not invertible (determinant 0)";
  if (rig.lens) {
    if (!AllFinite(rig.lens->camera_matrix)) return "the camera matrix holds a non-finite number";
    if (rig.lens->camera_matrix(0, 0) <= 0 || rig.lens->camera_matrix(1, 1) <= 0) {
      return "the camera matrix has a non-positive focal length";
    }
    for (double d : rig.lens->distortion) {
      if (!std::isfinite(d)) return "the distortion coefficients hold a non-finite number";
    }
    const size_t n = rig.lens->distortion.size();
    if (!(n == 0 || n == 4 || n == 5 || n == 8)) {
      return "the lens has " + std::to_string(n) + " distortion coefficients (expected 0, 4, 5 or 8)";
    }
  }
  if (rig.corner_height_m && !std::isfinite(*rig.corner_height_m)) return "the corner height is not finite";
  if (rig.uncertainty) {
    const RigUncertainty& u = *rig.uncertainty;
    const std::vector<std::string> names = MappingParameterNames(rig);
    if (u.parameters != names || u.covariance.size() != names.size() * names.size()) {
      return "the uncertainty's covariance does not match the mapping's " + std::to_string(names.size()) +
             " parameters (" + std::to_string(u.parameters.size()) + " named, " + std::to_string(u.covariance.size()) +
             " numbers)";
    }
    for (double v : u.covariance) {
      if (!std::isfinite(v)) return "the uncertainty's covariance holds a non-finite number";
    }
    for (double v : {u.plane_corner_sd_px, u.lens_corner_sd_px, u.corner_height_sd_m, u.height_sd_at_corner_row_m,
                     u.height_sd_100mm_m, u.height_sd_300mm_m, u.floor_sd_m.value_or(0.0), u.scale_rel_sd_centre}) {
      if (!(std::isfinite(v) && v >= 0)) return "the uncertainty holds a negative or non-finite standard deviation";
    }
  }
  if (rig.capture_fps && !(std::isfinite(*rig.capture_fps) && *rig.capture_fps > 0)) {
    return "the capture rate is not a positive number";
  }
  return std::nullopt;
}

cv::Point2d UndistortedFromImage(const Rig& rig, cv::Point2d image_px) {
  if (!rig.lens || rig.lens->distortion.empty()) return image_px;
  const cv::Matx33d& k = rig.lens->camera_matrix;
  std::vector<cv::Point2d> src{image_px}, dst;
  // Iterate to convergence: the default (5 iterations) leaves ~0.01 px at the corners of a
  // k1 = -0.07 lens, which is a large share of our error budget.
  cv::undistortPoints(src, dst, k, rig.lens->distortion, cv::noArray(), k,
                      cv::TermCriteria(cv::TermCriteria::COUNT | cv::TermCriteria::EPS, 100, 1e-12));
  return dst[0];
}

cv::Point2d ImageFromUndistorted(const Rig& rig, cv::Point2d undistorted_px) {
  if (!rig.lens || rig.lens->distortion.empty()) return undistorted_px;
  const cv::Matx33d& k = rig.lens->camera_matrix;
  // Back to normalised coordinates, then OpenCV's projection with identity pose.
  const double x = (undistorted_px.x - k(0, 2)) / k(0, 0);
  const double y = (undistorted_px.y - k(1, 2)) / k(1, 1);
  std::vector<cv::Point3d> obj{{x, y, 1.0}};
  std::vector<cv::Point2d> img;
  cv::projectPoints(obj, cv::Vec3d(0, 0, 0), cv::Vec3d(0, 0, 0), k, rig.lens->distortion, img);
  return img[0];
}

cv::Point2d PlaneFromImage(const Rig& rig, cv::Point2d image_px) {
  return ApplyHomography(rig.plane_from_undistorted, UndistortedFromImage(rig, image_px));
}

cv::Point2d ImageFromPlane(const Rig& rig, cv::Point2d plane_m) {
  return ImageFromUndistorted(rig, ApplyHomography(rig.plane_from_undistorted.inv(), plane_m));
}

cv::Vec2d ImageUpDirection(const Rig& rig, cv::Point2d image_px) {
  const cv::Point2d p = PlaneFromImage(rig, image_px);
  const double step_m = 1e-3;
  const cv::Point2d q = ImageFromPlane(rig, {p.x, p.y + step_m});
  cv::Vec2d d(q.x - image_px.x, q.y - image_px.y);
  const double n = cv::norm(d);
  return n > 0 ? d / n : d;
}

namespace {

// The calibrated plane in the camera frame: unit normal toward the camera and the distance D.
struct PlaneInCamera {
  cv::Vec3d normal_to_camera;
  double distance_m = 0.0;
};

std::optional<PlaneInCamera> CalibratedPlane(const Rig& rig) {
  if (!HasPlanePose(rig)) return std::nullopt;
  cv::Matx33d r;
  cv::Rodrigues(*rig.plane_rvec_rad, r);
  cv::Vec3d n(r(0, 2), r(1, 2), r(2, 2));
  const cv::Vec3d& t = *rig.plane_tvec_m;
  // Signed distance of the camera centre (the origin) from the plane through t along n.
  double distance = -n.dot(t);
  if (distance < 0) {
    n = -n;
    distance = -distance;
  }
  if (!(distance > 0) || !std::isfinite(distance)) return std::nullopt;
  return PlaneInCamera{n, distance};
}

}  // namespace

bool HasPlanePose(const Rig& rig) { return rig.lens && rig.plane_rvec_rad && rig.plane_tvec_m; }

std::optional<double> CameraDistanceM(const Rig& rig) {
  const std::optional<PlaneInCamera> plane = CalibratedPlane(rig);
  if (!plane) return std::nullopt;
  return plane->distance_m;
}

std::optional<std::string> MarkerOffsetProblem(const Rig& rig, double marker_offset_m) {
  std::ostringstream msg;
  if (!std::isfinite(marker_offset_m)) {
    msg << "marker offset " << marker_offset_m << " m is not a number";
    return msg.str();
  }
  if (marker_offset_m == 0.0) return std::nullopt;
  const std::optional<PlaneInCamera> plane = CalibratedPlane(rig);
  if (!plane) {
    msg << "marker offset " << marker_offset_m
        << " m needs the pose of the calibrated plane in the camera, and this rig has none (it was made from the "
           "plane view alone, without a lens model); calibrate with lens views, or give no marker offset";
    return msg.str();
  }
  if (!(std::abs(marker_offset_m) < plane->distance_m)) {
    msg << "marker offset " << marker_offset_m << " m is not smaller than the camera's distance " << plane->distance_m
        << " m from the calibrated plane; give the offset in metres, toward the camera positive";
    return msg.str();
  }
  return std::nullopt;
}

cv::Point2d MarkerPlaneFromImage(const Rig& rig, cv::Point2d image_px, double marker_offset_m) {
  if (auto problem = MarkerOffsetProblem(rig, marker_offset_m)) throw std::invalid_argument(*problem);
  if (marker_offset_m == 0.0) return PlaneFromImage(rig, image_px);
  const PlaneInCamera plane = *CalibratedPlane(rig);
  const cv::Matx33d& k = rig.lens->camera_matrix;
  const cv::Point2d und = UndistortedFromImage(rig, image_px);
  const cv::Vec3d ray = k.inv() * cv::Vec3d(und.x, und.y, 1.0);
  const double toward = -plane.normal_to_camera.dot(ray);  // > 0 when the ray runs toward the plane
  const double nan = std::numeric_limits<double>::quiet_NaN();
  if (!(toward > 0)) return {nan, nan};
  const double s = (plane.distance_m - marker_offset_m) / toward;
  const cv::Vec3d foot = s * ray - marker_offset_m * plane.normal_to_camera;  // on Pi_0
  if (!(foot[2] > 0)) return {nan, nan};
  const cv::Vec3d q = k * foot;
  return ApplyHomography(rig.plane_from_undistorted, {q[0] / q[2], q[1] / q[2]});
}

}  // namespace dropfit::calib
