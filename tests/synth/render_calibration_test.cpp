// Calibration images (synth/render_calibration.h), checked with OpenCV's own checkerboard
// detector and calibration (cv::findChessboardCorners, cv::cornerSubPix, cv::calibrateCamera:
// Zhang 2000, "A flexible new technique for camera calibration", IEEE TPAMI 22(11)) as the
// outside reference.
#include "synth/render_calibration.h"

#include <opencv2/calib3d.hpp>
#include <opencv2/imgproc.hpp>

#include <gtest/gtest.h>

namespace dropfit::synth {
namespace {

// cornerSubPix on a synthetic X-corner: ~0.020 px RMS noise-free and 0.081 px with 5 grey
// levels of noise (docs/methods.md §9, own simulation table). Our images carry read
// noise 2 plus shot noise (~3.6 on white): s.d. ~4, so 0.1 px.
constexpr double kCornerRmsPx = 0.1;
// With ~0.04 px corner noise over 9 views, the focal length comes back to ~0.1 %; 0.5 % is safe.
constexpr double kFocalRelTolerance = 0.005;
// k1 is correlated with k2 in the fit; 0.02 absolute still tells -0.07 from 0 or -0.14.
constexpr double kK1Tolerance = 0.02;

std::vector<cv::Point2f> Detect(const cv::Mat1b& image, const CheckerboardSpec& board) {
  std::vector<cv::Point2f> corners;
  const bool found = cv::findChessboardCorners(image, {board.inner_cols, board.inner_rows}, corners,
                                               cv::CALIB_CB_ADAPTIVE_THRESH | cv::CALIB_CB_NORMALIZE_IMAGE);
  if (!found) return {};
  cv::cornerSubPix(image, corners, {5, 5}, {-1, -1},
                   cv::TermCriteria(cv::TermCriteria::EPS | cv::TermCriteria::COUNT, 100, 1e-4));
  return corners;
}

double CornerRms(const std::vector<cv::Point2f>& corners, const std::vector<cv::Point2d>& truth) {
  // The detector may number the corners from either end: match each to the nearest truth.
  double sum2 = 0;
  for (const cv::Point2f& c : corners) {
    double best = 1e9;
    for (const cv::Point2d& t : truth) best = std::min(best, cv::norm(cv::Point2d(c) - t));
    sum2 += best * best;
  }
  return std::sqrt(sum2 / static_cast<double>(corners.size()));
}

// Where a noise-free, unblurred image draws a straight edge between two dark-light levels: the
// sum of the normalised profile across it (the edge's area coverage; common practice, no
// source), taken along image columns for near-horizontal edges and rows for near-vertical ones.
// Independent of the renderer: it only reads pixels. 8-bit rounding leaves ~0.005 px.
constexpr double kEdgeTolerancePx = 0.02;

TEST(RenderCalibration, NoiseFreeBoardEdgesAreDrawnWhereTheBoardGeometryPutsThem) {
  const PinholeCamera camera = MakeCamera(CameraSetup{});
  const SceneRenderer scene(camera, WheelLook{}, SceneLook{});
  const CheckerboardSpec board;
  ExposureSettings clean;
  clean.vignetting_fraction = 0;
  clean.flicker_fraction = 0;
  clean.psf_sigma_px = 0;
  int checked = 0;
  for (const CalibrationImage& view : RenderCalibrationImages(scene, board, 4, clean, false, 5)) {
    const auto& c = view.inner_corners_px;
    for (int j = 0; j < board.inner_rows; ++j) {
      for (int i = 0; i < board.inner_cols; ++i) {
        const cv::Point2d a = c[j * board.inner_cols + i];
        // The edge towards the next corner along the row and along the column.
        for (int dir = 0; dir < 2; ++dir) {
          const int i2 = i + (dir == 0), j2 = j + (dir == 1);
          if (i2 >= board.inner_cols || j2 >= board.inner_rows) continue;
          const cv::Point2d b = c[j2 * board.inner_cols + i2];
          const cv::Point2d m = 0.5 * (a + b);
          const bool horizontal = std::abs(b.x - a.x) > std::abs(b.y - a.y);
          const int half = 6;
          double sum = 0, first = 0, last = 0, truth = 0, start = 0;
          if (horizontal) {
            const int u = static_cast<int>(std::lround(m.x));
            truth = a.y + (u - a.x) / (b.x - a.x) * (b.y - a.y);
            const int v0 = static_cast<int>(std::lround(truth)) - half, v1 = v0 + 2 * half;
            first = view.image(v0, u);
            last = view.image(v1, u);
            for (int v = v0; v <= v1; ++v) sum += (view.image(v, u) - last) / (first - last);
            start = v0 - 0.5;
          } else {
            const int v = static_cast<int>(std::lround(m.y));
            truth = a.x + (v - a.y) / (b.y - a.y) * (b.x - a.x);
            const int u0 = static_cast<int>(std::lround(truth)) - half, u1 = u0 + 2 * half;
            first = view.image(v, u0);
            last = view.image(v, u1);
            for (int u = u0; u <= u1; ++u) sum += (view.image(v, u) - last) / (first - last);
            start = u0 - 0.5;
          }
          ASSERT_GT(std::abs(first - last), 100.0) << view.name;
          EXPECT_NEAR(start + sum, truth, kEdgeTolerancePx) << view.name << " corner " << i << "," << j;
          ++checked;
        }
      }
    }
  }
  EXPECT_GT(checked, 300);
}

TEST(RenderCalibration, EveryViewIsDetectedAtTheTrueCornersAndCalibratesTheLens) {
  const PinholeCamera camera = MakeCamera(CameraSetup{});
  const SceneRenderer scene(camera, WheelLook{}, SceneLook{});
  const CheckerboardSpec board;
  const auto images = RenderCalibrationImages(scene, board, 9, ExposureSettings{}, true, 5);
  ASSERT_EQ(images.size(), 10u);
  EXPECT_TRUE(images.back().drop_plane);
  std::vector<std::vector<cv::Point3f>> object;
  std::vector<std::vector<cv::Point2f>> detected;
  for (const CalibrationImage& view : images) {
    const auto corners = Detect(view.image, board);
    ASSERT_EQ(corners.size(), static_cast<size_t>(board.inner_cols * board.inner_rows)) << view.name;
    EXPECT_LT(CornerRms(corners, view.inner_corners_px), kCornerRmsPx) << view.name;
    // Object points in the order of the true corners nearest to each detection.
    std::vector<cv::Point3f> obj;
    for (const cv::Point2f& c : corners) {
      size_t best_k = 0;
      double best = 1e9;
      for (size_t k = 0; k < view.inner_corners_px.size(); ++k) {
        const double d = cv::norm(cv::Point2d(c) - view.inner_corners_px[k]);
        if (d < best) best = d, best_k = k;
      }
      obj.emplace_back(static_cast<float>((best_k % board.inner_cols) * board.square_m),
                       static_cast<float>((best_k / board.inner_cols) * board.square_m), 0.0f);
    }
    object.push_back(obj);
    detected.push_back(corners);
  }
  cv::Mat k, dist;
  std::vector<cv::Mat> rvecs, tvecs;
  const double rms =
      cv::calibrateCamera(object, detected, camera.intrinsics.image_size, k, dist, rvecs, tvecs, cv::CALIB_FIX_K3);
  EXPECT_LT(rms, kCornerRmsPx);
  EXPECT_NEAR(k.at<double>(0, 0), camera.intrinsics.fx_px, kFocalRelTolerance * camera.intrinsics.fx_px);
  EXPECT_NEAR(dist.at<double>(0), camera.intrinsics.k1, kK1Tolerance);
}

TEST(RenderCalibration, PlaneViewCornersSitAtTheirHeightAboveTheFloor) {
  const PinholeCamera camera = MakeCamera(CameraSetup{});
  const SceneRenderer scene(camera, WheelLook{}, SceneLook{});
  CheckerboardSpec board;
  board.square_m = 0.04;
  const auto images = RenderCalibrationImages(scene, board, 1, ExposureSettings{}, false, 1);
  const CalibrationImage& plane = images.back();
  ASSERT_TRUE(plane.drop_plane);
  EXPECT_DOUBLE_EQ(PlaneBoardCornerHeight(board), 0.08);
  const calib::Rig rig = RigFromCamera(camera, PlaneBoardCornerHeight(board), std::nullopt);
  for (int j = 0; j < board.inner_rows; ++j) {
    for (int i = 0; i < board.inner_cols; ++i) {
      const cv::Point2d p = calib::PlaneFromImage(rig, plane.inner_corners_px[j * board.inner_cols + i]);
      EXPECT_NEAR(p.x, i * board.square_m, 1e-8);
      EXPECT_NEAR(p.y, PlaneBoardCornerHeight(board) + j * board.square_m, 1e-8);
    }
  }
  EXPECT_EQ(Detect(plane.image, board).size(), static_cast<size_t>(board.inner_cols * board.inner_rows));
}

TEST(RenderCalibration, SquareBoardIsRejectedAsAmbiguous) {
  CheckerboardSpec board;
  board.inner_rows = 9;
  ASSERT_TRUE(ValidateCheckerboard(board).has_value());
  EXPECT_NE(ValidateCheckerboard(board)->find("orientation is ambiguous"), std::string::npos);
}

}  // namespace
}  // namespace dropfit::synth
