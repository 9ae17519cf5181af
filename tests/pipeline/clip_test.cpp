// One clip through the pipeline (pipeline/clip.h) and a specimen through its joint stage
// (pipeline/joint_stage.h), on tracks from the forward model (analysis/forward_model.h, pinned to
// docs/methods.md §3-§5): the track is segmented once per stage, the onset height is decided in
// one place, and the figures follow the truth.

#include "pipeline/clip.h"

#include <gtest/gtest.h>

#include <cstdio>

#include <cmath>

#include "analysis/forward_model.h"
#include "pipeline/joint_stage.h"
#include "synth/fit_synthetic.h"
#include "tests/support/quiet_logs.h"

namespace dropfit::pipeline {
namespace {

const bool kQuietCeres = [] {
  test::SilenceCeresLogs();
  return true;
}();

constexpr double kMassKg = 10.0;
constexpr double kOnsetM = 0.3;
constexpr double kFps = 2000.0;
constexpr double kNoiseM = 5e-5;
// COR within 0.005 of the forward model's: the kinematics issue's reference-condition target
// (as in tests/analysis/impacts_test.cpp).
constexpr double kCorTol = 0.005;

struct Drop {
  analysis::Trajectory truth;
  analysis::TimeSeries series;
};

Drop MakeDrop(double drop_above_onset_m, uint64_t seed) {
  const analysis::LawId law = analysis::LawId::kHuntCrossley;
  const analysis::DropScenario s = synth::MakeDropScenario(law, synth::TyreLikeLawParams(law), synth::TyreLikeTread(),
                                                           kMassKg, kOnsetM, drop_above_onset_m, 1.0);
  Drop d;
  d.truth = analysis::SimulateDrop(s);
  d.series = synth::MakeSyntheticTrack(d.truth, static_cast<int>(s.end_time_s * kFps), kFps, kNoiseM, seed);
  return d;
}

ClipRequest Request(double drop_height_m) {
  ClipRequest r;
  r.clip_id = "clip";
  r.mass_kg = kMassKg;
  r.drop_height_m = drop_height_m;
  r.free_radius_m = kOnsetM;  // the hub is the free radius above the floor at first contact
  return r;
}

calib::Rig RigWithFloor(bool floor) {
  calib::Rig rig;
  rig.y_origin = floor ? calib::YOrigin::kFloor : calib::YOrigin::kBoard;
  return rig;
}

TEST(PipelineClip, WithoutAFloorTheBestLawsOnsetHeightIsUsedAndTheTrackIsSegmentedOnce) {
  const Drop drop = MakeDrop(0.25, 3);
  MeasureOptions options;
  options.fit_laws = true;
  const ClipMeasurement m = MeasureClip(Request(0.55), RigWithFloor(false), drop.series, kFps, options);
  ASSERT_FALSE(m.kinematics.failure) << *m.kinematics.failure;
  ASSERT_TRUE(m.laws && m.laws->choice.best);
  EXPECT_EQ(m.kinematics.segmentation_passes, 1);  // read again at the fitted height, not re-segmented
  EXPECT_TRUE(m.onset_refitted);
  const analysis::LawFitResult& best = m.laws->fits[static_cast<size_t>(*m.laws->choice.best)];
  EXPECT_EQ(m.kinematics.segmentation.onset_height_source, analysis::OnsetHeightSource::kFit);
  EXPECT_EQ(m.kinematics.segmentation.onset_height_m, best.onset_height_m);
  ASSERT_FALSE(m.kinematics.impacts.empty());
  const analysis::ImpactFigures& first = m.kinematics.impacts.front();
  EXPECT_EQ(first.onset_height_m, best.onset_height_m);
  EXPECT_NEAR(first.cor.value, drop.truth.impacts().front().cor, kCorTol);
  // The fitter's input keeps the track's onset estimate (it is cut before the fit).
  ASSERT_TRUE(m.fit_clip);
  EXPECT_FALSE(m.fit_clip->known_onset_height_m);
  EXPECT_EQ(m.law_traces.size(), m.laws->fits.size());
  EXPECT_TRUE(m.track_force);
}

// With a floor and the law fits, the geometry's onset height is a prior of the floor's and the
// free radius's uncertainty (docs/methods.md §13): a free radius entered 2 or 3 mm too large is
// moved back by the bounces and the figures are read at the fitted height; beyond 3 standard
// uncertainties (here 3 x 0.71 mm) a warning names the free radius and the floor; the right
// radius gives none.
TEST(PipelineClip, TheGeometrysOnsetHeightIsAPriorThatTheBouncesCanOverrule) {
  const Drop drop = MakeDrop(0.25, 6);
  MeasureOptions options;
  options.fit_laws = true;
  for (double error_m : {0.0, 2e-3, 3e-3}) {
    ClipRequest request = Request(0.55);
    request.free_radius_m = kOnsetM + error_m;
    const ClipMeasurement m = MeasureClip(request, RigWithFloor(true), drop.series, kFps, options);
    ASSERT_FALSE(m.kinematics.failure);
    ASSERT_TRUE(m.fit_clip && m.fit_clip->known_onset_height_m);
    EXPECT_NEAR(m.fit_clip->onset_prior_sd_m, std::hypot(0.0005, 0.0005), 1e-9);  // rig without uncertainty
    ASSERT_TRUE(m.laws && m.laws->choice.best);
    const analysis::LawFitResult& best = m.laws->fits[static_cast<size_t>(*m.laws->choice.best)];
    std::printf("free radius %+.1f mm off: fitted onset %.5f m (truth %.5f), source %s\n", 1e3 * error_m,
                best.onset_height_m, kOnsetM,
                analysis::ToString(m.kinematics.segmentation.onset_height_source).c_str());
    EXPECT_NEAR(best.onset_height_m, kOnsetM, 0.2e-3);
    EXPECT_EQ(m.kinematics.segmentation.onset_height_source, analysis::OnsetHeightSource::kGeometryPrior);
    EXPECT_NEAR(m.kinematics.impacts.front().cor.value, drop.truth.impacts().front().cor, kCorTol);
    bool warned = false;
    for (const std::string& w : m.kinematics.warnings) warned = warned || w.find("free_radius_m") != std::string::npos;
    EXPECT_EQ(warned, error_m > 2.5e-3);
  }
}

TEST(PipelineClip, WithAFloorTheGeometryGivesTheOnsetHeightAndTheJointFitStartsFromIt) {
  const Drop drop = MakeDrop(0.25, 4);
  MeasureOptions options;
  options.fit_laws = false;
  const ClipMeasurement m = MeasureClip(Request(0.55), RigWithFloor(true), drop.series, kFps, options);
  ASSERT_FALSE(m.kinematics.failure);
  EXPECT_EQ(m.kinematics.segmentation_passes, 1);
  EXPECT_FALSE(m.onset_refitted);
  EXPECT_EQ(m.kinematics.segmentation.onset_height_source, analysis::OnsetHeightSource::kGeometry);
  EXPECT_EQ(m.kinematics.segmentation.onset_height_m, kOnsetM);
  EXPECT_NEAR(m.kinematics.impacts.front().cor.value, drop.truth.impacts().front().cor, kCorTol);
  std::optional<double> geometry;
  const std::optional<analysis::FitClip> joint = JointFitClip(m, &geometry);
  ASSERT_TRUE(joint);
  EXPECT_FALSE(joint->known_onset_height_m);  // the joint fit locates the onset height itself
  EXPECT_EQ(joint->onset_height_guess_m, kOnsetM);
  EXPECT_EQ(geometry, kOnsetM);
}

TEST(PipelineClip, ARebuiltClipReadAtTheSavedFittedOnsetGivesTheSameFiguresAsTheFittedOne) {
  const Drop drop = MakeDrop(0.25, 5);
  MeasureOptions fitted;
  fitted.fit_laws = true;
  const ClipMeasurement a = MeasureClip(Request(0.55), RigWithFloor(false), drop.series, kFps, fitted);
  ASSERT_TRUE(a.onset_refitted);
  MeasureOptions rebuilt;
  rebuilt.fit_laws = false;
  rebuilt.onset_from_fit =
      std::make_pair(a.kinematics.segmentation.onset_height_m, a.kinematics.segmentation.onset_height_sd_m);
  const ClipMeasurement b = MeasureClip(Request(0.55), RigWithFloor(false), drop.series, kFps, rebuilt);
  ASSERT_EQ(a.kinematics.impacts.size(), b.kinematics.impacts.size());
  for (size_t i = 0; i < a.kinematics.impacts.size(); ++i) {
    EXPECT_EQ(a.kinematics.impacts[i].cor.value, b.kinematics.impacts[i].cor.value) << i;
    EXPECT_EQ(a.kinematics.impacts[i].impact_speed_mps.value, b.kinematics.impacts[i].impact_speed_mps.value) << i;
  }
}

TEST(PipelineJointStage, TheSpecimenIsFittedFromTheMeasurementsWithoutSegmentingAgain) {
  const Drop low = MakeDrop(0.15, 6), high = MakeDrop(0.30, 7);
  MeasureOptions options;
  options.fit_laws = false;
  const ClipRequest r_low = Request(0.45), r_high = Request(0.60);
  const ClipMeasurement m_low = MeasureClip(r_low, RigWithFloor(true), low.series, kFps, options);
  const ClipMeasurement m_high = MeasureClip(r_high, RigWithFloor(true), high.series, kFps, options);
  const SpecimenResult r = FitSpecimenClips("wheel", {&m_low, &m_high});
  ASSERT_TRUE(r.fit);
  EXPECT_EQ(r.clips_fitted, 2);
  EXPECT_EQ(r.geometry_onset_height_m, kOnsetM);
  EXPECT_EQ(r.law_cor.size(), r.fit->laws.size());
  EXPECT_FALSE(r.measured_cor.cor.empty());
  ASSERT_TRUE(r.fit->choice.best);
  // The best law's onset height, fitted over both heights, within 0.2 mm of the truth (the
  // contact-law issue's tolerance).
  EXPECT_NEAR(r.fit->laws[static_cast<size_t>(*r.fit->choice.best)].fit.onset_height_m, kOnsetM, 2e-4);
}

TEST(PipelineClip, TheSeriesOfATrackHoldsTheRigsMetresWhereTheMarkerWasFound) {
  calib::Rig rig;
  rig.plane_from_undistorted = cv::Matx33d(0.001, 0, -0.1, 0, -0.001, 0.5, 0, 0, 1);  // 1 mm per px, y up
  tracker::Track track;
  for (int f = 0; f < 4; ++f) track.samples.push_back({f, f != 2, cv::Point2d(100.0 + f, 200.0), 0.99});
  const analysis::TimeSeries s = TimeSeriesFromTrack(track, rig, 1000.0);
  ASSERT_EQ(s.t_s.size(), 4u);
  EXPECT_FALSE(s.valid[2]);
  for (int f : {0, 1, 3}) {
    const cv::Point2d p = calib::PlaneFromImage(rig, track.samples[static_cast<size_t>(f)].centre_px);
    EXPECT_EQ(s.x_m[static_cast<size_t>(f)], p.x);
    EXPECT_EQ(s.y_m[static_cast<size_t>(f)], p.y);
    EXPECT_EQ(s.t_s[static_cast<size_t>(f)], f / 1000.0);
  }
  EXPECT_THROW(TimeSeriesFromTrack(track, rig, 0.0), std::invalid_argument);
}

}  // namespace
}  // namespace dropfit::pipeline
