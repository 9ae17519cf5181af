#pragma once
// The steps of the checkerboard calibration (calib/calibrate.h, "Method"), each on its own so it
// can be tested on exact synthetic corners. `Calibrate` runs them in this order:
//   1. board detection over the views (calibrate.cpp; DetectBoard in calib/calibrate.h),
//   2. the lens fit with outlier-view removal (FitLensWithoutOutliers, built on FitLens),
//   3. the plane view: its mapping (FitPlaneHomography), the up axis (FindBoardAxes), the floor
//      (PlaceOrigin) and the board pose (PlaneViewPose),
//   4. the quality figures (TiltSpreadDeg, CoverageFraction, MeasurePlaneView),
//   5. the mapping's uncertainty (CornerSdFromRms, HomographyCovariance, LensIntrinsicsCovariance,
//      EstimateRigUncertainty; the method is calib/rig_uncertainty.h).
// The gates, warnings and refusals between them stay in calibrate.cpp: these functions compute,
// they do not judge (except the outlier rule of step 2, which is part of the fit).
//
// Conventions: pixels as in calib/rig.h (OpenCV's). Board coordinates (X, Y) [m] are the board's
// own: inner corner (i, j) (column i, row j, as cv::findChessboardCornersSB orders them) is at
// (i * square_m, j * square_m), Z = 0 on the board. Undistorted pixels use the lens' own camera
// matrix (the same convention as Rig::plane_from_undistorted).

#include <opencv2/core.hpp>

#include <optional>
#include <string>
#include <vector>

#include "calib/rig.h"

namespace dropfit::calib {

// Board coordinates [m] of the inner corners, row by row (X = i * square_m, Y = j * square_m, Z = 0).
std::vector<cv::Point3f> BoardPoints3d(const BoardSpec& board);

// --- Step 2: the lens ------------------------------------------------------------------------

// One lens fit (cv::calibrateCamera; Zhang 2000, "A flexible new technique for camera
// calibration", IEEE TPAMI 22(11):1330-1334, journal details from memory).
struct LensFit {
  double rms_px = 0.0;                // overall RMS reprojection error [px], as cv::calibrateCamera returns it
  cv::Matx33d camera_matrix;          // fx, 0, cx; 0, fy, cy; 0, 0, 1 [px]
  std::vector<double> distortion;     // k1, k2, p1, p2, k3 (OpenCV order); terms not fitted are 0
  std::vector<cv::Mat> rvecs, tvecs;  // per view: board pose in the camera (Rodrigues [rad], [m])
  std::string terms;                  // distortion terms fitted: "k1", "k1,k2", "k1,k2,p1,p2" or "k1,k2,p1,p2,k3"
  std::vector<double> view_rms_px;    // per view: RMS distance [px] between corners and cv::projectPoints
};

// Fits the four nested distortion term sets (k1 | k1,k2 | k1,k2,p1,p2 | k1,k2,p1,p2,k3) and keeps
// the one with the lowest Bayesian information criterion (Schwarz 1978, Ann. Stat. 6(2):461;
// BIC = n ln(RSS/n) + p ln(n), n = 2 x corners, p = distortion terms; RSS/n = rms^2 / 2, whose
// constant factor does not change the choice). `object` and `image` hold one entry per view.
// Throws std::runtime_error when no term set gives a finite fit.
LensFit FitLens(const std::vector<std::vector<cv::Point3f>>& object, const std::vector<std::vector<cv::Point2f>>& image,
                cv::Size size);

// A lens fit after leaving out the views that fit far worse than the rest.
struct LensFitWithoutOutliers {
  LensFit fit;                                       // fitted on the views kept
  std::vector<std::string> names;                    // views kept, in the order given (the plane view first)
  std::vector<std::vector<cv::Point2f>> corners_px;  // their corners
  std::vector<std::string> dropped;   // per view left out: "<name>: RMS <x> px, far above the median <m> px"
  std::vector<std::string> warnings;  // one per view left out; one when the plane view fits badly
};

// FitLens on all views, then, while more than 3 views remain, leaves out the worst view when its
// RMS reprojection error exceeds both `outlier_factor` x the median view RMS and
// `outlier_floor_px` [px] (one view at a time, refitting after each; a median-based rejection
// rule, common practice, no source). The first view is the plane view: it is never left out, and
// a warning names it when it fits that badly. Throws std::invalid_argument when `names` and
// `corners_px` differ in length or hold fewer than 3 views.
LensFitWithoutOutliers FitLensWithoutOutliers(std::vector<std::string> names,
                                              std::vector<std::vector<cv::Point2f>> corners_px, const BoardSpec& board,
                                              cv::Size size, double outlier_factor, double outlier_floor_px);

// --- Step 3: the plane view ------------------------------------------------------------------

// The plane view's board -> undistorted pixels.
struct PlaneHomography {
  cv::Matx33d undistorted_from_board;  // board (X, Y) [m] -> undistorted pixel, homogeneous
  double rms_px = 0.0;                 // RMS residual of the mapping over the corners [px]
};

// Undistorts the plane view's corners with `lens` (as measured when absent) and fits the
// homography from the board to them by least squares on all corners (cv::findHomography with
// method 0, as OpenCV documents it). Returns nothing when the corners are degenerate (no
// homography).
std::optional<PlaneHomography> FitPlaneHomography(const std::vector<cv::Point2f>& corners_px, const BoardSpec& board,
                                                  const std::optional<LensModel>& lens);

// Which board axes become the plane's x_m and y_m (up).
struct BoardAxes {
  cv::Vec2d up_board;       // board unit axis, (+-1, 0) or (0, +-1), that becomes +y_m
  cv::Vec2d x_board;        // the perpendicular board axis that becomes +x_m
  double off_up_deg = 0.0;  // angle [deg] between up_board's image direction and the `up` side
};

// The up axis: of the four board half-axes (+-X, +-Y), seen in the undistorted image at the
// board's centre (half a square long), the one whose direction is closest to the image side
// `up` becomes +y_m. +x_m is the perpendicular board axis signed so that (x_m, y_m) turn like
// (right, up) in the image, i.e. a negative 2-D cross product image(x) x image(up) with v down.
BoardAxes FindBoardAxes(const cv::Matx33d& undistorted_from_board, const BoardSpec& board, UpSide up);

// The floor: where the plane's origin lies.
struct PlaneOrigin {
  // Board (X, Y) [m] -> plane (x_m, y_m) [m], homogeneous: x_m = x_board . (X, Y) - x_min,
  // y_m = up_board . (X, Y) - y_min + corner_height_m, (x_min, y_min) the smallest over the corners.
  cv::Matx33d plane_from_board;
  double lowest_corner_row_px = 0.0;  // mean image row v [px] of the corners with the smallest y_m
};

// x_m = 0 at the leftmost corner column, y_m = 0 at the lowest corner row, or at the floor when
// `corner_height_m` [m] (the lowest row's height above it) is given.
PlaneOrigin PlaceOrigin(const std::vector<cv::Point2f>& corners_px, const BoardSpec& board, const BoardAxes& axes,
                        std::optional<double> corner_height_m);

// Pose of the frame in which plane point (x_m, y_m) is (x_m, -y_m, 0) (X right, Y down, Z away
// from the camera): cv::solvePnP (iterative, OpenCV's default) of the plane view's corners.
struct PlanePose {
  cv::Vec3d rvec_rad;  // Rodrigues vector [rad]
  cv::Vec3d tvec_m;    // [m]
};
PlanePose PlaneViewPose(const std::vector<cv::Point2f>& corners_px, const BoardSpec& board,
                        const cv::Matx33d& plane_from_board, const LensModel& lens);

// --- Step 4: quality figures -----------------------------------------------------------------

// Largest angle [deg] between two views' board normals (the third column of each rotation).
// Parallel views leave focal length and distortion confounded (Zhang 2000, section 3.3).
double TiltSpreadDeg(const std::vector<cv::Mat>& rvecs);

// Share [0, 1] of a 20 x 20 grid of cell centres of a `size` image that lies inside at least one
// of `quads` (closed polygons, pixels; cv::pointPolygonTest, the border counts as inside).
double CoverageFraction(const std::vector<std::vector<cv::Point2f>>& quads, cv::Size size);

// The four outer inner-corners of a detection, in order around the board.
std::vector<cv::Point2f> OuterQuad(const std::vector<cv::Point2f>& corners_px, const BoardSpec& board);

// The plane view measured back through a finished rig (lens and plane mapping set).
struct PlaneViewFigures {
  // |distance in the plane - square_m| over every pair of neighbouring corners [mm]: mean and worst.
  double square_error_mean_mm = 0.0;
  double square_error_max_mm = 0.0;
  // Plane scale at the image centre [m/px]: sqrt of the area, in the plane, of one pixel there.
  double metres_per_px_centre = 0.0;
  // Area of the board's outer quad (cv::contourArea) / image area.
  double board_coverage_fraction = 0.0;
};
PlaneViewFigures MeasurePlaneView(const Rig& rig, const std::vector<cv::Point2f>& corners_px, const BoardSpec& board);

// --- Step 5: the mapping's uncertainty (method: calib/rig_uncertainty.h) ---------------------

// Corner noise s.d. [px] per image coordinate from a least-squares fit's RMS residual distance
// over `corners` corners (2 x corners coordinates) with `parameters` parameters fitted: the
// unbiased residual variance RSS / (2 corners - parameters), RSS = corners x rms^2 (common
// practice, no source). OpenCV 4.6's calibrateCamera divides by (corners - parameters) for its
// stdDeviationsIntrinsics instead (measured: tests/calib/rig_uncertainty_test.cpp). Throws
// std::invalid_argument when there are no more coordinates than parameters.
double CornerSdFromRms(double rms_px, size_t corners, size_t parameters);

// Covariance (8 x 8, CV_64F) of h11 h12 h13 h21 h22 h23 h31 h32 of a homography board ->
// undistorted pixels scaled to h33 = 1, fitted by least squares to the board's inner corners
// with independent noise of s.d. `corner_sd_px` on each image coordinate:
// corner_sd_px^2 (J^T J)^-1, J the 2N x 8 Jacobian of the projected corners.
cv::Mat HomographyCovariance(const cv::Matx33d& undistorted_from_board, const BoardSpec& board, double corner_sd_px);

// Covariance of a lens fit's intrinsics.
struct LensCovariance {
  // 9 x 9, CV_64F: fx fy cx cy k1 k2 p1 p2 k3; rows and columns of terms not fitted are 0.
  cv::Mat intrinsics;
  double corner_sd_px = 0.0;  // corner noise from the fit's residuals (CornerSdFromRms, P parameters)
};
// s^2 [(J^T J)^-1] restricted to the intrinsics, J the Jacobian (cv::projectPoints) of every
// view's corners with respect to the fitted intrinsics and every view's rvec and tvec, at `fit`;
// P = 4 + fitted terms + 6 x views. `corners_px` are the views `fit` was fitted to, in its order.
LensCovariance LensIntrinsicsCovariance(const LensFit& fit, const std::vector<std::vector<cv::Point2f>>& corners_px,
                                        const BoardSpec& board);

// The rig's uncertainty: the joint covariance of MappingParameters(rig) (calib/rig_uncertainty.h,
// steps 1-3) from the plane view's corners and homography fit (`homography`, as
// FitPlaneHomography returned it for rig.lens), the board -> plane axes and origin
// (PlaceOrigin's plane_from_board) and, when rig.lens is set, the lens fit's covariance; then
// the summary figures (SummariseUncertainty) with `corner_height_sd_m` [m]. Throws
// std::invalid_argument when rig.lens and `lens` are not both set or both absent.
RigUncertainty EstimateRigUncertainty(const Rig& rig, const std::vector<cv::Point2f>& corners_px,
                                      const BoardSpec& board, const PlaneHomography& homography,
                                      const cv::Matx33d& plane_from_board, const std::optional<LensCovariance>& lens,
                                      double corner_height_sd_m);

}  // namespace dropfit::calib
