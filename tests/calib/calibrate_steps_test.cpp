// Tests of the calibration's steps (calib/calibrate_steps.h) on exact synthetic corners.
//
// Reference for the camera maths: OpenCV 4.6's own projection, cv::projectPoints (pinhole camera
// with OpenCV's distortion model), which makes the corners; the steps must give back the camera,
// the board's axes and the plane's scale that went in. Whole images are tested in
// calibrate_test.cpp.
#include "calib/calibrate_steps.h"

#include <gtest/gtest.h>
#include <opencv2/calib3d.hpp>

#include <cmath>
#include <random>
#include <stdexcept>
#include <string>
#include <vector>

#include "tests/support/synthetic_board.h"

namespace dropfit::calib {
namespace {

using test::PoseLookingAt;
using test::SyntheticCamera;

constexpr double kPi = 3.14159265358979323846;
// Corner detection noise added to the lens views [px s.d. per coordinate]: what cornerSubPix
// reaches on sharp synthetic views (calibrate_test.cpp, about 0.03 px), rounded up.
constexpr double kCornerNoisePx = 0.05;
// Overall RMS of a fit to such corners: sqrt(2) x 0.05 = 0.07 px for the distance, plus margin.
constexpr double kCleanFitRmsPx = 0.1;
// Focal length from 7-8 views with 0.05 px corner noise: the 0.5 % acceptance figure.
constexpr double kFocalTolFraction = 0.005;
// A mis-detected view: every other corner moved by this much along x [px], far above the noise.
constexpr double kCornerShiftPx = 1.5;
// The homography of an exact board in an undistorted image: only the float corners' rounding
// (about 3e-5 px at 1000 px) and the fit's tolerance remain.
constexpr double kExactHomographyRmsPx = 1e-3;
// Square sizes measured back on an exact board [mm]: float corners and undistortion to 1e-12
// leave far below a micrometre; 1e-4 mm is a hundred times the rounding.
constexpr double kExactSquareErrorMm = 1e-4;
// Relative error of scale and area on an exact board: float corner rounding (1e-7 relative).
constexpr double kExactRelativeTol = 1e-6;
// Angles of exact axes: the float corners' rounding only [deg].
constexpr double kExactAngleTolDeg = 1e-3;
// Board coordinates are float (BoardPoints3d, as cv::calibrateCamera takes them): 0.2 m carries
// about 3e-9 m of rounding [m].
constexpr double kFloatBoardTolM = 1e-8;
// Image rows of exact corners: float rounding at a few hundred pixels, 3e-5 px, rounded up [px].
constexpr double kFloatCornerTolPx = 1e-3;
// An angle from a 3x3 rotation and acos in double [deg].
constexpr double kDoubleAngleTolDeg = 1e-9;

const BoardSpec kBoard{9, 6, 0.025};

// Corners of the board at pose (rvec, tvec), as cv::projectPoints gives them.
std::vector<cv::Point2f> ProjectCorners(const SyntheticCamera& cam, const BoardSpec& board, const cv::Vec3d& rvec,
                                        const cv::Vec3d& tvec) {
  std::vector<cv::Point2f> corners;
  cv::projectPoints(BoardPoints3d(board), rvec, tvec, cam.camera_matrix, cam.distortion, corners);
  return corners;
}

// Eight lens views (the first one stands for the plane view): positions over the frame and tilts
// of 20-35 degrees about both axes (Zhang 2000, section 3.3: parallel views leave the focal
// length undetermined). Each row: centre pixel (u, v), depth [m], tilt x, tilt y, roll [rad].
struct LensViews {
  std::vector<std::string> names;
  std::vector<std::vector<cv::Point2f>> corners_px;
};
LensViews MakeLensViews(const SyntheticCamera& cam, uint64_t seed) {
  const double poses[][6] = {{560, 430, 0.70, 0.03, -0.05, 0.0},  {300, 230, 0.50, 0.45, -0.35, 0.1},
                             {720, 230, 0.50, 0.45, 0.35, -0.1},  {300, 540, 0.50, -0.45, -0.35, -0.05},
                             {720, 540, 0.50, -0.45, 0.35, 0.05}, {512, 384, 0.45, 0.0, 0.6, 0.0},
                             {512, 384, 0.45, 0.6, 0.0, 0.0},     {512, 384, 0.55, 0.25, 0.25, 1.5707963}};
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> noise(0.0, kCornerNoisePx);
  LensViews views;
  for (const auto& p : poses) {
    cv::Vec3d rvec, tvec;
    PoseLookingAt(cam, kBoard, p[0], p[1], p[2], p[3], p[4], p[5], rvec, tvec);
    std::vector<cv::Point2f> corners = ProjectCorners(cam, kBoard, rvec, tvec);
    for (cv::Point2f& c : corners) c += cv::Point2f(static_cast<float>(noise(rng)), static_cast<float>(noise(rng)));
    views.names.push_back("view_" + std::to_string(views.names.size()));
    views.corners_px.push_back(std::move(corners));
  }
  return views;
}

// Moves every other corner of a view by kCornerShiftPx along x: no board pose explains that.
void ShiftEveryOtherCorner(std::vector<cv::Point2f>& corners) {
  for (size_t i = 0; i < corners.size(); i += 2) corners[i].x += static_cast<float>(kCornerShiftPx);
}

// --- Step 2: the lens fit with outlier-view removal. The rule (a view far above the median is
// left out, one at a time) is common practice, no source; the camera is cv::projectPoints'.

TEST(FitLensWithoutOutliers, LeavesOutAViewWhoseCornersWereShiftedAndNamesIt) {
  const SyntheticCamera cam;
  LensViews views = MakeLensViews(cam, 7);
  ShiftEveryOtherCorner(views.corners_px[4]);
  const LensFitWithoutOutliers lens = FitLensWithoutOutliers(views.names, views.corners_px, kBoard, cam.size, 3.0, 0.2);
  ASSERT_EQ(lens.dropped.size(), 1u);
  EXPECT_EQ(lens.dropped[0].rfind("view_4: RMS ", 0), 0u) << lens.dropped[0];
  ASSERT_EQ(lens.warnings.size(), 1u);
  EXPECT_EQ(lens.warnings[0].rfind("view view_4 left out: its RMS reprojection error ", 0), 0u) << lens.warnings[0];
  EXPECT_EQ(lens.names,
            (std::vector<std::string>{"view_0", "view_1", "view_2", "view_3", "view_5", "view_6", "view_7"}));
  EXPECT_EQ(lens.corners_px.size(), 7u);
  EXPECT_EQ(lens.fit.view_rms_px.size(), 7u);
  EXPECT_LT(lens.fit.rms_px, kCleanFitRmsPx);
  EXPECT_NEAR(lens.fit.camera_matrix(0, 0), cam.camera_matrix(0, 0), kFocalTolFraction * cam.camera_matrix(0, 0));
  EXPECT_NEAR(lens.fit.camera_matrix(1, 1), cam.camera_matrix(1, 1), kFocalTolFraction * cam.camera_matrix(1, 1));
}

TEST(FitLensWithoutOutliers, KeepsEveryViewWhenAllFitAlike) {
  const SyntheticCamera cam;
  const LensViews views = MakeLensViews(cam, 8);
  const LensFitWithoutOutliers lens = FitLensWithoutOutliers(views.names, views.corners_px, kBoard, cam.size, 3.0, 0.2);
  EXPECT_TRUE(lens.dropped.empty());
  EXPECT_TRUE(lens.warnings.empty());
  EXPECT_EQ(lens.names, views.names);
  EXPECT_LT(lens.fit.rms_px, kCleanFitRmsPx);
}

TEST(FitLensWithoutOutliers, NeverLeavesOutThePlaneViewButWarnsWhenItFitsBadly) {
  const SyntheticCamera cam;
  LensViews views = MakeLensViews(cam, 9);
  ShiftEveryOtherCorner(views.corners_px[0]);
  const LensFitWithoutOutliers lens = FitLensWithoutOutliers(views.names, views.corners_px, kBoard, cam.size, 3.0, 0.2);
  EXPECT_TRUE(lens.dropped.empty());
  EXPECT_EQ(lens.names, views.names);
  ASSERT_EQ(lens.warnings.size(), 1u);
  EXPECT_EQ(lens.warnings[0].rfind("the plane view view_0 fits the lens model worse than the other views", 0), 0u)
      << lens.warnings[0];
}

TEST(FitLensWithoutOutliers, FewerThanThreeViewsAreRefusedNamingTheCounts) {
  const SyntheticCamera cam;
  const LensViews views = MakeLensViews(cam, 10);
  try {
    FitLensWithoutOutliers({"a", "b"}, {views.corners_px[0], views.corners_px[1]}, kBoard, cam.size, 3.0, 0.2);
    FAIL() << "no exception";
  } catch (const std::invalid_argument& e) {
    EXPECT_EQ(std::string(e.what()),
              "FitLensWithoutOutliers needs at least 3 views with one name each; got 2 names and 2 corner sets");
  }
}

// --- Step 3: the plane view. Expected axes follow from the rotation that made the view
// (rvec = R_x R_y R_z(roll), tests/support/synthetic_board.h): common practice, no source.

// The plane view of a board parallel to the image, turned in its plane by `roll_rad`, through a
// camera without distortion (so undistorted pixels are the pixels).
struct ExactPlaneView {
  SyntheticCamera cam;
  std::vector<cv::Point2f> corners_px;
  PlaneHomography homography;
};
ExactPlaneView MakeExactPlaneView(double roll_rad, double depth_m) {
  ExactPlaneView view;
  view.cam.camera_matrix = cv::Matx33d(1000, 0, 511.5, 0, 1000, 383.5, 0, 0, 1);
  view.cam.distortion.assign(5, 0.0);
  cv::Vec3d rvec, tvec;
  PoseLookingAt(view.cam, kBoard, 511.5, 383.5, depth_m, 0.0, 0.0, roll_rad, rvec, tvec);
  view.corners_px = ProjectCorners(view.cam, kBoard, rvec, tvec);
  const std::optional<PlaneHomography> h = FitPlaneHomography(view.corners_px, kBoard, std::nullopt);
  EXPECT_TRUE(h);
  if (h) view.homography = *h;
  return view;
}

TEST(FindBoardAxes, AnUprightBoardTakesUpFromMinusYAndXFromPlusX) {
  const ExactPlaneView view = MakeExactPlaneView(0.0, 0.5);
  EXPECT_LT(view.homography.rms_px, kExactHomographyRmsPx);
  const BoardAxes axes = FindBoardAxes(view.homography.undistorted_from_board, kBoard, UpSide::kTop);
  // Board +Y runs down the image (row j grows with v), so up is -Y; +X runs right.
  EXPECT_EQ(axes.up_board, cv::Vec2d(0, -1));
  EXPECT_EQ(axes.x_board, cv::Vec2d(1, 0));
  EXPECT_NEAR(axes.off_up_deg, 0.0, kExactAngleTolDeg);
}

TEST(FindBoardAxes, ABoardTurnedNinetyDegreesTakesUpFromTheAxisPointingToTheNamedSide) {
  const ExactPlaneView view = MakeExactPlaneView(kPi / 2, 0.5);
  // Roll +90 degrees: board +X runs down the image and +Y to the left.
  const BoardAxes top = FindBoardAxes(view.homography.undistorted_from_board, kBoard, UpSide::kTop);
  EXPECT_EQ(top.up_board, cv::Vec2d(-1, 0));  // -X points to the image's top
  EXPECT_EQ(top.x_board, cv::Vec2d(0, -1));   // -Y points right
  EXPECT_NEAR(top.off_up_deg, 0.0, kExactAngleTolDeg);
  // The same view with the camera turned so that physical up is the image's right side.
  const BoardAxes right = FindBoardAxes(view.homography.undistorted_from_board, kBoard, UpSide::kRight);
  EXPECT_EQ(right.up_board, cv::Vec2d(0, -1));  // -Y points right
  EXPECT_EQ(right.x_board, cv::Vec2d(1, 0));    // +X points down: "right" when right is up
  EXPECT_NEAR(right.off_up_deg, 0.0, kExactAngleTolDeg);
}

TEST(PlaceOrigin, PutsTheLowestCornerRowAtTheFloorHeightAndTheLeftmostColumnAtZero) {
  const ExactPlaneView view = MakeExactPlaneView(kPi / 2, 0.5);
  const BoardAxes axes = FindBoardAxes(view.homography.undistorted_from_board, kBoard, UpSide::kTop);
  constexpr double kCornerHeightM = 0.07;
  const PlaneOrigin origin = PlaceOrigin(view.corners_px, kBoard, axes, kCornerHeightM);
  // Up is -X: the lowest row is the board's last column (X = 8 squares); leftmost is Y = 5 squares.
  const cv::Vec3d lowest_left = origin.plane_from_board * cv::Vec3d(8 * kBoard.square_m, 5 * kBoard.square_m, 1);
  EXPECT_NEAR(lowest_left[0], 0.0, kFloatBoardTolM);
  EXPECT_NEAR(lowest_left[1], kCornerHeightM, kFloatBoardTolM);
  const cv::Vec3d top_right = origin.plane_from_board * cv::Vec3d(0, 0, 1);
  EXPECT_NEAR(top_right[0], 5 * kBoard.square_m, kFloatBoardTolM);
  EXPECT_NEAR(top_right[1], kCornerHeightM + 8 * kBoard.square_m, kFloatBoardTolM);
  // The lowest row's image row: the projected corners of column 8 (all on one image row here).
  const size_t last_column = static_cast<size_t>(kBoard.columns) - 1;
  EXPECT_NEAR(origin.lowest_corner_row_px, view.corners_px[last_column].y, kFloatCornerTolPx);
}

// --- Step 4: quality figures. A fronto-parallel board at depth z through a camera of focal
// length f has a scale of z / f metres per pixel everywhere (pinhole projection u = f X / z + cx,
// as cv::projectPoints computes it; common practice, no source).

// A rig made as Calibrate makes it from the plane view alone (steps 3 and no lens).
Rig RigFromPlaneView(const ExactPlaneView& view) {
  Rig rig;
  rig.image_size = view.cam.size;
  const BoardAxes axes = FindBoardAxes(view.homography.undistorted_from_board, kBoard, UpSide::kTop);
  const PlaneOrigin origin = PlaceOrigin(view.corners_px, kBoard, axes, std::nullopt);
  rig.plane_from_undistorted = origin.plane_from_board * view.homography.undistorted_from_board.inv();
  rig.plane_from_undistorted *= 1.0 / rig.plane_from_undistorted(2, 2);
  return rig;
}

TEST(MeasurePlaneView, AnExactFrontoParallelBoardHasNoSquareErrorAndTheScaleDepthOverFocalLength) {
  constexpr double kDepthM = 0.5;
  const ExactPlaneView view = MakeExactPlaneView(0.0, kDepthM);
  const PlaneViewFigures figures = MeasurePlaneView(RigFromPlaneView(view), view.corners_px, kBoard);
  EXPECT_LT(figures.square_error_mean_mm, kExactSquareErrorMm);
  EXPECT_LT(figures.square_error_max_mm, kExactSquareErrorMm);
  const double f_px = view.cam.camera_matrix(0, 0);
  EXPECT_NEAR(figures.metres_per_px_centre, kDepthM / f_px, kExactRelativeTol * kDepthM / f_px);
  // The outer quad spans 8 x 5 squares, each square_m * f / z pixels wide.
  const double square_px = kBoard.square_m * f_px / kDepthM;
  const double expected = (8 * square_px) * (5 * square_px) / (view.cam.size.width * view.cam.size.height);
  EXPECT_NEAR(figures.board_coverage_fraction, expected, kExactRelativeTol * expected);
}

TEST(MeasurePlaneView, AnExactBoardSeenThroughTheTrueDistortingLensHasNoSquareError) {
  const SyntheticCamera cam;  // k1 = -0.15, k2 = 0.09 and tangential terms
  cv::Vec3d rvec, tvec;
  PoseLookingAt(cam, kBoard, 560, 430, 0.70, 0.03, -0.05, 0.0, rvec, tvec);
  const std::vector<cv::Point2f> corners = ProjectCorners(cam, kBoard, rvec, tvec);
  Rig rig;
  rig.image_size = cam.size;
  rig.lens = LensModel{cam.camera_matrix, cam.distortion};
  const std::optional<PlaneHomography> h = FitPlaneHomography(corners, kBoard, rig.lens);
  ASSERT_TRUE(h);
  EXPECT_LT(h->rms_px, kExactHomographyRmsPx);
  const BoardAxes axes = FindBoardAxes(h->undistorted_from_board, kBoard, UpSide::kTop);
  const PlaneOrigin origin = PlaceOrigin(corners, kBoard, axes, std::nullopt);
  rig.plane_from_undistorted = origin.plane_from_board * h->undistorted_from_board.inv();
  rig.plane_from_undistorted *= 1.0 / rig.plane_from_undistorted(2, 2);
  const PlaneViewFigures figures = MeasurePlaneView(rig, corners, kBoard);
  EXPECT_LT(figures.square_error_mean_mm, kExactSquareErrorMm);
  EXPECT_LT(figures.square_error_max_mm, kExactSquareErrorMm);
}

TEST(TiltSpreadDeg, IsTheLargestAngleBetweenTheViewsBoardNormals) {
  // Normals of boards tilted by 0, 20 and -15 degrees about x: largest pair 35 degrees
  // (the rotation angle of R_x; common practice, no source).
  std::vector<cv::Mat> rvecs;
  for (double deg : {0.0, 20.0, -15.0}) rvecs.push_back((cv::Mat_<double>(3, 1) << deg * kPi / 180, 0, 0));
  EXPECT_NEAR(TiltSpreadDeg(rvecs), 35.0, kDoubleAngleTolDeg);
}

}  // namespace
}  // namespace dropfit::calib
