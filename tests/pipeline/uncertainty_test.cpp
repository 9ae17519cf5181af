// The clip's scale inputs to the uncertainty budgets (pipeline/uncertainty.h, docs/methods.md
// §23). Sources: a rectangular distribution of half-width a has u = a / sqrt(3) (JCGM 100:2008,
// GUM 4.3.7); a length read through a plane at d' instead of d is (D - d') / (D - d) times itself
// (similar triangles of the pinhole projection, docs/methods.md §19).
#include "pipeline/uncertainty.h"

#include <gtest/gtest.h>

#include <cmath>

namespace dropfit::pipeline {
namespace {

ClipMeasurement MeasurementWithRuler(double estimate_m, double sd_m, MarkerOffset used) {
  ClipMeasurement m;
  m.conditions.mass_kg = 5.0;
  m.conditions.gravity_mps2 = 9.80665;
  m.camera_distance_m = 1.2;
  analysis::MarkerOffsetEstimate e;
  e.offset_m = estimate_m;
  e.sd_m = sd_m;
  m.gravity_offset = e;
  m.marker_offset = used;
  return m;
}

TEST(ClipUncertainty, TheClockGravityAndTheRulerGiveTheirRelativeSds) {
  ClipRequest request;
  request.mass_kg = 5.0;
  calib::Rig rig;  // no uncertainty: the rig's part is 0 and a note says so
  // The ruler's estimate applied: its sd over the lever D - d.
  ClipMeasurement m = MeasurementWithRuler(0.02, 0.0001, {0.02, MarkerOffsetSource::kGravity});
  ClipScaleUncertainty s = ScaleUncertaintyOf(request, rig, m);
  EXPECT_TRUE(s.scale.gravity_ruler);
  EXPECT_NEAR(s.scale.marker_plane_rel, 0.0001 / 1.18, 1e-15);
  EXPECT_NEAR(s.scale.capture_rate_rel, 50e-6 / std::sqrt(3.0), 1e-15);       // the default 50 ppm
  EXPECT_NEAR(s.scale.gravity_rel, kStandardGravitySdMps2 / 9.80665, 1e-15);  // standard gravity
  EXPECT_EQ(s.scale.rig_scale_rel, 0.0);
  ASSERT_EQ(s.notes.size(), 1u);
  EXPECT_NE(s.notes[0].find("calibrate again"), std::string::npos);
  // Gravity given: its default sd; a tolerance of the manifest.
  request.gravity_mps2 = 9.81;
  request.capture_fps_tolerance_ppm = 20.0;
  s = ScaleUncertaintyOf(request, rig, m);
  EXPECT_NEAR(s.scale.gravity_rel, kGivenGravitySdMps2 / 9.80665, 1e-15);
  EXPECT_NEAR(s.scale.capture_rate_rel, 20e-6 / std::sqrt(3.0), 1e-15);
  request.gravity_sd_mps2 = 1e-5;
  EXPECT_NEAR(ScaleUncertaintyOf(request, rig, m).scale.gravity_rel, 1e-5 / 9.80665, 1e-15);
  // Not applied (3 mm given, 3.4 mm estimated): the estimate's distance from the offset used counts.
  m = MeasurementWithRuler(0.0034, 0.0001, {0.003, MarkerOffsetSource::kOption});
  s = ScaleUncertaintyOf(request, rig, m);
  EXPECT_FALSE(s.scale.gravity_ruler);
  EXPECT_NEAR(s.scale.marker_plane_rel, std::hypot(0.0004, 0.0001) / 1.197, 1e-12);
  // No estimate: 0, and said.
  m.gravity_offset.reset();
  s = ScaleUncertaintyOf(request, rig, m);
  EXPECT_EQ(s.scale.marker_plane_rel, 0.0);
  EXPECT_EQ(s.notes.size(), 2u);
}

TEST(ClipUncertainty, AJointFitKeepsTheSharedPartsAndPoolsTheRulers) {
  analysis::ScaleUncertainty a, b;
  a.rig_scale_rel = b.rig_scale_rel = 1e-5;
  a.marker_plane_rel = b.marker_plane_rel = 4e-5;
  a.gravity_ruler = true;
  const analysis::ScaleUncertainty p = PooledScaleUncertainty({a, b});
  EXPECT_NEAR(p.rig_scale_rel, 1e-5, 1e-18);                      // shared: not shrunk
  EXPECT_NEAR(p.marker_plane_rel, 4e-5 / std::sqrt(2.0), 1e-18);  // each clip's own estimate
  EXPECT_FALSE(p.gravity_ruler);                                  // only when every clip had it
}

}  // namespace
}  // namespace dropfit::pipeline
