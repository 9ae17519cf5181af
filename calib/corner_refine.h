#pragma once
// Sub-pixel checkerboard corners by a saddle-point fit (docs/methods.md §16a).
//
// Model (Lucchese & Mitra 2002, "Using saddle points for subpixel feature detection in camera
// calibration targets", Proc. IEEE Asia-Pacific Conference on Circuits and Systems (APCCAS),
// vol. 2, pp. 191-195; paper not at hand, the formulas below are FROM MEMORY and re-derived):
// around an X-corner the low-pass filtered image is a hyperbolic paraboloid
//   f(x, y) = a x^2 + b x y + c y^2 + d x + e y + g,                              (1)
// fitted by least squares to the smoothed pixel values; the corner is its saddle point, where
// the gradient vanishes:
//   [2a  b ] [x_s]     [d]
//   [ b  2c] [y_s] = - [e],   x_s = (b e - 2 c d) / (4 a c - b^2),
//                             y_s = (b d - 2 a e) / (4 a c - b^2),                (2)
// a saddle only when 4 a c - b^2 < 0 (else a peak or a bowl: no corner).
//
// Our use of it (DERIVED; no publication claimed):
// - The image is smoothed with a Gaussian of s.d. `smoothing_sigma_px` first; a centrally
//   symmetric filter keeps an X-corner's point symmetry, and a quadratic's saddle point (a
//   Gaussian adds a constant to a quadratic).
// - The fit is weighted: pixel p gets w = exp(-|p - c|^2 / (2 s_w^2)), s_w = `weight_sigma_fraction`
//   x the half-window h, over the pixels with |p - c| <= h, c the current estimate. An X-corner
//   seen through any centrally symmetric blur (lens, pixel area) is even about its corner,
//   I(c + d) = I(c - d); weights symmetric about c then leave the odd terms d, e of (1) zero when c
//   is the corner, whatever the edges' blur profile or angle, so the fit is iterated, each time
//   centred on the last saddle point, until it moves less than `tolerance_px`. Gaussian weights
//   make the sums over the pixel grid close to the integrals they sample.
// - The window must stay inside the four squares around the corner (DetectBoard shrinks h on
//   small squares), so no neighbouring edge breaks the symmetry.
// - A fit fails (the caller keeps its start point, with the reason) when the surface is no
//   saddle, the estimate moves farther than `max_shift_px` from its start, the window leaves the
//   image, or the iteration does not settle.

#include <opencv2/core.hpp>

#include <optional>
#include <string>
#include <vector>

#include "calib/rig.h"

namespace dropfit::calib {

struct SaddleOptions {
  int half_window_px = 5;              // [px] 2..30: fit over pixels within this of the estimate
  double smoothing_sigma_px = 1.0;     // [px] 0..5: Gaussian pre-smoothing s.d.; 0 = none
  double weight_sigma_fraction = 0.5;  // (0, 10]: weight s.d. / half_window_px
  double max_shift_px = 1.0;           // [px] > 0: farther from the start is a failure
  int max_iterations = 20;             // 1..100
  double tolerance_px = 1e-5;          // [px] (0, 0.1]: converged when a step is shorter
};
// A message naming the first field out of range, or nothing.
std::optional<std::string> ValidateSaddleOptions(const SaddleOptions& options);

// The quadratic surface (1), in coordinates relative to some centre.
struct QuadraticSurface {
  double a = 0, b = 0, c = 0, d = 0, e = 0, g = 0;
};
// Its saddle point (2), relative to the same centre; nothing when 4ac - b^2 >= 0 (no saddle).
std::optional<cv::Point2d> SaddlePointOf(const QuadraticSurface& q);

// One refined corner.
struct SaddleFit {
  cv::Point2d point_px;                // the saddle point; the start point when failed
  std::optional<std::string> failure;  // why the fit failed; unset when it succeeded
  int iterations = 0;
  QuadraticSurface surface;  // last fit, relative to point_px before the last step
};

// Smooths a single-channel image (8U, 32F or 64F) for RefineSaddlePoint: CV_64F, Gaussian of
// `smoothing_sigma_px` (none when 0), borders replicated. Throws std::invalid_argument on an
// empty or multi-channel image or a negative sigma.
cv::Mat1d SmoothForSaddle(const cv::Mat& image, double smoothing_sigma_px);

// Refines one corner from `start_px` on an image already smoothed by SmoothForSaddle (the
// options' smoothing_sigma_px is not applied again here). Pixel convention: OpenCV's (centre of
// the top-left pixel is (0, 0)). Throws std::invalid_argument on invalid options.
SaddleFit RefineSaddlePoint(const cv::Mat1d& smoothed, cv::Point2d start_px, const SaddleOptions& options);

// The largest fit half-window [px] that stays inside the four squares around every corner of a
// found board: 0.4 x the smallest height of the quads that neighbouring corners span (the
// distance from a corner to the far edges of its squares, perspective and shear included),
// clamped to [2, max_half_window_px]. `corners_px` row by row, board.columns x board.rows.
int SaddleHalfWindowPx(const std::vector<cv::Point2f>& corners_px, const BoardSpec& board, int max_half_window_px);

// --- The blurred X-corner model ---------------------------------------------------------------
//
// A least-squares fit of an ideal checkerboard corner seen through a Gaussian blur:
//   I(p) = m + A erf(s1 / (sqrt2 sigma)) erf(s2 / (sqrt2 sigma)),                        (3)
//   s_k = -sin(theta_k) (u - x_c) + cos(theta_k) (v - y_c),   k = 1, 2,
// s_k the signed distance of pixel p = (u, v) from edge k, the line through the corner
// (x_c, y_c) at angle theta_k; m the mean grey level, A half the contrast (its sign says which
// pair of opposite squares is bright), sigma the edge blur. Seven parameters. The product of two
// blurred steps is the exact blur of an X-corner when the edges are perpendicular (the Gaussian
// separates along them) and close to it otherwise (common practice, no source: it is the
// X-corner model of docs/methods.md §9). Fitted to the raw pixels within the half window of the
// start by Levenberg-Marquardt (Levenberg 1944, Marquardt 1963: the step solves
// (J^T J + lambda diag(J^T J)) delta = -J^T r, lambda shrunk by 10 after a step that lowers the
// cost and raised by 10 otherwise; citations from memory) with the analytic Jacobian.
// Started at a saddle fit: the corner at its saddle point, the edge angles along the asymptotes
// of its quadratic (the zero set of a x^2 + b x y + c y^2), sigma = 1 px, m the window's mean and
// |A| half its range.

struct XCornerOptions {
  int half_window_px = 5;      // [px] 2..30: fit over the pixels within this of the start
  double max_shift_px = 0.5;   // [px] > 0: a corner farther than this from the start is a failure
  int max_iterations = 30;     // 1..200 Levenberg-Marquardt steps
  double tolerance_px = 1e-6;  // [px] (0, 0.1]: converged when a step moves the corner less
};
// A message naming the first field out of range, or nothing.
std::optional<std::string> ValidateXCornerOptions(const XCornerOptions& options);

// The parameters of (3).
struct XCornerModel {
  cv::Point2d corner_px;
  double angle1_rad = 0, angle2_rad = 0;
  double sigma_px = 1;
  double mean = 0, amplitude = 0;  // [grey levels]
};
// Model (3) at pixel (u, v).
double XCornerValue(const XCornerModel& model, double u, double v);

struct XCornerFit {
  cv::Point2d point_px;                // the fitted corner; the start point when failed
  std::optional<std::string> failure;  // why the fit failed; unset when it succeeded
  int iterations = 0;
  XCornerModel model;     // last parameters
  double rms_grey = 0.0;  // RMS residual over the window [grey levels]
};

// Fits (3) to `image` (single channel, 8U, 32F or 64F) around `start`, the result of a saddle
// fit (its point and last surface). Fails (with the reason) when the surface gives no edge
// directions, the window leaves the image, the fit does not converge, the corner moves more than
// max_shift_px, the blur leaves (0.1, half_window_px) px or the edges come within 10 degrees of
// parallel. Throws std::invalid_argument on invalid options or an unusable image.
XCornerFit FitXCorner(const cv::Mat& image, const SaddleFit& start, const XCornerOptions& options);

// Every corner of a board refined from its start point (a cv::cornerSubPix result).
struct RefinedCorners {
  std::vector<cv::Point2f> corners_px;  // saddle points; the start point where a fit failed
  std::vector<std::string> fallbacks;   // one per failed fit: "corner <k>: <reason>"
};
// Smooths `grey` once and refines every corner. Throws std::invalid_argument on invalid options
// or an unusable image.
RefinedCorners RefineCornersBySaddle(const cv::Mat& grey, const std::vector<cv::Point2f>& start_px,
                                     const SaddleOptions& options);

// The refiner DetectBoard uses: per corner the saddle fit from the start point, then the
// X-corner fit (3) from the saddle fit. A failed saddle fit keeps the start point, a failed
// X-corner fit the saddle point; either is named in `fallbacks`.
struct CornerRefineOptions {
  SaddleOptions saddle;
  XCornerOptions xcorner;
  bool fit_xcorner = true;  // false: the saddle point is the result
};
// A message naming the first field out of range ("saddle.<field> ..." / "xcorner.<field> ..."), or nothing.
std::optional<std::string> ValidateCornerRefineOptions(const CornerRefineOptions& options);
// Throws std::invalid_argument on invalid options or an unusable image.
RefinedCorners RefineCorners(const cv::Mat& grey, const std::vector<cv::Point2f>& start_px,
                             const CornerRefineOptions& options);

}  // namespace dropfit::calib
