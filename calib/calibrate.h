#pragma once
// Checkerboard calibration: views of a flat checkerboard -> calib::Rig (lens model, drop-plane
// mapping, vertical, floor, quality figures). The command `dropfit calibrate` reads the files
// (calib/calibration_input.h) and writes the rig (cli/rig_io.h); this header does the work.
//
// Method.
// 1. Corners: cv::findChessboardCornersSB finds the board, cv::cornerSubPix refines each corner
//    (a (2h + 1)-pixel square window, h = subpix_half_window_px shrunk on small squares so it never
//    spans a neighbour; the refinement is what made the classic detector the more accurate one in
//    docs/platform.md, "Checkerboard detection"), then a saddle-point fit (Lucchese & Mitra 2002)
//    and a blurred X-corner model fit from it refine it further (calib/corner_refine.h,
//    docs/methods.md §16a: on rendered boards 0.009 px mean error against cornerSubPix's 0.055 px;
//    a fit that fails keeps the previous estimate and is named in BoardDetection). The classic
//    cv::findChessboardCorners is NOT used to find the board: measured here (OpenCV 4.6, 1024x768)
//    it takes 13-45 s per image, with or without FAST_CHECK, when the board in view has another
//    corner count than the one asked for (a wrong --board, a board partly out of view), while
//    findChessboardCornersSB gives up in 0.2-0.6 s and finds a right board in about as long.
//    A view whose edges are blurred (edge-spread sigma above `max_blur_px`, from the 10-90 %
//    rise distance of the board's square edges: a Gaussian edge rises 10-90 % over 2.563 sigma,
//    since erf^-1(0.8) * 2 * sqrt(2) = 2.563; common practice, no source) is left out and named.
// 2. Lens: cv::calibrateCamera (Zhang 2000, "A flexible new technique for camera calibration",
//    IEEE TPAMI 22(11):1330-1334; journal details from memory) with OpenCV's distortion model.
//    Four nested term sets are fitted (k1 | k1,k2 | k1,k2,p1,p2 | k1,k2,p1,p2,k3) and the one
//    with the lowest Bayesian information criterion (Schwarz 1978, Ann. Stat. 6(2):461;
//    BIC = n ln(RSS/n) + p ln(n), n = 2 x corners, p = number of distortion terms) is kept:
//    the terms the views support. A view whose RMS reprojection error exceeds `outlier_factor`
//    x the median and `outlier_floor_px` is dropped, named, and the fit repeated.
// 3. Plane: the plane view's corners, undistorted, give the homography from board to
//    undistorted pixels (cv::findHomography, least squares on all corners). The board axis
//    whose image direction is closest to the `up` side becomes +y_m; +x_m is the other axis,
//    signed so that (x_m, y_m) looks like (right, up) from the camera. x_m = 0 is the corner
//    column with the smallest x_m (leftmost in the upright view), y_m = 0 the lowest corner
//    row, or the floor when `corner_height_m` is given (that row is then at y_m = corner_height_m).
//    Pose (plane_rvec_rad, plane_tvec_m): cv::solvePnP of the plane view with the lens, in the
//    frame where plane point (x_m, y_m) is (x_m, -y_m, 0) (X right, Y down, Z away from camera).
//    With only the plane view there is no lens model: the homography maps pixels as measured.
// 4. Gates: refused (returned as data with the reason and what to do) when no board is found
//    (naming a nearby --board only when its detection covers the whole board in view: one grid
//    step beyond every outer corner row and column there is no X-corner, and the corners found
//    are X-corners themselves; the detector also finds parts of a larger board and sheared grids
//    through it), when the plane view's corners are only part of the board in view (a --board
//    too small), when the plane view shows none, too few views remain, or the overall RMS reprojection error is
//    above `max_rms_px`; the last two pass with `force` (and a warning). Warnings: RMS above
//    `warn_rms_px`, a small board, lens views covering little of the frame, little tilt variety
//    (parallel views leave focal length and distortion confounded: Zhang 2000, section 3.3).
//
// 5. Uncertainty: the corner noise, estimated from the plane view's and the lens views' residuals,
//    propagated to the mapping's parameters and to heights, the floor and the scale
//    (calib/rig_uncertainty.h; docs/methods.md §18).
//
// The steps of points 1-5, each a function of its own with its inputs and outputs, are in
// calib/calibrate_steps.h; Calibrate runs them and holds the gates between them.
//
// RMS reprojection error is the root mean square over all corners of the distance between
// measured and reprojected corner [px] (what cv::calibrateCamera returns). It is NOT the "total
// error" of OpenCV's Python tutorial, which is RMS / sqrt(corners per view) (docs/methods.md §9).

#include <opencv2/core.hpp>

#include <optional>
#include <string>
#include <vector>

#include "calib/rig.h"

namespace dropfit::calib {

// One picture of the board.
struct CalibrationImage {
  std::string name;  // how messages and the rig name it: the path, or "clip.mp4#frame 120"
  cv::Mat grey;      // 8-bit, one channel, in OpenCV's pixel convention
};

struct CalibrateOptions {
  BoardSpec board;                            // inner corners and square size
  std::optional<double> corner_height_m;      // [m] >= 0: height above the floor of the plane view's
                                              // lowest inner-corner row; gives y_origin "floor"
  double corner_height_sd_m = 0.0005;         // [m] 0..1: standard uncertainty of corner_height_m (a steel
                                              // rule read by eye; from memory); into the floor's uncertainty
  UpSide up = UpSide::kTop;                   // image side physical up points to
  std::optional<double> capture_fps;          // [frames/s] > 0: stored in the rig as given
  bool force = false;                         // accept too few views or a high RMS (with a warning)
  int min_lens_views = 5;                     // [views] 3..1000: fewer usable views are refused
  double max_rms_px = 1.0;                    // [px] > 0: overall RMS above this is refused
  double warn_rms_px = 0.3;                   // [px] > 0, <= max_rms_px: warn above this
  double outlier_factor = 3.0;                // > 1: view RMS this many times the median is dropped...
  double outlier_floor_px = 0.2;              // [px] >= 0: ...when also above this
  double max_blur_px = 2.5;                   // [px] > 0: views with edge blur sigma above are dropped
  double min_board_coverage_fraction = 0.05;  // 0..1: plane view's board area / frame; warn below
  double min_views_coverage_fraction = 0.5;   // 0..1: frame share covered by lens views; warn below
  double min_tilt_spread_deg = 15.0;          // [deg] 0..90: largest angle between view normals; warn below
  int subpix_half_window_px = 9;              // [px] 2..30: corner refinement half window (cornerSubPix's
                                              // square, the saddle and X-corner fits' disc), shrunk on
                                              // small squares
  int max_video_views = 20;                   // [views] 3..200: frames kept from one video
  int video_candidates_per_view = 3;          // 1..20: frames looked at per frame kept
};
// A message naming the offending field, value and valid range, or nothing when valid.
std::optional<std::string> ValidateCalibrateOptions(const CalibrateOptions& options);

// One board detection.
struct BoardDetection {
  bool found = false;
  std::vector<cv::Point2f> corners_px;        // inner corners, row by row as OpenCV orders them
  double blur_px = 0.0;                       // edge blur sigma estimate [px] (0 when not found)
  std::vector<std::string> refine_fallbacks;  // corners whose saddle or X-corner fit failed, with the
                                              // reason ("corner <k>: ..."); they keep the estimate before
};

// Finds the inner corners to sub-pixel accuracy (method: point 1 above).
// Throws std::invalid_argument when `grey` is empty or not 8-bit single-channel.
BoardDetection DetectBoard(const cv::Mat& grey, const BoardSpec& board, int subpix_half_window_px = 9);

// Edge blur sigma [px] of a found board: median over the square edges of the 10-90 % rise
// distance / 2.563. Returns 0 when no edge can be measured.
double EstimateEdgeBlurPx(const cv::Mat& grey, const std::vector<cv::Point2f>& corners_px, const BoardSpec& board);

// The outcome of a calibration: a rig, or the reason it was refused (expected per-input failure).
struct CalibrationOutcome {
  std::optional<Rig> rig;             // absent when refused
  std::string refusal;                // why refused and what to do (empty when rig is set)
  std::vector<std::string> warnings;  // also in rig->warnings
  std::vector<std::string> notes;     // informational: views without board, dropped views
};

// Calibrates from `views` (lens views; the plane view may be among them, by name) and `plane`.
// `views` empty: plane mapping only, no lens model (with a warning saying what that costs).
// Throws std::invalid_argument on invalid options, empty images, or images of different sizes.
CalibrationOutcome Calibrate(const std::vector<CalibrationImage>& views, const CalibrationImage& plane,
                             const CalibrateOptions& options);

}  // namespace dropfit::calib
