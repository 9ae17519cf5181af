#pragma once
// The rig: everything dropfit knows about one camera set-up, made once by `dropfit calibrate`
// and reused for every clip filmed with that set-up.
//
// Conventions (stated once, here):
// - Image points are in pixels in OpenCV's convention: the centre of the top-left pixel is
//   (0, 0), u to the right, v down. Every OpenCV function used (corner refinement,
//   projection, calibration, undistortion) works this way.
// - Plane points are in metres in the drop plane: x_m horizontal, y_m vertical UP (against
//   gravity). y_m = 0 is the floor when the rig knows it (YOrigin::kFloor), otherwise the
//   plane view's lowest row of inner corners (YOrigin::kBoard). x_m = 0 is the plane view's
//   inner-corner column furthest to the left in the image.
// - Names carry their frame: `plane_from_undistorted` maps undistorted pixels to plane metres.
//
// The rig file format (JSON) is read and written by cli/rig_io; this header holds the data
// and the mapping only.

#include <opencv2/core.hpp>

#include <optional>
#include <string>
#include <utility>
#include <vector>

namespace dropfit::calib {

// The image side that physical "up" points to (`--up`).
enum class UpSide { kTop, kBottom, kLeft, kRight };
std::string ToString(UpSide side);
// Throws std::invalid_argument naming the string and the valid ones ("top, bottom, left, right").
UpSide UpSideFromString(const std::string& text);

// Where y_m = 0 lies (the contract's "y_origin").
enum class YOrigin { kFloor, kBoard };
std::string ToString(YOrigin origin);
YOrigin YOriginFromString(const std::string& text);

// Pinhole camera with OpenCV's distortion model (k1, k2, p1, p2[, k3[, k4, k5, k6]]).
struct LensModel {
  cv::Matx33d camera_matrix = cv::Matx33d::eye();  // fx, 0, cx; 0, fy, cy; 0, 0, 1 [px]
  std::vector<double> distortion;                  // OpenCV order; empty = none
};

// Calibration quality figures, in units the engineer understands.
struct RigQuality {
  double rms_reprojection_px = 0.0;        // overall RMS reprojection error of the lens fit
  std::vector<std::string> view_names;     // views used in the lens fit
  std::vector<double> view_rms_px;         // per-view RMS reprojection error
  std::vector<std::string> dropped_views;  // views left out, with the reason
  double plane_rms_px = 0.0;               // RMS residual of the plane view's mapping
  double square_error_mean_mm = 0.0;       // known square size measured back: mean |error|
  double square_error_max_mm = 0.0;        // ... and worst
  double metres_per_px_centre = 0.0;       // scale at the image centre
  double board_coverage_fraction = 0.0;    // area of the plane view's board / image area
  // Added with `dropfit calibrate`:
  std::string distortion_terms;          // lens terms fitted, e.g. "k1,k2" ("" without a lens)
  double views_coverage_fraction = 0.0;  // share of the frame covered by the lens views' boards
  double tilt_spread_deg = 0.0;          // largest angle between two lens views' board normals
  double lowest_corner_row_px = 0.0;     // plane view: image row (v) of the lowest inner corners
};

// The checkerboard: inner corners (not squares: a board of 10 x 7 squares has 9 x 6 inner
// corners) and the side of one square.
struct BoardSpec {
  int columns = 9;          // inner corners per row, >= 3
  int rows = 6;             // inner corners per column, >= 3
  double square_m = 0.025;  // side of one square [m], > 0
};
// Plausible lengths a user types in metres for a rig (README "dropfit calibrate"); a value outside
// was most often typed in millimetres, and `dropfit calibrate` and `dropfit render` refuse it with
// kRigMillimetresHint. Common practice, no source: printed boards have squares of a few mm to a
// few dm, and a camera aimed at a drop sees the board within a few metres of the floor.
inline constexpr double kMinSquareM = 0.002, kMaxSquareM = 0.3;  // checkerboard square side
inline constexpr double kMaxCornerHeightM = 3.0;                 // lowest corner row above the floor
inline constexpr const char* kRigMillimetresHint = "did you give millimetres?";

// "9x6" <-> BoardSpec{9, 6}. Throws std::invalid_argument naming the text and the expected form.
BoardSpec BoardSizeFromString(const std::string& text, double square_m);
std::string BoardSizeToString(const BoardSpec& board);

// The rig's standard uncertainty (calib/rig_uncertainty.h holds the method and the functions
// that use it; docs/methods.md §18). Heights are y_m; "mapping only" means from the corner
// noise of the plane view and of the lens views, without the hand-measured corner height.
struct RigUncertainty {
  double plane_corner_sd_px = 0.0;  // corner noise of the plane view: sqrt(RSS / (2N - 8)) [px]
  double lens_corner_sd_px = 0.0;   // corner noise of the lens views: sqrt(RSS / (2N - P)) [px]; 0 without lens
  double corner_height_sd_m = 0.0;  // standard uncertainty of the corner height (`--corner-height-sd`) [m]
  // At the image's horizontal centre (x_m of the image centre's pixel), mapping only [m]: the
  // height of the plane view's lowest corner row, and 100 mm and 300 mm above it.
  double height_sd_at_corner_row_m = 0.0;
  double height_sd_100mm_m = 0.0;
  double height_sd_300mm_m = 0.0;
  // The floor level at the same x_m: the mapping there and the corner height combined [m];
  // absent when the rig does not know the floor (y_origin "board").
  std::optional<double> floor_sd_m;
  double scale_rel_sd_centre = 0.0;  // relative sd of metres_per_px_centre [-]
  // Joint covariance of MappingParameters(rig) (calib/rig_uncertainty.h), named in `parameters`,
  // n x n row by row [units of the parameters' products].
  std::vector<std::string> parameters;
  std::vector<double> covariance;
};

struct Rig {
  static constexpr int kSchemaVersion = 1;
  int schema_version = kSchemaVersion;
  cv::Size image_size;            // [px]
  std::optional<LensModel> lens;  // absent: points are used as measured
  // Homography from undistorted pixels (same camera matrix) to plane metres (x_m, y_m up).
  cv::Matx33d plane_from_undistorted = cv::Matx33d::eye();
  // Pose of the plane view's board frame in the camera (present with a lens model).
  std::optional<cv::Vec3d> plane_rvec_rad;
  std::optional<cv::Vec3d> plane_tvec_m;
  UpSide up = UpSide::kTop;
  YOrigin y_origin = YOrigin::kBoard;
  // Height above the floor of the plane view's lowest row of inner corners (`--corner-height`).
  std::optional<double> corner_height_m;
  std::optional<double> capture_fps;  // [frames/s], when given at calibration
  RigQuality quality;
  std::string tool_version;
  std::vector<std::pair<std::string, std::string>> input_hashes;  // (file, FNV-1a 64 hex)
  std::vector<std::string> warnings;
  // Added with `dropfit calibrate`:
  BoardSpec board;         // the board the rig was calibrated with
  std::string plane_view;  // name of the view that lies in the drop plane
  // The options the calibration ran with, as (name, value) text, so a rig can be remade.
  std::vector<std::pair<std::string, std::string>> settings;
  // Added with issue 14: the standard uncertainty of the mapping; absent in older rigs.
  std::optional<RigUncertainty> uncertainty;
};

// Returns a message naming what is wrong (NaN, non-invertible mapping, bad image size...),
// or nothing when the rig can be used.
std::optional<std::string> ValidateRig(const Rig& rig);

// Removes lens distortion: distorted pixel -> undistorted pixel (same camera matrix).
cv::Point2d UndistortedFromImage(const Rig& rig, cv::Point2d image_px);
// Adds lens distortion: undistorted pixel -> distorted (measured) pixel.
cv::Point2d ImageFromUndistorted(const Rig& rig, cv::Point2d undistorted_px);

// Image pixel -> drop-plane metres (undistort, then the plane mapping).
cv::Point2d PlaneFromImage(const Rig& rig, cv::Point2d image_px);
// Drop-plane metres -> image pixel (inverse mapping, then distortion).
cv::Point2d ImageFromPlane(const Rig& rig, cv::Point2d plane_m);

// The unit vector, in the image, of the plane's +y_m (up) direction at an image point.
cv::Vec2d ImageUpDirection(const Rig& rig, cv::Point2d image_px);

// --- The marker's plane (docs/formats.md, "Marker plane"; docs/methods.md §19) ---------------
// A hub marker on the hub face lies in a plane parallel to the calibrated plane Pi_0 (the plane
// view's board, stood where the tyre's mid-plane runs), in front of it or behind it. Convention
// (stated once, here): the marker plane Pi_d is Pi_0 moved by the signed offset d along Pi_0's
// normal, TOWARD THE CAMERA POSITIVE. Its plane frame is Pi_0's frame moved with it: the point
// (x_m, y_m) of Pi_d lies d in front of the point (x_m, y_m) of Pi_0. The board stands upright,
// so its normal is horizontal and y_m stays the height above the floor (or above the board's
// lowest corner row) in Pi_d too.
// Geometry (pinhole projection; Hartley & Zisserman 2004, "Multiple View Geometry", 2nd ed.,
// §6.1 and §8.1, ray back-projection and ray-plane intersection; FROM MEMORY): with the camera
// centre at the origin of the camera frame, n the unit normal of Pi_0 pointing to the camera and
// D > 0 the camera's distance from Pi_0, a pixel's ray X = s K^-1 (u, v, 1) (undistorted pixel)
// meets Pi_d (n . X = d - D) at s = (D - d) / (-n . K^-1 (u, v, 1)). Lengths in Pi_d therefore
// scale by (D - d) / D against Pi_0 about the foot of the perpendicular from the camera.

// True when the rig knows the pose of its calibrated plane in the camera (lens model and
// plane_rvec_rad / plane_tvec_m), which the marker plane needs.
bool HasPlanePose(const Rig& rig);
// The camera centre's distance D from the calibrated plane along its normal [m]; nothing without
// a plane pose (or when the camera lies in the plane).
std::optional<double> CameraDistanceM(const Rig& rig);
// Why a marker offset cannot be used with this rig (no plane pose; |d| not below D; not finite),
// naming the offset and saying what to do; nothing when it can. Offset 0 is always usable.
std::optional<std::string> MarkerOffsetProblem(const Rig& rig, double marker_offset_m);
// Image pixel -> marker-plane metres (x_m, y_m) of the plane `marker_offset_m` in front of the
// calibrated plane: undistort, back-project the ray, meet Pi_d at X, take X's foot on Pi_0
// (X - d n), project it to an undistorted pixel and map it by plane_from_undistorted. At offset 0
// this is PlaneFromImage, exactly (the same code). NaN coordinates when the ray does not meet
// Pi_d in front of the camera. Throws std::invalid_argument with MarkerOffsetProblem's message.
cv::Point2d MarkerPlaneFromImage(const Rig& rig, cv::Point2d image_px, double marker_offset_m);

}  // namespace dropfit::calib
