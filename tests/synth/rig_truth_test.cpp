// Tests of a rig measured against the renderer's camera (synth/rig_truth.h) and of the
// uncertainty a calibration of rendered checkerboard images reports (calib/rig_uncertainty.h).
//
// References: the exact rig of the renderer's camera (synth::RigFromCamera, checked against
// cv::projectPoints in camera_test.cpp) must show no error; and the definition of a standard
// uncertainty (JCGM 100:2008, the GUM; from memory): a rig's actual errors should lie within a
// few reported sds (3 sd here: one rig, so a check of the order of magnitude, not of coverage —
// bench/rig_accuracy_bench.cpp measures the coverage over 20 rigs).
#include "synth/rig_truth.h"

#include <gtest/gtest.h>

#include <cmath>
#include <vector>

#include "calib/calibrate.h"
#include "calib/rig_uncertainty.h"
#include "synth/render_calibration.h"
#include "synth/render_plan.h"
#include "synth/render_set.h"

namespace dropfit::synth {
namespace {

// The exact rig maps through the same camera model in double: round-off of ~1e-12 m.
constexpr double kExactRigTolM = 1e-9;
// One rig's error against its reported sd: 3 sd (0.3 % of normal errors lie beyond).
constexpr double kSdMultiple = 3.0;

TEST(RigTruthTest, TheExactRigOfTheCameraHasNoError) {
  RenderOptions o;
  o.out_dir = "unused";
  const RenderSetPlan set = PlanRenderSet(o);
  const double row_m = PlaneBoardCornerHeight(set.plan.board);
  const RigAccuracy a = MeasureRigAccuracy(RigFromCamera(set.camera, row_m, std::nullopt), set.camera, row_m);
  for (double e :
       {a.row_error_centre_m, a.height100_error_centre_m, a.height300_error_centre_m, a.floor_error_centre_m,
        a.height100_mean_abs_error_m, a.floor_mean_abs_error_m, a.vertical_scale_error, a.scale_centre_error}) {
    EXPECT_NEAR(e, 0.0, kExactRigTolM);
  }
  // A rig one millimetre too high everywhere shows exactly that.
  calib::Rig high = RigFromCamera(set.camera, row_m, std::nullopt);
  high.plane_from_undistorted = cv::Matx33d(1, 0, 0, 0, 1, 1e-3, 0, 0, 1) * high.plane_from_undistorted;
  EXPECT_NEAR(RigErrorAt(high, set.camera, {0.2, 0.3}, row_m).y, 1e-3, kExactRigTolM);
}

TEST(RigTruthTest, ACalibratedRenderedRigReportsFiniteSdsThatCoverItsErrors) {
  RenderOptions o;
  o.out_dir = "unused";
  o.calibration_seed = 5;
  const RenderSetPlan set = PlanRenderSet(o);
  const std::vector<CalibrationImage> images = RenderCalibrationImages(
      *set.renderer, set.plan.board, o.lens_views, set.plan.exposure, set.plan.add_noise, CalibrationNoiseSeed(o));
  std::vector<calib::CalibrationImage> views;
  calib::CalibrationImage plane;
  for (const CalibrationImage& image : images) {
    views.push_back({image.name, image.image});
    if (image.drop_plane) plane = views.back();
  }
  calib::CalibrateOptions co;
  co.board = calib::BoardSpec{set.plan.board.inner_cols, set.plan.board.inner_rows, set.plan.board.square_m};
  const double row_m = PlaneBoardCornerHeight(set.plan.board);
  co.corner_height_m = row_m;
  co.corner_height_sd_m = 0.0;
  const calib::CalibrationOutcome outcome = calib::Calibrate(views, plane, co);
  ASSERT_TRUE(outcome.rig) << outcome.refusal;
  const calib::Rig& rig = *outcome.rig;
  ASSERT_TRUE(rig.uncertainty);
  const calib::RigUncertainty& u = *rig.uncertainty;
  ASSERT_TRUE(u.floor_sd_m);
  for (double sd : {u.plane_corner_sd_px, u.lens_corner_sd_px, u.height_sd_at_corner_row_m, u.height_sd_100mm_m,
                    u.height_sd_300mm_m, *u.floor_sd_m, u.scale_rel_sd_centre}) {
    EXPECT_TRUE(std::isfinite(sd) && sd > 0) << sd;
  }
  const RigAccuracy a = MeasureRigAccuracy(rig, set.camera, row_m);
  EXPECT_LE(std::abs(a.row_error_centre_m), kSdMultiple * u.height_sd_at_corner_row_m);
  EXPECT_LE(std::abs(a.height100_error_centre_m), kSdMultiple * u.height_sd_100mm_m);
  EXPECT_LE(std::abs(a.height300_error_centre_m), kSdMultiple * u.height_sd_300mm_m);
  EXPECT_LE(std::abs(a.floor_error_centre_m), kSdMultiple * *u.floor_sd_m);
  EXPECT_LE(std::abs(a.scale_centre_error), kSdMultiple * u.scale_rel_sd_centre);
  // HeightSdAt at the summary's point gives the summary's figure (corner height sd 0 here).
  const double x_m = calib::PlaneFromImage(rig, {399.5, 319.5}).x;
  EXPECT_NEAR(calib::HeightSdAt(rig, {x_m, row_m + 0.1}), u.height_sd_100mm_m, 1e-6 * u.height_sd_100mm_m);
}

}  // namespace
}  // namespace dropfit::synth
