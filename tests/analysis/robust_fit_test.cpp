// Outlying frames (issue 16 item 2): a known-answer track from the forward model with a few
// frames displaced by 0.5-2 px (here 1 mm per px) must move no reported figure by more than
// its standard uncertainty.
#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

#include "analysis/kinematics.h"
#include "analysis/law_choice.h"
#include "analysis/law_fit.h"
#include "synth/fit_synthetic.h"
#include "tests/support/quiet_logs.h"

namespace dropfit::analysis {
namespace {

const bool kQuietCeres = [] {
  test::SilenceCeresLogs();
  return true;
}();

constexpr double kMassKg = 10.0;
constexpr double kOnsetM = 0.3;
constexpr double kFps = 2000.0;

struct Measured {
  KinematicsResult kin;
  LawFitResult fit;
};

Measured Measure(const TimeSeries& series, bool robust = true) {
  KinematicsOptions ko;
  ko.robust_flights = robust;
  ko.mass_kg = kMassKg;
  ko.onset_height_m = kOnsetM;
  Measured m;
  m.kin = AnalyzeKinematics(series, ko);
  EXPECT_FALSE(m.kin.failure);
  const FitClip clip = MakeFitClip("track", 0.25, kMassKg, series, m.kin.segmentation, m.kin.impacts);
  LawFitOptions lo;
  lo.tread = synth::TyreLikeTread();
  m.fit = FitLaw(LawId::kHuntCrossley, {clip}, lo);
  return m;
}

TEST(RobustFits, AFewDisplacedFramesMoveNoFigureByMoreThanItsUncertainty) {
  const LawId law = LawId::kHuntCrossley;
  const DropScenario s =
      synth::MakeDropScenario(law, synth::TyreLikeLawParams(law), synth::TyreLikeTread(), kMassKg, kOnsetM, 0.25, 1.0);
  const Trajectory truth = SimulateDrop(s);
  const TimeSeries clean = synth::MakeSyntheticTrack(truth, static_cast<int>(s.end_time_s * kFps), kFps, 2e-5, 5);
  const double t_c = truth.impacts().front().t_contact_s;
  TimeSeries dirty = clean;
  // Frames just before the first contact (they set the impact speed), one mid-flight, one in
  // contact: +1 mm, -2 mm, +0.5 mm, +1.5 mm.
  const int k0 = static_cast<int>(std::floor(t_c * kFps));
  const std::vector<std::pair<int, double>> displaced{
      {k0 - 2, 1e-3}, {k0 - 40, -2e-3}, {k0 + 6, 0.5e-3}, {k0 - 120, 1.5e-3}};
  for (const auto& [k, d] : displaced) dirty.y_m[static_cast<size_t>(k)] += d;
  const Measured a = Measure(clean), b = Measure(dirty);
  ASSERT_FALSE(a.kin.impacts.empty());
  ASSERT_FALSE(b.kin.impacts.empty());
  const ImpactFigures& fa = a.kin.impacts.front();
  const ImpactFigures& fb = b.kin.impacts.front();
  const auto check = [](const char* name, const Estimate& x, const Estimate& y) {
    const double sd = std::max(x.sd, y.sd);
    std::printf("%-26s clean %.6g dirty %.6g  moved %.3g sd\n", name, x.value, y.value,
                std::abs(y.value - x.value) / sd);
    EXPECT_LE(std::abs(y.value - x.value), sd) << name;
  };
  check("impact_speed_mps", fa.impact_speed_mps, fb.impact_speed_mps);
  check("rebound_speed_mps", fa.rebound_speed_mps, fb.rebound_speed_mps);
  check("cor", fa.cor, fb.cor);
  check("max_deflection_m", fa.max_deflection_m, fb.max_deflection_m);
  check("contact_duration_track_s", fa.contact_duration_track_s, fb.contact_duration_track_s);
  check("drop_height_above_onset_m", fa.drop_height_above_onset_m, fb.drop_height_above_onset_m);
  ASSERT_FALSE(a.fit.failure);
  ASSERT_FALSE(b.fit.failure);
  for (size_t i = 0; i < a.fit.params.size(); ++i) {
    check(a.fit.param_names[i].c_str(), {a.fit.params[i], a.fit.param_sd[i]}, {b.fit.params[i], b.fit.param_sd[i]});
  }
  // The displaced frames before the contact are down-weighted (or left out of the flight by the
  // departure test); clean Gaussian noise loses weight on about 0.27 % of its samples (> 3 SD).
  std::printf("down-weighted in the falling flight: clean %d, displaced %d\n", fa.falling_flight_downweighted,
              fb.falling_flight_downweighted);
  EXPECT_GT(fb.falling_flight_downweighted, fa.falling_flight_downweighted);
  EXPECT_LE(fa.falling_flight_downweighted, 5);

  // The test switch: plain least squares lets the frames just before the contact pull the
  // falling parabola, and with it the impact speed, by more than its uncertainty.
  const Measured c = Measure(clean, false), d = Measure(dirty, false);
  const Estimate& vc = c.kin.impacts.front().impact_speed_mps;
  const Estimate& vd = d.kin.impacts.front().impact_speed_mps;
  std::printf("plain least squares: impact speed moved %.3g sd\n", std::abs(vd.value - vc.value) / vc.sd);
  EXPECT_GT(std::abs(vd.value - vc.value), vc.sd);
}

}  // namespace
}  // namespace dropfit::analysis
