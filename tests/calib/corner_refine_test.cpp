// Tests of the corner refiner (calib/corner_refine.h, docs/methods.md §16a).
//
// Outside references:
// - the saddle point of a quadratic surface in the form Lucchese & Mitra 2002 give it ("Using
//   saddle points for subpixel feature detection in camera calibration targets", APCCAS 2002;
//   the paper was not at hand: the form is FROM MEMORY, and it is the stationary point of
//   f = a x^2 + b x y + c y^2 + d x + e y + g, grad f = 0, which any calculus text gives):
//   x_s = (b e - 2 c d) / (4 a c - b^2), y_s = (b d - 2 a e) / (4 a c - b^2);
// - OpenCV 4.6's cv::projectPoints of the exact board pose as the reference for where the
//   corners of a rendered board are (synth/render_calibration.h draws them; known-answer images).
#include "calib/corner_refine.h"

#include <gtest/gtest.h>
#include <opencv2/calib3d.hpp>

#include <cmath>
#include <iostream>
#include <random>
#include <stdexcept>
#include <string>
#include <vector>

#include "calib/calibrate.h"
#include "synth/camera.h"
#include "synth/render.h"
#include "synth/render_calibration.h"
#include "synth/render_plan.h"

namespace dropfit::calib {
namespace {

// An exact quadratic is fitted exactly: only double rounding of values up to ~1e3 over ~80
// pixels remains, far below 1e-6 px (the brief's figure).
constexpr double kExactSaddleTolPx = 1e-6;
// Issue 14's acceptance: mean corner error at most 0.02 px on the reference renders (noise on).
// Measured by bench/corner_bench: ~0.009 px (docs/methods.md §16a).
constexpr double kRenderedMeanTolPx = 0.02;
// Worst corner of a rendered board: bench/corner_bench measures <= 0.03 px over 1,188 corners
// at the reference noise; 0.06 px is twice that, and still below cornerSubPix's mean worst 0.15.
constexpr double kRenderedWorstTolPx = 0.06;

// A CV_64F image holding f(u, v) = q(u - x0, v - y0) exactly.
cv::Mat1d QuadraticImage(const QuadraticSurface& q, double x0, double y0, cv::Size size) {
  cv::Mat1d image(size);
  for (int v = 0; v < size.height; ++v) {
    for (int u = 0; u < size.width; ++u) {
      const double x = u - x0, y = v - y0;
      image(v, u) = q.a * x * x + q.b * x * y + q.c * y * y + q.d * x + q.e * y + q.g;
    }
  }
  return image;
}

// The published closed form (see the top of the file), written out here on its own.
cv::Point2d PublishedSaddlePoint(const QuadraticSurface& q) {
  const double den = 4 * q.a * q.c - q.b * q.b;
  return {(q.b * q.e - 2 * q.c * q.d) / den, (q.b * q.d - 2 * q.a * q.e) / den};
}

TEST(SaddlePoint, OfAQuadraticSurfaceIsThePublishedClosedForm) {
  std::mt19937_64 rng(1402);
  std::uniform_real_distribution<double> coef(-3.0, 3.0);
  int saddles = 0;
  for (int i = 0; i < 200; ++i) {
    const QuadraticSurface q{coef(rng), coef(rng), coef(rng), coef(rng), coef(rng), coef(rng)};
    const std::optional<cv::Point2d> s = SaddlePointOf(q);
    if (4 * q.a * q.c - q.b * q.b >= 0) {
      EXPECT_FALSE(s) << "a peak or a bowl has no saddle point";
      continue;
    }
    ++saddles;
    ASSERT_TRUE(s);
    const cv::Point2d expected = PublishedSaddlePoint(q);
    EXPECT_NEAR(s->x, expected.x, 1e-12 * (1 + std::abs(expected.x)));
    EXPECT_NEAR(s->y, expected.y, 1e-12 * (1 + std::abs(expected.y)));
  }
  EXPECT_GT(saddles, 50);
}

TEST(SaddlePoint, AnImageThatIsAnExactSaddleGivesItsPublishedSaddlePoint) {
  // Saddles of several shapes (b^2 > 4ac), centred off the pixel grid; the fit starts up to
  // 0.7 px away. The Gaussian pre-smoothing only adds a constant to a quadratic, so the saddle
  // point stays where it is with or without it.
  const QuadraticSurface shapes[] = {{0.0, 2.5, 0.0, 0.8, -1.1, 120.0},
                                     {1.2, 3.0, -0.7, -2.0, 0.5, 90.0},
                                     {-0.4, 1.0, 0.9, 0.3, 0.25, 110.0},
                                     {2.0, -0.5, -1.5, 1.0, -2.0, 80.0}};
  const cv::Point2d origin(30.37, 29.81);
  for (const QuadraticSurface& q : shapes) {
    const cv::Point2d expected = origin + PublishedSaddlePoint(q);
    const cv::Mat1d image = QuadraticImage(q, origin.x, origin.y, {61, 61});
    for (double smoothing : {0.0, 1.0}) {
      SaddleOptions o;
      o.smoothing_sigma_px = smoothing;
      const SaddleFit fit = RefineSaddlePoint(SmoothForSaddle(image, smoothing), expected + cv::Point2d(0.5, -0.5), o);
      ASSERT_FALSE(fit.failure) << *fit.failure;
      EXPECT_NEAR(fit.point_px.x, expected.x, kExactSaddleTolPx) << "smoothing " << smoothing;
      EXPECT_NEAR(fit.point_px.y, expected.y, kExactSaddleTolPx) << "smoothing " << smoothing;
      // The fitted surface is the one drawn (up to the constant the smoothing adds).
      EXPECT_NEAR(fit.surface.b, q.b, 1e-9);
      EXPECT_NEAR(4 * fit.surface.a * fit.surface.c, 4 * q.a * q.c, 1e-9);
    }
  }
}

TEST(SaddlePoint, APeakOrAFlatSlopeIsAFailureWithItsReason) {
  const cv::Mat1d bowl = QuadraticImage({1.0, 0.0, 1.0, 0.0, 0.0, 10.0}, 30.2, 30.4, {61, 61});
  const SaddleFit on_bowl = RefineSaddlePoint(bowl, {30, 30}, SaddleOptions{});
  ASSERT_TRUE(on_bowl.failure);
  EXPECT_NE(on_bowl.failure->find("no saddle"), std::string::npos) << *on_bowl.failure;
  EXPECT_EQ(on_bowl.point_px, cv::Point2d(30, 30));

  // A slope: the refiner keeps the start point and names the corner.
  const cv::Mat1d slope = QuadraticImage({0.0, 0.0, 0.0, 3.0, 2.0, 100.0}, 30, 30, {61, 61});
  cv::Mat1b slope8;
  slope.convertTo(slope8, CV_8U);
  const RefinedCorners r = RefineCorners(slope8, {{30.3f, 29.6f}}, CornerRefineOptions{});
  ASSERT_EQ(r.corners_px.size(), 1u);
  EXPECT_EQ(r.corners_px[0], cv::Point2f(30.3f, 29.6f));
  ASSERT_EQ(r.fallbacks.size(), 1u);
  EXPECT_EQ(r.fallbacks[0].rfind("corner 0: ", 0), 0u) << r.fallbacks[0];
}

TEST(SaddlePoint, NearTheImageBorderIsAFailure) {
  const cv::Mat1d image = QuadraticImage({0.0, 2.0, 0.0, 0.0, 0.0, 100.0}, 3.0, 30.0, {61, 61});
  const SaddleFit fit = RefineSaddlePoint(image, {3.0, 30.0}, SaddleOptions{});
  ASSERT_TRUE(fit.failure);
  EXPECT_NE(fit.failure->find("leaves the image"), std::string::npos) << *fit.failure;
}

// Model (3) drawn exactly (perpendicular or skewed edges): the X-corner fit, started from the
// saddle fit, returns the corner the image was drawn with. Our own model, so the check is of
// the fit's algebra and Jacobian: only rounding remains.
TEST(XCorner, AnImageThatIsExactlyTheModelGivesItsCorner) {
  const XCornerModel drawn[] = {
      {{30.31, 29.77}, 0.2, 0.2 + 1.5707963, 0.8, 122.0, 87.0},
      {{29.62, 30.48}, -0.6, 0.5, 1.3, 100.0, -70.0},
  };
  for (const XCornerModel& m : drawn) {
    cv::Mat1d image(61, 61);
    for (int v = 0; v < image.rows; ++v) {
      for (int u = 0; u < image.cols; ++u) image(v, u) = XCornerValue(m, u, v);
    }
    SaddleOptions so;
    so.half_window_px = 7;
    const SaddleFit saddle = RefineSaddlePoint(SmoothForSaddle(image, so.smoothing_sigma_px), {30, 30}, so);
    ASSERT_FALSE(saddle.failure) << *saddle.failure;
    XCornerOptions xo;
    xo.half_window_px = 7;
    const XCornerFit fit = FitXCorner(image, saddle, xo);
    ASSERT_FALSE(fit.failure) << *fit.failure;
    EXPECT_NEAR(fit.point_px.x, m.corner_px.x, 1e-6);
    EXPECT_NEAR(fit.point_px.y, m.corner_px.y, 1e-6);
    EXPECT_NEAR(fit.model.sigma_px, m.sigma_px, 1e-5);
    EXPECT_NEAR(fit.model.amplitude * fit.model.amplitude, m.amplitude * m.amplitude, 1e-3);
    EXPECT_LT(fit.rms_grey, 1e-6);
  }
}

// The detection in the truth's order: of the grid's four flips (the detector may number the
// corners from any end), the one closest to the truth.
std::vector<cv::Point2d> InTruthOrder(const std::vector<cv::Point2f>& found, const std::vector<cv::Point2d>& truth,
                                      int columns, int rows) {
  std::vector<cv::Point2d> best;
  double best_sum = INFINITY;
  for (int flip = 0; flip < 4; ++flip) {
    std::vector<cv::Point2d> order(found.size());
    double sum = 0;
    for (int j = 0; j < rows; ++j) {
      for (int i = 0; i < columns; ++i) {
        const int jj = (flip & 1) ? rows - 1 - j : j, ii = (flip & 2) ? columns - 1 - i : i;
        const size_t k = static_cast<size_t>(j * columns + i);
        order[k] = found[static_cast<size_t>(jj * columns + ii)];
        sum += cv::norm(order[k] - truth[k]);
      }
    }
    if (sum < best_sum) {
      best_sum = sum;
      best = order;
    }
  }
  return best;
}

struct CornerErrors {
  double mean_px = 0, worst_px = 0;
  size_t corners = 0;
  size_t fallbacks = 0;
};

// Renders the calibration views of `options` (the `dropfit render` settings) with noise and
// measures DetectBoard's corners against cv::projectPoints of each view's exact board pose.
CornerErrors MeasureRenderedCorners(const synth::RenderOptions& options, int lens_views, uint64_t seed) {
  const synth::RenderPlan plan = synth::MakePlan(options);
  const synth::PinholeCamera camera = synth::MakeCamera(plan.camera_setup);
  const synth::SceneRenderer renderer(camera, plan.wheel, synth::SceneLook{});
  const synth::CameraIntrinsics& k = camera.intrinsics;
  const cv::Matx33d camera_matrix(k.fx_px, 0, k.cx_px, 0, k.fy_px, k.cy_px, 0, 0, 1);
  const std::vector<double> distortion{k.k1, k.k2, k.p1, k.p2, k.k3};
  const BoardSpec board{plan.board.inner_cols, plan.board.inner_rows, plan.board.square_m};
  std::vector<cv::Point3d> board_points;
  for (int j = 0; j < board.rows; ++j) {
    for (int i = 0; i < board.columns; ++i) board_points.emplace_back(i * board.square_m, j * board.square_m, 0.0);
  }
  CornerErrors e;
  for (const synth::CalibrationImage& view :
       synth::RenderCalibrationImages(renderer, plan.board, lens_views, plan.exposure, true, seed)) {
    std::vector<cv::Point2d> truth;
    cv::projectPoints(board_points, view.board_rvec_rad, view.board_tvec_m, camera_matrix, distortion, truth);
    const BoardDetection d = DetectBoard(view.image, board);
    EXPECT_TRUE(d.found) << view.name;
    if (!d.found) continue;
    e.fallbacks += d.refine_fallbacks.size();
    const std::vector<cv::Point2d> found = InTruthOrder(d.corners_px, truth, board.columns, board.rows);
    for (size_t i = 0; i < truth.size(); ++i) {
      const double err = cv::norm(found[i] - truth[i]);
      e.mean_px += err;
      e.worst_px = std::max(e.worst_px, err);
      ++e.corners;
    }
  }
  if (e.corners) e.mean_px /= static_cast<double>(e.corners);
  return e;
}

TEST(RefinedCorners, OfTheReferenceRendersLieWhereProjectPointsPutsTheBoardCorners) {
  // The `dropfit render` defaults (issue 14's reference conditions): 800x640, 1.0 mm/px,
  // 9x6 board of 50 mm squares, read noise 2 grey levels plus shot noise, lens blur 0.5 px.
  const CornerErrors e = MeasureRenderedCorners(synth::RenderOptions{}, 3, 77);
  EXPECT_EQ(e.corners, 4u * 54u);
  EXPECT_EQ(e.fallbacks, 0u);
  EXPECT_LT(e.mean_px, kRenderedMeanTolPx);
  EXPECT_LT(e.worst_px, kRenderedWorstTolPx);
  std::cout << "reference renders: mean " << e.mean_px << " px, worst " << e.worst_px << " px over " << e.corners
            << " corners\n";
}

TEST(RefinedCorners, OfARigAtOnePointTwoMillimetresPerPixelLieWhereProjectPointsPutsThem) {
  // The camera at 1.44 m (1.2 mm/px in the drop plane) and a 9x6 board of 25 mm squares: the
  // plane view's squares are ~21 px, so the refinement window shrinks to 8 px.
  synth::RenderOptions options;
  options.camera_distance_m = 1.44;
  options.square_m = 0.025;
  const CornerErrors e = MeasureRenderedCorners(options, 1, 78);
  EXPECT_EQ(e.corners, 2u * 54u);
  EXPECT_EQ(e.fallbacks, 0u);
  EXPECT_LT(e.mean_px, kRenderedMeanTolPx);
  EXPECT_LT(e.worst_px, kRenderedWorstTolPx);
  std::cout << "1.2 mm/px rig: mean " << e.mean_px << " px, worst " << e.worst_px << " px over " << e.corners
            << " corners\n";
}

TEST(SaddleHalfWindow, StaysInsideTheFourSquaresAroundEveryCorner) {
  const BoardSpec board{4, 3, 0.02};
  // A square grid of 20 px: 0.4 x 20 = 8 px, under the cap of 9.
  std::vector<cv::Point2f> square, sheared;
  for (int j = 0; j < board.rows; ++j) {
    for (int i = 0; i < board.columns; ++i) {
      square.emplace_back(100.f + 20.f * static_cast<float>(i), 100.f + 20.f * static_cast<float>(j));
      // Rows 20 px apart along x but shifted 15 px per row: the quads' height across the rows
      // stays 20 px, the height across the columns is 20 x 20 / 25 = 16 px, so 0.4 x 16 = 6.4.
      sheared.emplace_back(100.f + 20.f * static_cast<float>(i) + 15.f * static_cast<float>(j),
                           100.f + 20.f * static_cast<float>(j));
    }
  }
  EXPECT_EQ(SaddleHalfWindowPx(square, board, 9), 8);
  EXPECT_EQ(SaddleHalfWindowPx(square, board, 5), 5);
  EXPECT_EQ(SaddleHalfWindowPx(sheared, board, 9), 6);
  EXPECT_THROW(SaddleHalfWindowPx(std::vector<cv::Point2f>(5), board, 9), std::invalid_argument);
}

TEST(CornerRefineOptions, OutOfRangeFieldsAreNamed) {
  CornerRefineOptions o;
  EXPECT_FALSE(ValidateCornerRefineOptions(o));
  o.saddle.half_window_px = 1;
  EXPECT_EQ(*ValidateCornerRefineOptions(o), "saddle.half_window_px = 1 is out of range (2..30 px)");
  o = CornerRefineOptions{};
  o.xcorner.max_shift_px = 0;
  EXPECT_EQ(*ValidateCornerRefineOptions(o), "xcorner.max_shift_px = 0 is out of range (> 0 px)");
  o = CornerRefineOptions{};
  o.saddle.smoothing_sigma_px = -1;
  EXPECT_THROW(RefineCorners(cv::Mat1b(20, 20, uchar(0)), {}, o), std::invalid_argument);
}

}  // namespace
}  // namespace dropfit::calib
