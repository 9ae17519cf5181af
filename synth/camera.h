#pragma once
// The renderer's camera: a pinhole with radial and tangential lens distortion looking at the
// drop plane, and the exact calib::Rig that a perfect calibration of it would give.
//
// Frames (stated once, here):
// - World ("scene") frame, metres: x_m right, y_m up (against gravity), z_m towards the camera.
//   The drop plane is z_m = 0 and the floor is y_m = 0. x_m = 0 is the plane view's inner-corner
//   column furthest to the left (render_calibration.h places the board so), so on the drop plane
//   (x_m, y_m) are the contract's plane coordinates with "y_origin": "floor".
// - Camera frame, OpenCV's: x right, y down, z forward along the optical axis.
//   p_in_camera = R(rvec) * p_in_world + tvec (the pose OpenCV's projectPoints takes).
// - Image: OpenCV's pixel convention, the centre of the top-left pixel is (0, 0), u right, v down.
//
// Lens model: OpenCV's 5-coefficient model (k1, k2, p1, p2, k3), the Brown-Conrady radial and
// decentring (tangential) distortion, exactly as in OpenCV's calib3d documentation
// ("Camera Calibration and 3D Reconstruction", the formula of projectPoints; D. C. Brown,
// "Decentering distortion of lenses", Photogrammetric Engineering 32(3), 1966):
//   x' = X/Z, y' = Y/Z, r^2 = x'^2 + y'^2
//   x'' = x' (1 + k1 r^2 + k2 r^4 + k3 r^6) + 2 p1 x' y' + p2 (r^2 + 2 x'^2)
//   y'' = y' (1 + k1 r^2 + k2 r^4 + k3 r^6) + p1 (r^2 + 2 y'^2) + 2 p2 x' y'
//   u = fx x'' + cx,  v = fy y'' + cy
// The projection below is our own code; tests/synth/camera_test.cpp checks it against
// cv::projectPoints.

#include <opencv2/core.hpp>

#include <optional>
#include <string>

#include "calib/rig.h"

namespace dropfit::synth {

struct CameraIntrinsics {
  cv::Size image_size{800, 640};  // [px]
  double fx_px = 1200.0;          // focal length along u [px]; > 0
  double fy_px = 1200.0;          // focal length along v [px]; > 0
  double cx_px = 402.7;           // principal point u [px] (OpenCV pixel convention)
  double cy_px = 317.4;           // principal point v [px]
  double k1 = -0.07;              // radial distortion, r^2 term [-]
  double k2 = 0.02;               // radial distortion, r^4 term [-]
  double p1 = 4e-4;               // tangential (decentring) distortion [-]
  double p2 = -3e-4;              // tangential (decentring) distortion [-]
  double k3 = 0.0;                // radial distortion, r^6 term [-]
};

struct PinholeCamera {
  CameraIntrinsics intrinsics;
  cv::Vec3d rvec_rad;  // Rodrigues vector of camera_from_world [rad]
  cv::Vec3d tvec_m;    // translation of camera_from_world [m]
};

// How the renderer sets its camera up: distance, aim and a slightly imperfect mounting.
struct CameraSetup {
  CameraIntrinsics intrinsics;  // see above; image_size.width/height in 16..8192
  double distance_m = 1.2;      // camera centre to the aim point along the optical axis; 0.1..100
  double aim_x_m = 0.2;         // drop-plane point on the optical axis, x [m]
  double aim_y_m = 0.28;        // ... and y [m]
  // Mounting errors, in degrees, applied in the camera's own axes; each within [-20, 20].
  double pitch_deg = 2.0;  // about the camera x axis; positive tilts the view downwards
  double roll_deg = 1.5;   // about the optical axis; positive turns the scene counter-
                           // clockwise on screen (a level line rises to the right)
  double yaw_deg = 0.8;    // about the camera y axis; positive pans the view to the right
};

// A message naming the first bad field and its valid range, or nothing.
std::optional<std::string> ValidateCameraSetup(const CameraSetup& setup);

// Builds the camera. Throws std::invalid_argument with ValidateCameraSetup's message.
PinholeCamera MakeCamera(const CameraSetup& setup);

// Rotation matrix of camera_from_world.
cv::Matx33d CameraFromWorldRotation(const PinholeCamera& camera);
// Camera centre in the world frame [m].
cv::Vec3d CameraCentreInWorld(const PinholeCamera& camera);

// Normalised (x', y') -> distorted normalised (x'', y''): the lens model above.
cv::Point2d DistortNormalized(const CameraIntrinsics& k, cv::Point2d normalized);
// Inverse of DistortNormalized by Newton's method with the analytic Jacobian, to 1e-14.
// Throws std::runtime_error when it does not converge (points far outside the image).
cv::Point2d UndistortNormalized(const CameraIntrinsics& k, cv::Point2d distorted);

// World point [m] -> image pixel. Precondition: the point is in front of the camera.
cv::Point2d ProjectWorldPoint(const PinholeCamera& camera, const cv::Vec3d& p_in_world_m);
// Drop-plane point (x_m, y_m, z_m = 0) -> image pixel.
cv::Point2d ImageFromDropPlane(const PinholeCamera& camera, cv::Point2d p_in_plane_m);

// Unit ray direction, in the world frame, of the light reaching image pixel `image_px`.
cv::Vec3d WorldRayOfPixel(const PinholeCamera& camera, cv::Point2d image_px);
// Image pixel -> the point where its ray meets the world plane through `point_m` with
// normal `normal`; nothing when the ray is parallel to it or the plane is behind the camera.
std::optional<cv::Vec3d> IntersectPixelRayWithPlane(const PinholeCamera& camera, cv::Point2d image_px,
                                                    const cv::Vec3d& point_m, const cv::Vec3d& normal);
// Image pixel -> drop-plane point (x_m, y_m) (the ray meets z_m = 0).
cv::Point2d DropPlaneFromImage(const PinholeCamera& camera, cv::Point2d image_px);

// Drop-plane metres seen per pixel at the image centre (geometric mean of both axes).
double MetresPerPixelAtCentre(const PinholeCamera& camera);

// The rig a perfect calibration of this camera gives (calib/rig.h): lens = K and
// (k1, k2, p1, p2, k3); plane_from_undistorted maps undistorted pixels to the drop plane's
// (x_m, y_m) with y_m = 0 at the floor ("y_origin": "floor", up = top);
// plane_rvec/tvec = the pose of the world frame above (x_m, y_m, z_m towards the camera) in the
// camera; corner_height_m and capture_fps are copied when given. Lets tests turn pixels into
// metres without running a calibration.
calib::Rig RigFromCamera(const PinholeCamera& camera, std::optional<double> corner_height_m,
                         std::optional<double> capture_fps);

}  // namespace dropfit::synth
