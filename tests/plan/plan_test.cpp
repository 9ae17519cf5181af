// The test plan (plan/plan.h) against outside facts: the Hertz contact time, free fall under
// standard gravity, motion blur, the exact damping-COR relation, and the tracker's precision
// table; and the plan's choice on small cases.

#include "plan/plan.h"

#include <gtest/gtest.h>

#include <cmath>

#include "analysis/constants.h"
#include "analysis/fit_initial_guess.h"
#include "plan/precision_table.h"
#include "tests/support/quiet_logs.h"

namespace dropfit::plan {
namespace {

const bool kQuietCeres = [] {
  test::SilenceCeresLogs();
  return true;
}();

constexpr double kG = analysis::kStandardGravityMps2;  // 3rd CGPM 1901: 9.80665 m/s^2 exactly

// A plan small enough for a unit test: one rate, one height, few realisations.
PlanOptions SmallPlan() {
  PlanOptions o;
  o.heights_m = {0.2};
  o.rates = {"1000:1280x1024"};
  o.realisations = 4;
  o.threads = 1;
  return o;
}

TEST(HertzContactTime, MatchesTheWorkedValuesOfMethodsSection4) {
  // docs/methods.md §4 check values (ODE, DOP853): m = 10 kg, k = 1e7 N/m^1.5: t_c = 1.115292739e-2 s at
  // 2 m/s and 1.281134935e-2 s at 1 m/s; t_c = 2.943 delta_max / v with delta_max = (5 m v^2 / 4k)^(2/5)
  // (K. L. Johnson, Contact Mechanics, 1985, §11.4, FROM MEMORY; the constant derived exactly there).
  constexpr double kRelTol = 1e-8;  // the check values carry 10 digits
  EXPECT_NEAR(HertzContactTime(10, 1e7, 2.0), 1.115292739e-2, 1.115292739e-2 * kRelTol);
  EXPECT_NEAR(HertzContactTime(10, 1e7, 1.0), 1.281134935e-2, 1.281134935e-2 * kRelTol);
}

TEST(FramesPerContact, AreTheFrameRateTimesTheHertzContactTime) {
  // A nearly elastic Hertz contact (COR 0.999) at 2 m/s: frames per contact = fps x t_c of Johnson
  // (1985) §11.4 (docs/methods.md §4). Gravity acting during contact lengthens it by about
  // m g / F_max = 98 N / 6598 N = 1.5 % (docs/methods.md §3c for the linear case), the damping
  // left by COR 0.999 by far less: 2.5 % covers both.
  constexpr double kRelTol = 0.025;
  PlanOptions o = SmallPlan();
  o.law = "hertz";
  o.params = {"k=1e7"};
  o.expected_cor = 0.999;
  o.impact_speeds_mps = {2.0};
  const PlanResult r = MakePlan(o);
  const double expected = 1000.0 * 1.115292739e-2;
  EXPECT_NEAR(r.settings[0].heights[0].frames_per_contact, expected, expected * kRelTol);
  EXPECT_GT(r.settings[0].heights[0].frames_per_contact, expected);  // gravity lengthens, never shortens
}

TEST(FreeFall, ImpactSpeedAndFallTimeFollowStandardGravity) {
  // v = sqrt(2 g h), t = sqrt(2 h / g) with g = 9.80665 m/s^2 (3rd CGPM 1901): from 1 m,
  // 4.428690551 m/s and 0.4516007558 s (computed by hand from the formulas).
  EXPECT_NEAR(ImpactSpeed(1.0, kG), 4.428690551393267, 1e-12);
  EXPECT_NEAR(FallTime(1.0, kG), 0.45160075575178754, 1e-12);
  // The plan's simulated impact speed (forward model) is the free-fall speed at the planned height
  // (to the integrator's accuracy, docs/methods.md §17).
  PlanOptions o = SmallPlan();
  const PlanResult r = MakePlan(o);
  EXPECT_NEAR(r.settings[0].heights[0].impact_speed_mps, std::sqrt(2 * kG * 0.2), 1e-9);
  // Impact speeds given instead of heights: h = v^2 / (2 g).
  o.impact_speeds_mps = {3.0};
  EXPECT_NEAR(PlannedHeights(o)[0], 9.0 / (2 * kG), 1e-15);
}

TEST(MotionBlur, IsSpeedTimesExposureOverScale) {
  // Blur [px] = speed x exposure / scale (common practice, no source): 3 m/s, 100 us, 1 mm/px: 0.3 px.
  EXPECT_NEAR(BlurPx(3.0, 1e-4, 1e-3), 0.3, 1e-15);
  PlanOptions o = SmallPlan();
  o.shortest_exposure_s = 2e-4;
  o.scales_m_per_px = {0.5e-3};
  const PlanResult r = MakePlan(o);
  const HeightResult& h = r.settings[0].heights[0];
  EXPECT_NEAR(h.blur_px, std::sqrt(2 * kG * 0.2) * 2e-4 / 0.5e-3, 1e-6);
}

TEST(Specimen, AStaticPointIsHertzWithTheExactDampingOfTheExpectedCor) {
  // k = F / delta^1.5 (Hertz, n = 1.5: Johnson 1985 §11.4, FROM MEMORY); the damping gives back the
  // expected COR through the exact multiplicative-damping relation (docs/methods.md §5).
  PlanOptions o;
  const PlannedSpecimen sp = MakeSpecimen(o);
  EXPECT_EQ(sp.law, analysis::LawId::kHertz);
  EXPECT_NEAR(sp.params[0], 500.0 / std::pow(0.004, 1.5), 1e-6);
  EXPECT_NEAR(analysis::CorFromMultiplicativeDamping(sp.params[2] * o.cor_speed_mps), o.expected_cor, 1e-9);
  // A Kelvin-Voigt spring with the damping left out: the exact speed-free relation (Schwager &
  // Poeschel 2007, eq. 21; docs/methods.md §3b).
  o.law = "kelvin-voigt";
  o.params = {"k_n_per_m=4e4"};
  const PlannedSpecimen kv = MakeSpecimen(o);
  const double zeta = kv.params[1] / (2 * std::sqrt(4e4 * o.mass_kg));
  EXPECT_NEAR(analysis::KelvinVoigtCor(zeta), o.expected_cor, 1e-9);
  o.params = {"q=1"};
  EXPECT_THROW(MakeSpecimen(o), std::invalid_argument);
}

TEST(PrecisionTable, ReturnsItsCellsAndGrowsWithNoiseAndBlur) {
  // The measured cells come back at their grid points; a centroid's error grows with the noise
  // and with lower contrast in proportion (common practice, no source).
  for (const PrecisionCell& c : PrecisionTable()) {
    if (!std::isfinite(c.centre_sd_px) || c.found_fraction < 1) continue;
    const Precision p = LookUpPrecision(c.marker, c.diameter_px, c.blur_px, c.read_noise_grey);
    EXPECT_NEAR(p.centre_sd_px, c.centre_sd_px, 1e-12);
  }
  const auto q = synth::MarkerShape::kQuadrant;
  EXPECT_LT(LookUpPrecision(q, 30, 0, 2).centre_sd_px, LookUpPrecision(q, 30, 0, 8).centre_sd_px);
  EXPECT_NEAR(LookUpPrecision(q, 30, 0, 16).centre_sd_px, 2 * LookUpPrecision(q, 30, 0, 8).centre_sd_px, 1e-12);
  EXPECT_NEAR(LookUpPrecision(q, 30, 0, 4, kReferenceContrastGrey / 2).centre_sd_px,
              LookUpPrecision(q, 30, 0, 8).centre_sd_px, 1e-12);
}

TEST(Plan, ChoosesTheLowestRateWhoseImageHoldsTheDrop) {
  // 4000 frames/s at 1280x128 px and 1 mm/px sees 0.107 m above the floor: the hub (0.25 m up at
  // contact) never; 1000 frames/s at full size sees it all. Cheaper rates come first.
  PlanOptions o = SmallPlan();
  o.rates = {"4000:1280x128", "1000"};
  const PlanResult r = MakePlan(o);
  ASSERT_EQ(r.settings.size(), 2u);
  EXPECT_EQ(r.settings[0].heights[0].measured, 0);
  EXPECT_FALSE(r.settings[0].missing.empty());
  EXPECT_TRUE(r.settings[1].heights[0].release_in_view);
  ASSERT_TRUE(r.chosen.has_value());
  EXPECT_EQ(*r.chosen, 1u);
  // Its spread is that of the measured figures around the truth.
  const HeightResult& h = r.settings[1].heights[0];
  EXPECT_EQ(h.measured, 4);
  EXPECT_NEAR(h.cor.mean, h.cor.truth, 10 * h.cor.sd + 1e-4);
}

TEST(Plan, NamesWhatIsMissingWhenNoTargetCanBeMet) {
  PlanOptions o = SmallPlan();
  o.target_cor = 1e-9;  // unreachable with any camera
  o.max_repeats = 2;
  const PlanResult r = MakePlan(o);
  EXPECT_FALSE(r.chosen.has_value());
  ASSERT_FALSE(r.settings[0].missing.empty());
  EXPECT_NE(r.settings[0].missing[0].find("COR"), std::string::npos);
}

TEST(PlanOptions, RejectBadValuesNamingTheOption) {
  PlanOptions o;
  o.mass_kg = -1;
  ASSERT_TRUE(ValidatePlanOptions(o));
  EXPECT_NE(ValidatePlanOptions(o)->find("--mass"), std::string::npos);
  o = PlanOptions{};
  o.rates = {"fast"};
  ASSERT_TRUE(ValidatePlanOptions(o));
  EXPECT_NE(ValidatePlanOptions(o)->find("--rates"), std::string::npos);
  EXPECT_FALSE(ValidatePlanOptions(PlanOptions{}));
  const RateOffer r = ParseRateOffer("2000:640x480", 1280, 1024);
  EXPECT_EQ(r.fps, 2000);
  EXPECT_EQ(r.width_px, 640);
  EXPECT_EQ(ParseRateOffer("500", 1280, 1024).height_px, 1024);
}

}  // namespace
}  // namespace dropfit::plan
