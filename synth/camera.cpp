#include "synth/camera.h"

#include <opencv2/calib3d.hpp>

#include <cassert>
#include <cmath>
#include <numbers>
#include <sstream>
#include <stdexcept>

namespace dropfit::synth {

namespace {

constexpr double kDegToRad = std::numbers::pi / 180.0;

cv::Matx33d RotationX(double a_rad) {
  const double c = std::cos(a_rad), s = std::sin(a_rad);
  return {1, 0, 0, 0, c, -s, 0, s, c};
}
cv::Matx33d RotationY(double a_rad) {
  const double c = std::cos(a_rad), s = std::sin(a_rad);
  return {c, 0, s, 0, 1, 0, -s, 0, c};
}
cv::Matx33d RotationZ(double a_rad) {
  const double c = std::cos(a_rad), s = std::sin(a_rad);
  return {c, -s, 0, s, c, 0, 0, 0, 1};
}

std::string Range(const char* name, double value, double lo, double hi, const char* unit) {
  std::ostringstream msg;
  msg << name << " = " << value << " " << unit << " is outside its valid range [" << lo << ", " << hi << "]";
  return msg.str();
}

}  // namespace

std::optional<std::string> ValidateCameraSetup(const CameraSetup& setup) {
  const CameraIntrinsics& k = setup.intrinsics;
  if (k.image_size.width < 16 || k.image_size.width > 8192 || k.image_size.height < 16 || k.image_size.height > 8192) {
    return "image size " + std::to_string(k.image_size.width) + "x" + std::to_string(k.image_size.height) +
           " px is outside 16..8192 in each direction";
  }
  if (!(k.fx_px > 0 && k.fy_px > 0 && std::isfinite(k.fx_px) && std::isfinite(k.fy_px))) {
    return "focal lengths fx = " + std::to_string(k.fx_px) + " px, fy = " + std::to_string(k.fy_px) +
           " px must be positive";
  }
  for (double d : {k.cx_px, k.cy_px, k.k1, k.k2, k.p1, k.p2, k.k3}) {
    if (!std::isfinite(d)) return "the principal point and distortion coefficients must be finite";
  }
  for (double d : {k.k1, k.k2, k.k3}) {
    if (std::abs(d) > 1.0) return Range("a radial distortion coefficient", d, -1, 1, "");
  }
  for (double d : {k.p1, k.p2}) {
    if (std::abs(d) > 0.05) return Range("a tangential distortion coefficient", d, -0.05, 0.05, "");
  }
  if (!(setup.distance_m >= 0.1 && setup.distance_m <= 100)) {
    return Range("camera distance", setup.distance_m, 0.1, 100, "m");
  }
  if (!std::isfinite(setup.aim_x_m) || !std::isfinite(setup.aim_y_m)) return "the aim point must be finite";
  for (auto [name, value] :
       {std::pair{"pitch", setup.pitch_deg}, std::pair{"roll", setup.roll_deg}, std::pair{"yaw", setup.yaw_deg}}) {
    if (!(std::abs(value) <= 20.0)) return Range(name, value, -20, 20, "deg");
  }
  return std::nullopt;
}

PinholeCamera MakeCamera(const CameraSetup& setup) {
  if (auto msg = ValidateCameraSetup(setup)) throw std::invalid_argument("camera set-up: " + *msg);
  // World (x right, y up, z towards the camera) -> an ideal camera looking straight at the
  // plane (x right, y down, z forward = -z_world).
  const cv::Matx33d camera_from_world_ideal(1, 0, 0, 0, -1, 0, 0, 0, -1);
  // Mounting errors: `tilt` holds the tilted camera's axes in the ideal camera's frame.
  // RotationX(-a) turns the optical axis towards +y_camera (down), RotationY(+b) towards
  // +x_camera (right).
  const cv::Matx33d tilt = RotationZ(setup.roll_deg * kDegToRad) * RotationX(-setup.pitch_deg * kDegToRad) *
                           RotationY(setup.yaw_deg * kDegToRad);
  // camera_from_world = tilt^T * ideal: the tilt is the camera's rotation, so points turn back.
  const cv::Matx33d r = tilt.t() * camera_from_world_ideal;
  const cv::Vec3d axis_in_world = r.t() * cv::Vec3d(0, 0, 1);
  const cv::Vec3d aim(setup.aim_x_m, setup.aim_y_m, 0.0);
  const cv::Vec3d centre = aim - setup.distance_m * axis_in_world;
  PinholeCamera camera;
  camera.intrinsics = setup.intrinsics;
  cv::Rodrigues(r, camera.rvec_rad);
  camera.tvec_m = -(r * centre);
  return camera;
}

cv::Matx33d CameraFromWorldRotation(const PinholeCamera& camera) {
  cv::Matx33d r;
  cv::Rodrigues(camera.rvec_rad, r);
  return r;
}

cv::Vec3d CameraCentreInWorld(const PinholeCamera& camera) {
  return -(CameraFromWorldRotation(camera).t() * camera.tvec_m);
}

cv::Point2d DistortNormalized(const CameraIntrinsics& k, cv::Point2d p) {
  const double x = p.x, y = p.y;
  const double r2 = x * x + y * y;
  const double radial = 1.0 + r2 * (k.k1 + r2 * (k.k2 + r2 * k.k3));
  return {x * radial + 2.0 * k.p1 * x * y + k.p2 * (r2 + 2.0 * x * x),
          y * radial + k.p1 * (r2 + 2.0 * y * y) + 2.0 * k.p2 * x * y};
}

cv::Point2d UndistortNormalized(const CameraIntrinsics& k, cv::Point2d distorted) {
  cv::Point2d p = distorted;
  for (int iteration = 0; iteration < 50; ++iteration) {
    const double x = p.x, y = p.y;
    const double r2 = x * x + y * y;
    const double radial = 1.0 + r2 * (k.k1 + r2 * (k.k2 + r2 * k.k3));
    const double dradial_dr2 = k.k1 + r2 * (2.0 * k.k2 + 3.0 * r2 * k.k3);
    const cv::Point2d f = DistortNormalized(k, p) - distorted;
    // Jacobian of DistortNormalized (derivatives of the formula in camera.h).
    const double a = radial + 2.0 * x * x * dradial_dr2 + 2.0 * k.p1 * y + 6.0 * k.p2 * x;
    const double b = 2.0 * x * y * dradial_dr2 + 2.0 * k.p1 * x + 2.0 * k.p2 * y;
    const double d = radial + 2.0 * y * y * dradial_dr2 + 6.0 * k.p1 * y + 2.0 * k.p2 * x;
    const double det = a * d - b * b;
    if (!(std::abs(det) > 1e-12)) break;
    const cv::Point2d step((d * f.x - b * f.y) / det, (-b * f.x + a * f.y) / det);
    p -= step;
    if (std::abs(step.x) + std::abs(step.y) < 1e-15) return p;
  }
  const cv::Point2d residual = DistortNormalized(k, p) - distorted;
  if (std::abs(residual.x) + std::abs(residual.y) < 1e-13) return p;
  std::ostringstream msg;
  msg << "lens undistortion did not converge at normalised point (" << distorted.x << ", " << distorted.y
      << "); the point is too far outside the image for this distortion model";
  throw std::runtime_error(msg.str());
}

cv::Point2d ProjectWorldPoint(const PinholeCamera& camera, const cv::Vec3d& p_in_world_m) {
  const cv::Vec3d p = CameraFromWorldRotation(camera) * p_in_world_m + camera.tvec_m;
  assert(p[2] > 0);
  const cv::Point2d d = DistortNormalized(camera.intrinsics, {p[0] / p[2], p[1] / p[2]});
  const CameraIntrinsics& k = camera.intrinsics;
  return {k.fx_px * d.x + k.cx_px, k.fy_px * d.y + k.cy_px};
}

cv::Point2d ImageFromDropPlane(const PinholeCamera& camera, cv::Point2d p_in_plane_m) {
  return ProjectWorldPoint(camera, {p_in_plane_m.x, p_in_plane_m.y, 0.0});
}

cv::Vec3d WorldRayOfPixel(const PinholeCamera& camera, cv::Point2d image_px) {
  const CameraIntrinsics& k = camera.intrinsics;
  const cv::Point2d n = UndistortNormalized(k, {(image_px.x - k.cx_px) / k.fx_px, (image_px.y - k.cy_px) / k.fy_px});
  const cv::Vec3d ray = CameraFromWorldRotation(camera).t() * cv::Vec3d(n.x, n.y, 1.0);
  return ray / cv::norm(ray);
}

std::optional<cv::Vec3d> IntersectPixelRayWithPlane(const PinholeCamera& camera, cv::Point2d image_px,
                                                    const cv::Vec3d& point_m, const cv::Vec3d& normal) {
  const cv::Vec3d origin = CameraCentreInWorld(camera);
  const cv::Vec3d ray = WorldRayOfPixel(camera, image_px);
  const double denom = ray.dot(normal);
  if (std::abs(denom) < 1e-12) return std::nullopt;
  const double s = (point_m - origin).dot(normal) / denom;
  if (!(s > 0)) return std::nullopt;
  return origin + s * ray;
}

cv::Point2d DropPlaneFromImage(const PinholeCamera& camera, cv::Point2d image_px) {
  const auto p = IntersectPixelRayWithPlane(camera, image_px, {0, 0, 0}, {0, 0, 1});
  if (!p) throw std::invalid_argument("the pixel's ray does not meet the drop plane in front of the camera");
  return {(*p)[0], (*p)[1]};
}

double MetresPerPixelAtCentre(const PinholeCamera& camera) {
  const CameraIntrinsics& k = camera.intrinsics;
  const cv::Point2d c(k.image_size.width / 2.0, k.image_size.height / 2.0);
  const cv::Point2d p = DropPlaneFromImage(camera, c);
  const double du = cv::norm(DropPlaneFromImage(camera, c + cv::Point2d(1, 0)) - p);
  const double dv = cv::norm(DropPlaneFromImage(camera, c + cv::Point2d(0, 1)) - p);
  return std::sqrt(du * dv);
}

calib::Rig RigFromCamera(const PinholeCamera& camera, std::optional<double> corner_height_m,
                         std::optional<double> capture_fps) {
  const CameraIntrinsics& k = camera.intrinsics;
  calib::Rig rig;
  rig.image_size = k.image_size;
  calib::LensModel lens;
  lens.camera_matrix = cv::Matx33d(k.fx_px, 0, k.cx_px, 0, k.fy_px, k.cy_px, 0, 0, 1);
  lens.distortion = {k.k1, k.k2, k.p1, k.p2, k.k3};
  rig.lens = lens;
  // Undistorted pixel ~ K [r1 r2 t] (x_m, y_m, 1): the homography of the plane z_m = 0.
  const cv::Matx33d r = CameraFromWorldRotation(camera);
  const cv::Matx33d rt(r(0, 0), r(0, 1), camera.tvec_m[0], r(1, 0), r(1, 1), camera.tvec_m[1], r(2, 0), r(2, 1),
                       camera.tvec_m[2]);
  cv::Matx33d plane_from_undistorted = (lens.camera_matrix * rt).inv();
  plane_from_undistorted *= 1.0 / plane_from_undistorted(2, 2);
  rig.plane_from_undistorted = plane_from_undistorted;
  rig.plane_rvec_rad = camera.rvec_rad;
  rig.plane_tvec_m = camera.tvec_m;
  rig.up = calib::UpSide::kTop;
  rig.y_origin = calib::YOrigin::kFloor;
  rig.corner_height_m = corner_height_m;
  rig.capture_fps = capture_fps;
  rig.tool_version = "dropfit render (exact camera)";
  return rig;
}

}  // namespace dropfit::synth
