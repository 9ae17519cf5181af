// The renderer's camera (synth/camera.h) against OpenCV's projectPoints, the reference
// implementation of the lens model it follows (OpenCV 4.6 calib3d documentation, the
// projectPoints formula; Brown 1966 for the decentring terms).
#include "synth/camera.h"

#include <opencv2/calib3d.hpp>

#include <gtest/gtest.h>

#include <random>

namespace dropfit::synth {
namespace {

// Both sides evaluate the same closed form in double precision; 1e-9 px leaves room for
// rounding in the Rodrigues conversion and the different operation order.
constexpr double kProjectionTolerancePx = 1e-9;
// Newton's undistortion stops at 1e-15 in normalised units (~1e-12 px).
constexpr double kRoundTripTolerancePx = 1e-9;
// calib::Rig undistorts with cv::undistortPoints (iterative, 1e-12 stop): a few 1e-9 m.
constexpr double kRigTolerance_m = 1e-8;

std::vector<double> DistortionOf(const CameraIntrinsics& k) { return {k.k1, k.k2, k.p1, k.p2, k.k3}; }

TEST(Camera, ProjectionMatchesOpenCvProjectPointsToANanopixel) {
  std::mt19937_64 rng(20240611);
  std::uniform_real_distribution<double> uniform(-1.0, 1.0);
  for (int trial = 0; trial < 20; ++trial) {
    CameraSetup setup;
    setup.intrinsics.k1 = -0.2 + 0.15 * uniform(rng);
    setup.intrinsics.k2 = 0.05 * uniform(rng);
    setup.intrinsics.k3 = 0.02 * uniform(rng);
    setup.intrinsics.p1 = 1e-3 * uniform(rng);
    setup.intrinsics.p2 = 1e-3 * uniform(rng);
    setup.pitch_deg = 3 * uniform(rng);
    setup.roll_deg = 3 * uniform(rng);
    setup.yaw_deg = 3 * uniform(rng);
    const PinholeCamera camera = MakeCamera(setup);
    std::vector<cv::Point3d> world;
    for (int i = 0; i < 50; ++i)
      world.emplace_back(0.2 + 0.45 * uniform(rng), 0.3 + 0.35 * uniform(rng), 0.1 * uniform(rng));
    std::vector<cv::Point2d> reference;
    const CameraIntrinsics& k = camera.intrinsics;
    const cv::Matx33d kmat(k.fx_px, 0, k.cx_px, 0, k.fy_px, k.cy_px, 0, 0, 1);
    cv::projectPoints(world, camera.rvec_rad, camera.tvec_m, kmat, DistortionOf(k), reference);
    for (size_t i = 0; i < world.size(); ++i) {
      const cv::Point2d ours = ProjectWorldPoint(camera, {world[i].x, world[i].y, world[i].z});
      EXPECT_NEAR(ours.x, reference[i].x, kProjectionTolerancePx);
      EXPECT_NEAR(ours.y, reference[i].y, kProjectionTolerancePx);
    }
  }
}

TEST(Camera, PixelToDropPlaneAndBackIsTheIdentity) {
  const PinholeCamera camera = MakeCamera(CameraSetup{});
  for (double u : {0.0, 123.4, 400.0, 799.0}) {
    for (double v : {0.0, 320.5, 639.0}) {
      const cv::Point2d p = DropPlaneFromImage(camera, {u, v});
      const cv::Point2d back = ImageFromDropPlane(camera, p);
      EXPECT_NEAR(back.x, u, kRoundTripTolerancePx);
      EXPECT_NEAR(back.y, v, kRoundTripTolerancePx);
    }
  }
}

TEST(Camera, DefaultSetUpSeesAboutOnePixelPerMillimetre) {
  const PinholeCamera camera = MakeCamera(CameraSetup{});
  EXPECT_NEAR(MetresPerPixelAtCentre(camera), 1e-3, 0.05e-3);
}

TEST(Camera, MountingAnglesTurnTheViewAsDocumented) {
  CameraSetup setup;
  setup.pitch_deg = 5;
  setup.roll_deg = 0;
  setup.yaw_deg = 0;
  // Tilted downwards: the camera centre is above the aim point.
  EXPECT_GT(CameraCentreInWorld(MakeCamera(setup))[1], setup.aim_y_m + 0.05);
  setup.pitch_deg = 0;
  setup.yaw_deg = 5;
  // Panned to the right: the camera centre is left of the aim point.
  EXPECT_LT(CameraCentreInWorld(MakeCamera(setup))[0], setup.aim_x_m - 0.05);
  setup.yaw_deg = 0;
  setup.roll_deg = 5;
  setup.intrinsics.k1 = setup.intrinsics.k2 = setup.intrinsics.p1 = setup.intrinsics.p2 = 0;
  // Positive roll: a level line of the plane rises to the right on screen by 5 deg (v is down).
  const PinholeCamera rolled = MakeCamera(setup);
  const cv::Point2d a = ImageFromDropPlane(rolled, {setup.aim_x_m - 0.1, setup.aim_y_m});
  const cv::Point2d b = ImageFromDropPlane(rolled, {setup.aim_x_m + 0.1, setup.aim_y_m});
  EXPECT_NEAR(std::atan2(b.y - a.y, b.x - a.x) * 180 / CV_PI, -5.0, 1e-6);
}

TEST(Camera, ExactRigMapsPixelsToTheSameDropPlanePoints) {
  const PinholeCamera camera = MakeCamera(CameraSetup{});
  const calib::Rig rig = RigFromCamera(camera, 0.1, 2000.0);
  ASSERT_FALSE(calib::ValidateRig(rig).has_value());
  for (double x : {0.0, 0.2, 0.55}) {
    for (double y : {0.0, 0.25, 0.5}) {
      const cv::Point2d image = ImageFromDropPlane(camera, {x, y});
      const cv::Point2d plane = calib::PlaneFromImage(rig, image);
      EXPECT_NEAR(plane.x, x, kRigTolerance_m);
      EXPECT_NEAR(plane.y, y, kRigTolerance_m);
      const cv::Point2d back = calib::ImageFromPlane(rig, {x, y});
      EXPECT_NEAR(back.x, image.x, 1e-6);
      EXPECT_NEAR(back.y, image.y, 1e-6);
    }
  }
}

TEST(Camera, BadSetUpIsRejectedWithTheFieldAndRange) {
  CameraSetup setup;
  setup.pitch_deg = 45;
  try {
    MakeCamera(setup);
    FAIL() << "no exception";
  } catch (const std::invalid_argument& e) {
    EXPECT_STREQ(e.what(), "camera set-up: pitch = 45 deg is outside its valid range [-20, 20]");
  }
}

}  // namespace
}  // namespace dropfit::synth
