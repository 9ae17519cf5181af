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

}  // namespace
}  // namespace dropfit::calib
