// Set-up self-checks (analysis/self_checks.h, analysis/kinematics.h) on tracks sampled from
// the forward model (analysis/forward_model.h) with a deliberately wrong set-up.
#include "analysis/self_checks.h"

#include <gtest/gtest.h>

#include <cmath>
#include <numbers>
#include <random>
#include <vector>

#include "analysis/forward_model.h"
#include "analysis/geometry.h"
#include "analysis/kinematics.h"

namespace dropfit::analysis {
namespace {

constexpr double kMassKg = 12.5;
constexpr double kOnsetHeightM = 0.2;
constexpr double kDropM = 0.4;
constexpr double kTrueFps = 2000.0;
constexpr double kTrackNoiseM = 10e-6;  // 0.02 px at 0.5 mm/px

Trajectory Simulate(double gravity = kStandardGravityMps2, double drop_m = kDropM) {
  DropScenario s;
  s.setup.law = LawId::kKelvinVoigt;
  s.setup.mass_kg = kMassKg;
  s.setup.gravity_mps2 = gravity;
  s.law_params = {2e5, 300};
  s.onset_height_m = kOnsetHeightM;
  s.start_time_s = -0.05;
  s.start_height_m = kOnsetHeightM + drop_m;
  s.end_time_s = 0.9;
  return SimulateDrop(s);
}

// Samples at the true rate; `declared_fps` is the rate the analysis is told; the plane
// coordinates are rotated by `tilt_rad` (a camera rolled against the board's up).
TimeSeries Sample(const Trajectory& tr, double declared_fps, std::mt19937& rng, double tilt_rad = 0.0) {
  const int frames = 1700;
  TimeSeries ts = MakeTimeSeries(frames, declared_fps);
  std::normal_distribution<double> noise(0.0, kTrackNoiseM);
  for (int i = 0; i < frames; ++i) {
    const HubState st = tr.At(i / kTrueFps);
    // Gravity (0, -1) appears at angle tilt towards +x: x' = x cos + y sin... rotate by -tilt.
    const double x = st.x_m * std::cos(tilt_rad) - (st.y_m - kOnsetHeightM) * std::sin(tilt_rad);
    const double y = st.x_m * std::sin(tilt_rad) + (st.y_m - kOnsetHeightM) * std::cos(tilt_rad) + kOnsetHeightM;
    ts.x_m[static_cast<size_t>(i)] = x + noise(rng);
    ts.y_m[static_cast<size_t>(i)] = y + noise(rng);
    ts.valid[static_cast<size_t>(i)] = true;
  }
  return ts;
}

KinematicsOptions Options(double fps) {
  KinematicsOptions o;
  o.mass_kg = kMassKg;
  o.onset_height_m = kOnsetHeightM;
  o.drop_height_m = kDropM;
  o.capture_fps = fps;
  return o;
}

bool AnyWarningContains(const std::vector<std::string>& warnings, const std::string& text) {
  for (const auto& w : warnings)
    if (w.find(text) != std::string::npos) return true;
  return false;
}

TEST(SelfChecks, ACorrectSetUpRaisesNoWarning) {
  std::mt19937 rng(1);
  const KinematicsResult r = AnalyzeKinematics(Sample(Simulate(), kTrueFps, rng), Options(kTrueFps));
  ASSERT_FALSE(r.failure.has_value());
  EXPECT_TRUE(r.checks.warnings.empty()) << r.checks.warnings.front();
  // Standard gravity (3rd CGPM 1901) recovered from the flights to 0.1 %.
  EXPECT_NEAR(r.checks.gravity.flight_accel_mps2.value, kStandardGravityMps2, 0.001 * kStandardGravityMps2);
  ASSERT_TRUE(r.checks.tilt.has_value());
  EXPECT_NEAR(r.checks.tilt->tilt_deg.value, 0.0, 0.1);
  ASSERT_TRUE(r.checks.drop_height.has_value());
  EXPECT_FALSE(r.checks.drop_height->flagged);
  // v = sqrt(2 g h) for the nominal 0.4 m (docs/methods.md §2).
  EXPECT_NEAR(r.checks.drop_height->expected_speed_mps, std::sqrt(2.0 * 9.80665 * 0.4), 1e-12);
}

TEST(SelfChecks, TheSameClipAtHalfItsRateNamesATwofoldRateError) {
  std::mt19937 rng(2);
  const double wrong_fps = kTrueFps / 2.0;
  const KinematicsResult r = AnalyzeKinematics(Sample(Simulate(), wrong_fps, rng), Options(wrong_fps));
  ASSERT_FALSE(r.failure.has_value()) << *r.failure;
  EXPECT_TRUE(r.checks.gravity.flagged);
  // Times stretched 2x: the acceleration is a quarter of g.
  EXPECT_NEAR(r.checks.gravity.ratio, 0.25, 0.005);
  EXPECT_TRUE(AnyWarningContains(r.checks.warnings, "rate looks 2x too low")) << r.checks.warnings.front();
  EXPECT_TRUE(AnyWarningContains(r.checks.warnings, "2000 would fit")) << r.checks.warnings.front();
  // The impacts are still found.
  EXPECT_GE(r.impacts.size(), 2u);
}

TEST(SelfChecks, ATiltedCameraIsReportedInDegrees) {
  std::mt19937 rng(3);
  const double tilt_deg = 3.0;
  const KinematicsResult r =
      AnalyzeKinematics(Sample(Simulate(), kTrueFps, rng, tilt_deg * std::numbers::pi / 180.0), Options(kTrueFps));
  ASSERT_FALSE(r.failure.has_value());
  ASSERT_TRUE(r.checks.tilt.has_value());
  EXPECT_NEAR(r.checks.tilt->tilt_deg.value, tilt_deg, 0.05);
  EXPECT_TRUE(r.checks.tilt->flagged);
  EXPECT_TRUE(AnyWarningContains(r.checks.warnings, "3.00 +-")) << r.checks.warnings.front();
}

TEST(SelfChecks, AWrongNominalHeightIsReportedWithTheHeightTheSpeedImplies) {
  std::mt19937 rng(4);
  // Dropped from 0.44 m, entered as 0.40 m: 4.9 % faster than sqrt(2 g h).
  const KinematicsResult r =
      AnalyzeKinematics(Sample(Simulate(kStandardGravityMps2, 0.44), kTrueFps, rng), Options(kTrueFps));
  ASSERT_TRUE(r.checks.drop_height.has_value());
  EXPECT_TRUE(r.checks.drop_height->flagged);
  EXPECT_NEAR(r.checks.drop_height->implied_height_m, 0.44, 0.002);
  EXPECT_TRUE(AnyWarningContains(r.checks.warnings, "push at release"));
}

TEST(SelfChecks, LocalGravityReplacesStandardGravity) {
  std::mt19937 rng(5);
  // A world with g = 9.0 m/s^2: flagged against standard gravity (8 % off), quiet against 9.0.
  const Trajectory tr = Simulate(9.0);
  KinematicsOptions o = Options(kTrueFps);
  o.drop_height_m.reset();
  const KinematicsResult standard = AnalyzeKinematics(Sample(tr, kTrueFps, rng), o);
  EXPECT_TRUE(standard.checks.gravity.flagged);
  o.gravity_mps2 = 9.0;
  const KinematicsResult local = AnalyzeKinematics(Sample(tr, kTrueFps, rng), o);
  EXPECT_FALSE(local.checks.gravity.flagged);
  EXPECT_NEAR(local.checks.gravity.ratio, 1.0, 0.002);
}

TEST(SelfChecks, InvalidOptionsAreRejectedWithTheOffendingValue) {
  SelfCheckOptions o;
  o.tilt_tolerance_deg = 90.0;
  ASSERT_TRUE(ValidateSelfCheckOptions(o).has_value());
  EXPECT_NE(ValidateSelfCheckOptions(o)->find("tilt_tolerance_deg = 90"), std::string::npos);
}

}  // namespace
}  // namespace dropfit::analysis
