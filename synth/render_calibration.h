#pragma once
// Checkerboard images seen by the renderer's camera, for `dropfit calibrate`: several tilted
// board poses spread over the frame (for the lens model) and one board standing upright on the
// floor in the drop plane (the plane view), with the height of its lowest row of inner corners
// above the floor known exactly.
//
// Board frame (stated once, here): origin at an inner corner, b_x along the rows of inner
// corners (inner_cols of them, spaced square_m), b_y along the columns (inner_rows), b_z = b_x
// x b_y. Inner corners sit at (i square_m, j square_m), i = 0..inner_cols-1, j = 0..inner_rows-1.
// The square (0, 0)-(square_m, square_m) is black; the checkered area is one square wider than
// the inner corners on every side ((inner_cols + 1) x (inner_rows + 1) squares), and a white
// border one square wide surrounds it.
//
// Plane view: the board lies in the drop plane with b_x = +x_m, b_y = +y_m, its lower edge on the
// floor, so the inner corner (0, 0) is at x_m = 0 (the contract's x origin: the leftmost
// inner-corner column) and y_m = PlaneBoardCornerHeight(board) = 2 square_m (border + one square).
//
// Drawing: the same odd-symmetric edge ramps and 4 x 4 supersampling as render.h, so corners are
// drawn where the board geometry puts them; exposure (vignetting, noise) as render.h.

#include <opencv2/core.hpp>

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "synth/camera.h"
#include "synth/render.h"

namespace dropfit::synth {

struct CheckerboardSpec {
  int inner_cols = 9;      // inner corners along b_x; 3..40
  int inner_rows = 6;      // inner corners along b_y; 3..40
  double square_m = 0.05;  // square size [m]; [0.002, 0.5]
};
// A message naming the bad field and its range, or nothing.
std::optional<std::string> ValidateCheckerboard(const CheckerboardSpec& board);

// Height above the floor of the plane view's lowest row of inner corners [m] (`--corner-height`).
double PlaneBoardCornerHeight(const CheckerboardSpec& board);

struct CalibrationImage {
  std::string name;  // e.g. "lens_03", "plane"
  cv::Mat1b image;
  bool drop_plane = false;                    // the plane view
  cv::Vec3d board_rvec_rad, board_tvec_m;     // camera_from_board (OpenCV's pose convention)
  std::vector<cv::Point2d> inner_corners_px;  // true image of every inner corner, row by row
                                              // (j outer, i inner), OpenCV pixel convention
};

// Renders `lens_views` tilted views (1..12; the board is placed so that it lies wholly in the
// frame) and the plane view, in that order, over the scene's static background, exposed with
// `exposure` (its noise when add_noise). Deterministic for a given seed. Throws
// std::invalid_argument on a bad board or count, or when the board cannot fit in the frame.
std::vector<CalibrationImage> RenderCalibrationImages(const SceneRenderer& scene, const CheckerboardSpec& board,
                                                      int lens_views, const ExposureSettings& exposure, bool add_noise,
                                                      uint64_t seed);

}  // namespace dropfit::synth
