// The steps of SegmentBounces (analysis/segmentation_steps.h) one at a time, on tracks whose
// answer is known by construction or from the forward model (analysis/forward_model.h).
#include "analysis/segmentation_steps.h"

#include <gtest/gtest.h>

#include <cmath>
#include <random>
#include <vector>

#include "analysis/forward_model.h"
#include "analysis/geometry.h"

namespace dropfit::analysis::detail {
namespace {

constexpr double kFps = 2000.0;

// A free-fall parabola from rest at 1 m, sampled at kFps, plus white noise of sd noise_m.
TimeSeries FallingTrack(int frames, double noise_m, std::uint32_t seed) {
  TimeSeries ts = MakeTimeSeries(frames, kFps);
  std::mt19937 rng(seed);
  std::normal_distribution<double> noise(0.0, noise_m);
  for (int i = 0; i < frames; ++i) {
    const size_t k = static_cast<size_t>(i);
    const double t = ts.t_s[k];
    ts.y_m[k] = 1.0 - 0.5 * kStandardGravityMps2 * t * t + (noise_m > 0.0 ? noise(rng) : 0.0);
    ts.valid[k] = true;
  }
  return ts;
}

// Step 1. var(d3 y) = (1 + 9 + 9 + 1) s^2 = 20 s^2 for white noise of sd s (the squared
// coefficients of the third difference; common practice, no source), and the median absolute
// value of a zero-mean normal variable is 0.6745 sd (MAD x 1.4826 = sd; from memory).
TEST(SegmentationSteps, ThirdDifferenceNoiseOfWhiteNoiseOnAParabolaIsItsSd) {
  constexpr double kNoiseM = 1e-4;
  // 20000 overlapping third differences (about a third as many independent ones): the MAD
  // estimate's relative sd is ~1.5 %; 6 % is four of those.
  constexpr double kRelTolerance = 0.06;
  const TimeSeries ts = FallingTrack(20000, kNoiseM, 20240601);
  EXPECT_NEAR(NoiseFromThirdDifferences(ts) / kNoiseM, 1.0, kRelTolerance);
}

// Step 1: the third difference of a parabola is zero (common practice, no source); only the
// rounding of the heights is left, so the estimate sits at the documented 1 nm floor.
TEST(SegmentationSteps, ThirdDifferenceNoiseOfANoiseFreeParabolaIsTheFloor) {
  constexpr double kFloorM = 1e-9;  // analysis/segmentation_steps.h
  const TimeSeries ts = FallingTrack(400, 0.0, 1);
  EXPECT_EQ(NoiseFromThirdDifferences(ts), kFloorM);
  EXPECT_TRUE(std::isnan(NoiseFromThirdDifferences(FallingTrack(12, 0.0, 1))));  // 9 differences: too few
}

// Step 2 on a drop of the forward model, whose impacts are the truth: one coarse contact per
// impact in the clip, in order, each holding the impact's lowest point (common practice, no
// source: the contacts must be the simulated ones).
TEST(SegmentationSteps, CoarseContactsOfASimulatedDropAreItsImpactsInClipOrder) {
  constexpr double kNoiseM = 10e-6;
  constexpr double kClipS = 2.2;
  // The lowest raw sample of a noisy contact bottom may be a neighbour of the true one: the
  // height there is within the noise of the minimum for about 2 frames (curvature of a few g
  // over 1 ms); 3 frames leaves a margin.
  constexpr double kLowestToleranceS = 3.0 / 1000.0;
  DropScenario s;
  s.setup.law = LawId::kKelvinVoigt;
  s.setup.mass_kg = 12.5;
  s.setup.tread = MakeTreadGeometry(0.2, 0.15, 0.0);
  s.law_params = {2e5, 60};
  s.onset_height_m = 0.2;
  s.start_time_s = -0.05;
  s.start_height_m = 0.6;
  s.end_time_s = kClipS;
  const Trajectory truth = SimulateDrop(s);
  TimeSeries ts = MakeTimeSeries(static_cast<int>(kClipS * 1000.0), 1000.0);
  std::mt19937 rng(11);
  std::normal_distribution<double> noise(0.0, kNoiseM);
  for (size_t i = 0; i < ts.t_s.size(); ++i) {
    ts.y_m[i] = truth.At(ts.t_s[i]).y_m + noise(rng);
    ts.valid[i] = true;
  }
  const CoarseContacts coarse = FindCoarseContacts(ts, kNoiseM, kStandardGravityMps2);
  ASSERT_FALSE(coarse.failure) << *coarse.failure;
  std::vector<double> truth_lowest_s;
  for (const ImpactTruth& t : truth.impacts())
    if (t.t_contact_s >= 0.0 && t.t_contact_s < kClipS) truth_lowest_s.push_back(t.t_lowest_s);
  ASSERT_GE(truth_lowest_s.size(), 4u);
  ASSERT_EQ(coarse.contacts.size(), truth_lowest_s.size());
  for (size_t k = 0; k < coarse.contacts.size(); ++k) {
    const ContactRun& run = coarse.contacts[k];
    SCOPED_TRACE("contact " + std::to_string(k));
    EXPECT_LE(run.first, run.last);
    EXPECT_NEAR(ts.t_s[static_cast<size_t>(run.lowest)], truth_lowest_s[k], kLowestToleranceS);
    if (k > 0) {
      EXPECT_GT(run.first, coarse.contacts[k - 1].last);
    }
  }
  EXPECT_EQ(coarse.release_end, -1);  // released before the clip: nothing held
  EXPECT_GE(coarse.filter_window, 5);
  EXPECT_LE(coarse.filter_window, 41);
  // Windows: one flight more than contacts, the outer ones cut by the clip.
  const std::vector<FlightWindow> windows = FlightWindows(coarse, ts.size());
  ASSERT_EQ(windows.size(), coarse.contacts.size() + 1);
  EXPECT_TRUE(windows.front().cut_start);
  EXPECT_TRUE(windows.back().cut_end);
}

// Step 2: a fall with no impact has no coarse contact, and the failure says what to check.
TEST(SegmentationSteps, AFallWithoutImpactHasNoCoarseContact) {
  const TimeSeries ts = FallingTrack(400, 1e-5, 3);
  const CoarseContacts coarse = FindCoarseContacts(ts, 1e-5, kStandardGravityMps2);
  ASSERT_TRUE(coarse.failure);
  EXPECT_NE(coarse.failure->find("no impact found"), std::string::npos);
  EXPECT_TRUE(coarse.contacts.empty());
}

// Step 6 on exact data: the vertex of y = y0 + a (t - tv)^2 is (tv, y0) (textbook algebra,
// no source); only rounding is left.
TEST(SegmentationSteps, LowestPointOfAnUpwardParabolaIsItsVertex) {
  constexpr double kVertexS = 0.01234;  // between samples
  constexpr double kVertexM = 0.1875;
  constexpr double kCurvatureMps2 = 40.0;  // a = 80 m/s^2 / 2: an 8 g contact bottom
  // Rounding of heights ~0.2 m in a 3-coefficient fit: far below 1e-12 m and 1e-9 s.
  constexpr double kHeightToleranceM = 1e-12;
  constexpr double kTimeToleranceS = 1e-9;
  TimeSeries ts = MakeTimeSeries(50, kFps);
  int lowest = 0;
  for (size_t i = 0; i < ts.t_s.size(); ++i) {
    const double dt = ts.t_s[i] - kVertexS;
    ts.y_m[i] = kVertexM + kCurvatureMps2 * dt * dt;
    ts.valid[i] = true;
    if (ts.y_m[i] < ts.y_m[static_cast<size_t>(lowest)]) lowest = static_cast<int>(i);
  }
  constexpr double kNoiseM = 1e-6;  // the stated noise: only scales the sd
  const LowestPoint p = FitLowestPoint(ts, lowest, kVertexM + 0.01, kNoiseM);
  EXPECT_NEAR(p.t_s, kVertexS, kTimeToleranceS);
  EXPECT_NEAR(p.y_m, kVertexM, kHeightToleranceM);
  EXPECT_GT(p.sd_m, 0.0);
  EXPECT_LT(p.sd_m, kNoiseM);  // better than one sample's noise: several samples fitted
}

// Steps 4 and 5 on exact data: d = A (t - t0)^3 after t0 (onset) and its mirror image
// (separation) give back t0 and p = 3 (the model of analysis/segmentation_steps.h; the t0
// grid is the only error).
TEST(SegmentationSteps, DepartureFitFindsTheStartOfACubicDepartureBothWays) {
  constexpr double kOnsetS = 0.010137;
  constexpr double kAmplitude = 5e3;      // m/s^3: 5 um after 1 ms
  constexpr double kStepS = 0.5e-3 / 20;  // as SegmentBounces: a twentieth of a frame
  // The refined grid is a tenth of the step: t0 within one fine step.
  constexpr double kT0ToleranceS = kStepS / 10.0;
  std::vector<double> t, d_onset, d_separation;
  for (int i = 0; i < 12; ++i) {
    t.push_back(0.006 + 0.5e-3 * i);
    const double x = t.back() - kOnsetS;
    d_onset.push_back(x > 0.0 ? kAmplitude * x * x * x : 0.0);
    d_separation.push_back(x < 0.0 ? -kAmplitude * x * x * x : 0.0);
  }
  constexpr double kNoiseM = 1e-7;  // only sets the sd's profile threshold
  const DepartureFit onset = FitDeparture(t, d_onset, true, t.front(), t.back(), kStepS, kNoiseM);
  EXPECT_NEAR(onset.t0_s, kOnsetS, kT0ToleranceS);
  EXPECT_EQ(onset.power, 3.0);
  EXPECT_GT(onset.sd_s, 0.0);
  const DepartureFit separation = FitDeparture(t, d_separation, false, t.front(), t.back(), kStepS, kNoiseM);
  EXPECT_NEAR(separation.t0_s, kOnsetS, kT0ToleranceS);
  EXPECT_EQ(separation.power, 3.0);
  EXPECT_TRUE(std::isnan(FitDeparture({0.0, 1.0}, {0.0, 1.0}, true, 0.0, 1.0, 0.1, 1e-3).t0_s));  // < 3 samples
}

}  // namespace
}  // namespace dropfit::analysis::detail
