// Tests of the rig's pixel <-> plane mapping. Reference library: OpenCV 4.6 (cv::projectPoints
// for the forward camera model, cv::findHomography-free construction from a known pose).
#include "calib/rig.h"

#include <gtest/gtest.h>
#include <opencv2/calib3d.hpp>

#include <cmath>

namespace dropfit::calib {
namespace {

// A camera 1.5 m in front of the drop plane, tilted by a few degrees, with barrel distortion.
Rig MakeTiltedRig() {
  Rig rig;
  rig.image_size = {800, 640};
  LensModel lens;
  lens.camera_matrix = cv::Matx33d(1500, 0, 402.3, 0, 1500, 318.7, 0, 0, 1);
  lens.distortion = {-0.07, 0.01, 0.0004, -0.0003, 0.0};
  rig.lens = lens;
  // Plane (board) frame: X right, Y down in the board, Z into the scene. Pose with small tilt.
  const cv::Vec3d rvec(0.03, -0.02, 0.01), tvec(-0.2, -0.15, 1.5);
  cv::Matx33d r;
  cv::Rodrigues(rvec, r);
  // image ~ K [r1 r2 t] [X Y 1]^T for board points with Z = 0; world y_m up = -Y.
  cv::Matx33d image_from_board(r(0, 0), r(0, 1), tvec[0], r(1, 0), r(1, 1), tvec[1], r(2, 0), r(2, 1), tvec[2]);
  const cv::Matx33d board_from_world(1, 0, 0, 0, -1, 0, 0, 0, 1);
  const cv::Matx33d image_from_plane = lens.camera_matrix * image_from_board * board_from_world;
  rig.plane_from_undistorted = image_from_plane.inv();
  rig.plane_rvec_rad = rvec;
  rig.plane_tvec_m = tvec;
  return rig;
}

// Round-trip tolerance: undistortion iterates to 1e-12, so 1e-6 px is ample.
constexpr double kRoundTripTolPx = 1e-6;
// OpenCV's projectPoints and our mapping compute the same thing in double precision.
constexpr double kProjectionTolPx = 1e-7;

TEST(Rig, PlaneFromImageInvertsImageFromPlane) {
  const Rig rig = MakeTiltedRig();
  for (double u : {5.0, 200.0, 402.0, 790.0}) {
    for (double v : {3.0, 320.0, 636.0}) {
      const cv::Point2d plane = PlaneFromImage(rig, {u, v});
      const cv::Point2d back = ImageFromPlane(rig, plane);
      EXPECT_NEAR(back.x, u, kRoundTripTolPx);
      EXPECT_NEAR(back.y, v, kRoundTripTolPx);
    }
  }
}

TEST(Rig, ImageFromPlaneMatchesOpenCvProjectPoints) {
  const Rig rig = MakeTiltedRig();
  for (double x : {-0.1, 0.0, 0.25}) {
    for (double y : {-0.2, 0.05, 0.3}) {
      // Board frame has Y down: y_m up maps to Y = -y_m.
      std::vector<cv::Point3d> obj{{x, -y, 0.0}};
      std::vector<cv::Point2d> ref;
      cv::projectPoints(obj, *rig.plane_rvec_rad, *rig.plane_tvec_m, rig.lens->camera_matrix, rig.lens->distortion,
                        ref);
      const cv::Point2d ours = ImageFromPlane(rig, {x, y});
      EXPECT_NEAR(ours.x, ref[0].x, kProjectionTolPx);
      EXPECT_NEAR(ours.y, ref[0].y, kProjectionTolPx);
    }
  }
}

TEST(Rig, UpDirectionPointsTowardTheTopOfTheImage) {
  const Rig rig = MakeTiltedRig();
  const cv::Vec2d up = ImageUpDirection(rig, {400, 320});
  EXPECT_LT(up[1], -0.99);
}

TEST(Rig, ValidationNamesANonInvertibleMapping) {
  Rig rig = MakeTiltedRig();
  rig.plane_from_undistorted = cv::Matx33d::zeros();
  EXPECT_EQ(ValidateRig(rig).value_or(""), "the plane mapping is not invertible (determinant 0)");
  rig.plane_from_undistorted(0, 0) = std::nan("");
  EXPECT_EQ(ValidateRig(rig).value_or(""), "the plane mapping holds a non-finite number");
}

TEST(Rig, UnknownUpSideIsRejectedWithTheValidList) {
  try {
    UpSideFromString("upward");
    FAIL() << "no exception";
  } catch (const std::invalid_argument& e) {
    EXPECT_STREQ(e.what(), "unknown up side 'upward'; valid: top, bottom, left, right");
  }
  EXPECT_EQ(UpSideFromString("left"), UpSide::kLeft);
  EXPECT_EQ(ToString(UpSide::kBottom), "bottom");
}

// --- The marker's plane (calib/rig.h, docs/methods.md §19) ---------------------------------

// Points on the parallel plane `offset_m` in front of the calibrated plane, projected by OpenCV's
// cv::projectPoints (the reference), come back through MarkerPlaneFromImage as the plane point
// they were made from. The board frame of MakeTiltedRig has Z into the scene, so "toward the
// camera" is Z = -offset_m; the plane point (x_m, y_m) is (x_m, -y_m) in that frame.
// Tolerance: the undistortion converges to about 1e-12 px and 1 px is about 1 mm here.
constexpr double kOffsetPlaneTolM = 1e-8;

TEST(MarkerPlane, PointsOnTheOffsetPlaneProjectedByOpenCvMapBackExactly) {
  const Rig rig = MakeTiltedRig();
  for (double offset_m : {0.03, -0.02, 0.4}) {
    for (double x : {-0.1, 0.0, 0.25}) {
      for (double y : {-0.2, 0.05, 0.3}) {
        std::vector<cv::Point3d> obj{{x, -y, -offset_m}};
        std::vector<cv::Point2d> px;
        cv::projectPoints(obj, *rig.plane_rvec_rad, *rig.plane_tvec_m, rig.lens->camera_matrix, rig.lens->distortion,
                          px);
        const cv::Point2d back = MarkerPlaneFromImage(rig, px[0], offset_m);
        EXPECT_NEAR(back.x, x, kOffsetPlaneTolM) << "offset " << offset_m;
        EXPECT_NEAR(back.y, y, kOffsetPlaneTolM) << "offset " << offset_m;
      }
    }
  }
}

TEST(MarkerPlane, APoseWhoseNormalPointsToTheCameraGivesTheSameMapping) {
  // The renderer's exact rig (synth/camera.h) poses a frame with Z toward the camera: the same
  // plane, axes Y and Z turned over. The offset must still count toward the camera.
  const Rig rig = MakeTiltedRig();
  Rig flipped = rig;
  cv::Matx33d r;
  cv::Rodrigues(*rig.plane_rvec_rad, r);
  const cv::Matx33d r2 = r * cv::Matx33d(1, 0, 0, 0, -1, 0, 0, 0, -1);
  cv::Vec3d rvec2;
  cv::Rodrigues(r2, rvec2);
  flipped.plane_rvec_rad = rvec2;
  const double offset_m = 0.03;
  for (double x : {-0.1, 0.25}) {
    for (double y : {-0.2, 0.3}) {
      std::vector<cv::Point3d> obj{{x, y, offset_m}};  // Z toward the camera in this frame
      std::vector<cv::Point2d> px;
      cv::projectPoints(obj, rvec2, *rig.plane_tvec_m, rig.lens->camera_matrix, rig.lens->distortion, px);
      const cv::Point2d back = MarkerPlaneFromImage(flipped, px[0], offset_m);
      EXPECT_NEAR(back.x, x, kOffsetPlaneTolM);
      EXPECT_NEAR(back.y, y, kOffsetPlaneTolM);
    }
  }
  EXPECT_DOUBLE_EQ(*CameraDistanceM(flipped), *CameraDistanceM(rig));
}

TEST(MarkerPlane, LengthsScaleByTheDistanceRatioAndOffsetZeroIsThePlaneMapping) {
  // Similar triangles (pinhole projection, common practice, no source): a length in a plane
  // parallel to the calibrated one at distance D - d is read in the calibrated plane as
  // D / (D - d) times itself.
  const Rig rig = MakeTiltedRig();
  const double d = *CameraDistanceM(rig);
  const double offset_m = 0.05;
  const cv::Point2d a_px(300, 200), b_px(500, 420);
  const cv::Point2d a0 = PlaneFromImage(rig, a_px), b0 = PlaneFromImage(rig, b_px);
  const cv::Point2d a1 = MarkerPlaneFromImage(rig, a_px, offset_m), b1 = MarkerPlaneFromImage(rig, b_px, offset_m);
  constexpr double kRatioTol = 1e-9;  // exact in double precision for a metric plane frame
  EXPECT_NEAR(cv::norm(b1 - a1) / cv::norm(b0 - a0), (d - offset_m) / d, kRatioTol);
  const cv::Point2d same = MarkerPlaneFromImage(rig, a_px, 0.0);
  EXPECT_EQ(same.x, a0.x);
  EXPECT_EQ(same.y, a0.y);
}

TEST(MarkerPlane, ARigWithoutAPlanePoseRefusesAnOffsetWithTheReason) {
  Rig rig = MakeTiltedRig();
  rig.plane_rvec_rad.reset();
  rig.plane_tvec_m.reset();
  EXPECT_FALSE(HasPlanePose(rig));
  EXPECT_FALSE(CameraDistanceM(rig).has_value());
  EXPECT_FALSE(MarkerOffsetProblem(rig, 0.0).has_value());
  const std::string problem = MarkerOffsetProblem(rig, 0.03).value_or("");
  EXPECT_NE(problem.find("needs the pose of the calibrated plane"), std::string::npos) << problem;
  EXPECT_THROW(MarkerPlaneFromImage(rig, {400, 300}, 0.03), std::invalid_argument);
  const Rig posed = MakeTiltedRig();
  EXPECT_NE(MarkerOffsetProblem(posed, 2.0).value_or("").find("not smaller than the camera's distance"),
            std::string::npos);
}

}  // namespace
}  // namespace dropfit::calib
