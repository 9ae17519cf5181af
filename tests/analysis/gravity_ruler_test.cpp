// The gravity ruler (analysis/gravity_ruler.h, docs/methods.md §20) on exact parabolas seen
// through the wrong plane. Sources: free fall y = y0 + v0 t - g t^2 / 2 (textbook kinematics,
// docs/methods.md §2); a length in a plane at distance D - d read in the plane at distance D is
// D / (D - d) times itself about the foot of the camera's perpendicular (similar triangles of the
// pinhole projection; Hartley & Zisserman 2004, §6.1, FROM MEMORY); the inverse-variance mean and
// the Birge ratio (Birge 1932, Phys. Rev. 40, 207; common practice).
#include "analysis/gravity_ruler.h"

#include <gtest/gtest.h>

#include <cmath>
#include <random>

namespace dropfit::analysis {
namespace {

constexpr double kG = 9.80665;             // standard gravity (3rd CGPM 1901)
constexpr double kDistanceM = 1.7;         // camera to calibrated plane
const double kFootX = 0.2, kFootY = 0.28;  // foot of the camera's perpendicular, plane metres

// Three exact flights of a bouncing hub (true metres in the marker's plane), 2,000 frames/s,
// with `held_s` of the hub held still before release at the start.
TimeSeries TrueFlights(double held_s, std::vector<FlightWindow>& windows) {
  const double fps = 2000.0;
  struct Flight {
    double t0, t1, y0, v0;
  };
  // Release from rest at t = held_s, then two rebounds (each flight starts and ends at 0.2 m).
  const double v1 = std::sqrt(2 * kG * 0.25), v2 = 0.7 * v1;
  const double t_fall = held_s + std::sqrt(2 * 0.25 / kG);
  const Flight flights[] = {
      {held_s, t_fall, 0.45, 0.0},
      {t_fall + 0.03, t_fall + 0.03 + 2 * v1 * 0.7 / kG, 0.2, v1 * 0.7},
      {t_fall + 0.06 + 2 * v1 * 0.7 / kG, t_fall + 0.06 + 2 * v1 * 0.7 / kG + 2 * v2 * 0.7 / kG, 0.2, v2 * 0.7}};
  const int n = static_cast<int>(std::ceil(flights[2].t1 * fps)) + 1;
  TimeSeries s = MakeTimeSeries(n, fps);
  int k = 0;
  windows.clear();
  for (const Flight& f : flights) {
    int first = -1, last = -1;
    for (; k < n && s.t_s[static_cast<size_t>(k)] <= f.t1; ++k) {
      const double t = s.t_s[static_cast<size_t>(k)];
      if (t < f.t0 && &f != &flights[0]) continue;  // contact: no sample
      const double tau = std::max(0.0, t - f.t0);   // held still before release
      s.x_m[static_cast<size_t>(k)] = 0.1 + 0.01 * t;
      s.y_m[static_cast<size_t>(k)] = f.y0 + f.v0 * tau - 0.5 * kG * tau * tau;
      s.valid[static_cast<size_t>(k)] = true;
      if (first < 0) first = k;
      last = k;
    }
    windows.push_back({first, last, &f == &flights[0]});
  }
  return s;
}

// What a rig that maps onto the plane `offset_m` reads for a marker truly at `true_offset_m`.
TimeSeries SeenAt(const TimeSeries& truth, double true_offset_m, double offset_m) {
  const double scale = (kDistanceM - offset_m) / (kDistanceM - true_offset_m);
  TimeSeries s = truth;
  for (int i = 0; i < s.size(); ++i) {
    if (!s.valid[static_cast<size_t>(i)]) continue;
    s.x_m[static_cast<size_t>(i)] = kFootX + (truth.x_m[static_cast<size_t>(i)] - kFootX) * scale;
    s.y_m[static_cast<size_t>(i)] = kFootY + (truth.y_m[static_cast<size_t>(i)] - kFootY) * scale;
  }
  return s;
}

TEST(GravityRuler, ExactParabolasGiveTheMarkerPlanesOffsetToAMicrometre) {
  constexpr double kOffsetTolM = 1e-6;  // the acceptance for exact parabolas
  std::vector<FlightWindow> windows;
  const TimeSeries truth = TrueFlights(0.0, windows);
  ASSERT_EQ(windows.size(), 3u);
  for (double true_offset : {0.03, -0.02, 0.0}) {
    const SeriesAtOffset at = [&](double d) { return SeenAt(truth, true_offset, d); };
    const MarkerOffsetEstimate e = EstimateMarkerOffset(at, 0.0, windows, GravityRulerOptions{});
    ASSERT_FALSE(e.failure) << *e.failure;
    EXPECT_NEAR(e.offset_m, true_offset, kOffsetTolM);
    EXPECT_EQ(e.flights, 3);
    // Read through the calibrated plane the flights fall at D / (D - d) g.
    EXPECT_NEAR(e.accel_mps2 / kG, kDistanceM / (kDistanceM - true_offset), 1e-9);
  }
}

TEST(GravityRuler, AHubHeldBeforeReleaseIsTrimmedAndNoisyFlightsGiveAnHonestSd) {
  std::vector<FlightWindow> windows;
  const TimeSeries exact = TrueFlights(0.01, windows);  // 20 frames held still at the start
  std::mt19937_64 rng(15);
  std::normal_distribution<double> noise(0.0, 5e-5);  // 0.05 mm: the reference tracker's noise
  const double true_offset = 0.03;
  std::vector<double> errors;
  for (int trial = 0; trial < 40; ++trial) {
    TimeSeries noisy = exact;
    for (int i = 0; i < noisy.size(); ++i) {
      noisy.x_m[static_cast<size_t>(i)] += noise(rng);
      noisy.y_m[static_cast<size_t>(i)] += noise(rng);
    }
    const SeriesAtOffset at = [&](double d) { return SeenAt(noisy, true_offset, d); };
    const MarkerOffsetEstimate e = EstimateMarkerOffset(at, 0.0, windows, GravityRulerOptions{});
    ASSERT_FALSE(e.failure);
    errors.push_back((e.offset_m - true_offset) / e.sd_m);
  }
  // The normalised errors have mean ~0 and sd ~1 when the held samples are trimmed and the sd is
  // right (40 trials: the mean's own sd is 0.16, the sd's about 0.11).
  double mean = 0, var = 0;
  for (double z : errors) mean += z / errors.size();
  for (double z : errors) var += (z - mean) * (z - mean) / (errors.size() - 1);
  EXPECT_LT(std::abs(mean), 0.6);
  EXPECT_NEAR(std::sqrt(var), 1.0, 0.4);
}

TEST(GravityRuler, PoolingWeighsByInverseVarianceAndInflatesByTheBirgeRatio) {
  // Two values 1 and 3 with sd 1: mean 2, sd 1/sqrt(2), chi^2 = 2 on 1 dof, R = sqrt(2).
  const PooledValue p = PoolInverseVariance({1.0, 3.0}, {1.0, 1.0});
  EXPECT_DOUBLE_EQ(p.value, 2.0);
  EXPECT_NEAR(p.birge_ratio, std::sqrt(2.0), 1e-12);
  EXPECT_NEAR(p.sd, 1.0, 1e-12);
  // Consistent values keep the plain inverse-variance sd: 1 and 1.5 with sds 1 and 2.
  const PooledValue q = PoolInverseVariance({1.0, 1.5}, {1.0, 2.0});
  EXPECT_NEAR(q.value, (1.0 + 1.5 / 4) / 1.25, 1e-12);
  EXPECT_NEAR(q.sd, std::sqrt(1 / 1.25), 1e-12);
}

TEST(GravityRuler, ThePolicyAppliesOnlySignificantOffsetsWithinATenthOfTheDistance) {
  GravityRulerOptions o;
  MarkerOffsetEstimate e;
  e.offset_m = 0.03;
  e.sd_m = 0.001;
  EXPECT_EQ(JudgeMarkerOffset(e, 1.7, o), OffsetVerdict::kApply);
  e.sd_m = 0.011;
  EXPECT_EQ(JudgeMarkerOffset(e, 1.7, o), OffsetVerdict::kNotSignificant);
  e.offset_m = 0.2;  // beyond 0.17 m: a wrong rate, unit or rig, not a marker offset
  e.sd_m = 0.001;
  EXPECT_EQ(JudgeMarkerOffset(e, 1.7, o), OffsetVerdict::kOutOfRange);
  e.failure = "none";
  EXPECT_EQ(JudgeMarkerOffset(e, 1.7, o), OffsetVerdict::kNoEstimate);
}

}  // namespace
}  // namespace dropfit::analysis
