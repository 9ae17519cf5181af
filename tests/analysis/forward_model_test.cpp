// Forward model of a drop: checks against published closed forms and the numbers of
// docs/methods.md (each check names its source).
#include "analysis/forward_model.h"

#include <ceres/jet.h>
#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <random>
#include <vector>

#include "synth/fit_synthetic.h"

namespace dropfit::analysis {
namespace {

// The integrator's default tolerances aim at ~1e-11 m; the references list 9-10 digits.
constexpr double kReferenceRelative = 1e-6;  // brief: eq. 21 "to 1e-6 relative" (we do better)
constexpr double kTightRelative = 2e-9;      // 10-digit table values, rounded in the last digit
constexpr double kTableSixDigits = 6e-6;     // tables printed with 6 significant digits

// One impact starting exactly at the onset height with downward speed v_in.
Trajectory SimulateSingleImpact(LawId law, std::vector<double> params, double mass_kg, double v_in_mps,
                                double gravity_mps2, double end_time_s = 0.2) {
  DropScenario scenario;
  scenario.setup.law = law;
  scenario.setup.mass_kg = mass_kg;
  scenario.setup.gravity_mps2 = gravity_mps2;
  scenario.law_params = std::move(params);
  scenario.onset_height_m = 0.3;
  scenario.start_height_m = 0.3;
  scenario.start_velocity_mps = -v_in_mps;
  scenario.end_time_s = end_time_s;
  return SimulateDrop(scenario);
}

// Schwager & Poeschel 2007, Granular Matter 9:465-469, eq. 21 (docs/methods.md §3b): the
// linear spring-dashpot with separation where the force k x + c x' returns to zero.
TEST(ForwardModel, KelvinVoigtWithoutGravityMatchesSchwagerPoeschelEquation21) {
  const Trajectory trajectory = SimulateSingleImpact(LawId::kKelvinVoigt, {2e5, 300}, 10.0, 2.0, 0.0);
  ASSERT_GE(trajectory.impacts().size(), 1u);
  const ImpactTruth& impact = trajectory.impacts()[0];
  // docs/methods.md §3b table, column "separation at F = 0".
  EXPECT_NEAR(impact.contact_duration_s, 0.0208290828, 0.0208290828 * kTightRelative);
  EXPECT_NEAR(impact.separation_speed_mps / impact.impact_speed_mps, 0.7316622764, kTightRelative);
  EXPECT_NEAR(impact.separation_speed_mps, 1.4633245528, 1.4633245528 * kTightRelative);
  EXPECT_NEAR(impact.separation_deflection_m, 2.194987e-3, 2.194987e-3 * 1e-6);
  // Table value printed to 10 digits: within half a unit of its last digit.
  EXPECT_NEAR(impact.max_deflection_m, 0.0120967952, 0.5e-10 + 1e-12);
  // Exact: x = (v/wd) exp(-beta t) sin(wd t) peaks where tan(wd t) = wd/beta.
  const double beta = 15.0, wd = std::sqrt(2e4 - beta * beta);
  const double t_peak = std::atan2(wd, beta) / wd;
  EXPECT_NEAR(impact.max_deflection_m, 2.0 / wd * std::exp(-beta * t_peak) * std::sin(wd * t_peak), 1e-12);
  EXPECT_NEAR(impact.t_lowest_s - impact.t_contact_s, t_peak, 1e-9);
  // Without gravity the level rebound equals the separation speed (no deceleration).
  EXPECT_NEAR(impact.cor, 0.7316622764, kTightRelative);
}

TEST(ForwardModel, KelvinVoigtDampingSweepMatchesEquation21InEveryBranch) {
  // Dimensionless sweep of docs/methods.md §3b: omega0 t_c and e for zeta from 0.05 to 2
  // (underdamped atan2 branch, and the overdamped branch 2 ln(zeta + Omega)/Omega).
  struct Row {
    double zeta, e, omega_tc;
  };
  const Row rows[] = {
      {0.05, 0.858758102, 3.045360022}, {0.1, 0.744079398, 2.956075325}, {0.2, 0.571740028, 2.795354441},
      {0.3, 0.450975453, 2.654474564},  {0.5, 0.298436059, 2.418399152}, {0.7, 0.210284564, 2.227562282},
      {0.9, 0.155282748, 2.069452940},  {1.2, 0.105210491, 1.876493553}, {2.0, 0.047768733, 1.520691993}};
  const double m = 1.0, k = 1e4, v = 1.0;
  const double omega0 = std::sqrt(k / m);
  for (const Row& row : rows) {
    const double c = 2.0 * row.zeta * std::sqrt(k * m);
    const Trajectory trajectory = SimulateSingleImpact(LawId::kKelvinVoigt, {k, c}, m, v, 0.0, 0.1);
    ASSERT_GE(trajectory.impacts().size(), 1u) << "zeta " << row.zeta;
    const ImpactTruth& impact = trajectory.impacts()[0];
    // Table values carry 9 significant digits.
    EXPECT_NEAR(impact.contact_duration_s * omega0, row.omega_tc, 2e-9 * row.omega_tc) << "zeta " << row.zeta;
    EXPECT_NEAR(impact.separation_speed_mps / v, row.e, 2e-9) << "zeta " << row.zeta;
    // And the closed form itself (eq. 21), to the brief's 1e-6 relative.
    double omega_tc;
    if (row.zeta < 1.0) {
      const double s = std::sqrt(1.0 - row.zeta * row.zeta);
      omega_tc = (M_PI - std::atan2(2.0 * row.zeta * s, 1.0 - 2.0 * row.zeta * row.zeta)) / s;
    } else {
      const double big_omega = std::sqrt(row.zeta * row.zeta - 1.0);
      omega_tc = 2.0 * std::log(row.zeta + big_omega) / big_omega;
    }
    EXPECT_NEAR(impact.contact_duration_s * omega0, omega_tc, kReferenceRelative * omega_tc);
    EXPECT_NEAR(impact.separation_speed_mps / v, std::exp(-row.zeta * omega_tc), kReferenceRelative);
  }
}

// docs/methods.md §3c: gravity acting during contact, m = 10, k = 2e5, c = 300, v_in = 2,
// g = 9.80665 (DERIVED closed form there, checked against an ODE solver).
TEST(ForwardModel, KelvinVoigtWithGravityMatchesTheGravityTable) {
  const Trajectory trajectory =
      SimulateSingleImpact(LawId::kKelvinVoigt, {2e5, 300}, 10.0, 2.0, kStandardGravityMps2, 0.1);
  ASSERT_GE(trajectory.impacts().size(), 1u);
  const ImpactTruth& impact = trajectory.impacts()[0];
  EXPECT_NEAR(impact.contact_duration_s, 0.0214142646, 0.5e-10 + 1e-12);
  EXPECT_NEAR(impact.separation_speed_mps / 2.0, 0.7258884392, 0.5e-10 + 1e-12);  // e_sep
  EXPECT_NEAR(impact.cor, 0.7184958075, 0.5e-10 + 1e-12);                         // e_level
  EXPECT_NEAR(impact.separation_deflection_m, 2.1776653e-3, 0.5e-10);
  EXPECT_TRUE(impact.complete);
  // The level rebound follows from the separation state by the flight parabola.
  EXPECT_NEAR(impact.rebound_speed_mps,
              std::sqrt(impact.separation_speed_mps * impact.separation_speed_mps -
                        2.0 * kStandardGravityMps2 * impact.separation_deflection_m),
              1e-12);
}

TEST(ForwardModel, KelvinVoigtCorDependsOnImpactSpeedUnderGravityAsTabulated) {
  // docs/methods.md §3c speed-dependence table (printed to 6-7 significant digits).
  struct Row {
    double v, tc, e_sep, e_level;
  };
  const Row rows[] = {{0.5, 2.322357e-2, 0.703281, 0.673219},    {1.0, 2.200885e-2, 0.719284, 0.704421},
                      {1.4005, 2.166767e-2, 0.723167, 0.712586}, {1.9806, 2.142004e-2, 0.725828, 0.718362},
                      {2.4257, 2.131087e-2, 0.726960, 0.720870}, {3.1316, 2.120169e-2, 0.728067, 0.723354},
                      {4.0, 2.112045e-2, 0.728875, 0.725188}};
  for (const Row& row : rows) {
    const Trajectory trajectory =
        SimulateSingleImpact(LawId::kKelvinVoigt, {2e5, 300}, 10.0, row.v, kStandardGravityMps2, 0.1);
    ASSERT_GE(trajectory.impacts().size(), 1u);
    const ImpactTruth& impact = trajectory.impacts()[0];
    EXPECT_NEAR(impact.contact_duration_s, row.tc, 0.5e-8) << "v " << row.v;
    EXPECT_NEAR(impact.separation_speed_mps / row.v, row.e_sep, 0.5e-6) << "v " << row.v;
    EXPECT_NEAR(impact.cor, row.e_level, 0.5e-6) << "v " << row.v;
  }
}

// Closed-form check of the whole position history (docs/methods.md §3c, DERIVED):
// x(t) = x_eq + exp(-beta t)[-x_eq cos(wd t) + ((v - beta x_eq)/wd) sin(wd t)], x_eq = m g/k.
TEST(ForwardModel, ContactPositionHistoryMatchesTheClosedFormToANanometre) {
  constexpr double kPositionTolerance = 1e-9;  // the brief's accuracy target, in metres
  const double m = 10.0, k = 2e5, c = 300.0, v = 2.0, g = kStandardGravityMps2;
  const Trajectory trajectory = SimulateSingleImpact(LawId::kKelvinVoigt, {k, c}, m, v, g, 0.1);
  const ImpactTruth& impact = trajectory.impacts().at(0);
  const double beta = c / (2.0 * m), wd = std::sqrt(k / m - beta * beta), x_eq = m * g / k;
  double worst = 0.0, worst_velocity = 0.0;
  for (int i = 0; i <= 2000; ++i) {
    const double t = impact.t_separation_s * i / 2000.0;
    const double e = std::exp(-beta * t);
    const double x = x_eq + e * (-x_eq * std::cos(wd * t) + (v - beta * x_eq) / wd * std::sin(wd * t));
    const double xdot = -beta * (x - x_eq) + e * (x_eq * wd * std::sin(wd * t) + (v - beta * x_eq) * std::cos(wd * t));
    const HubState state = trajectory.At(t);
    worst = std::max(worst, std::abs((0.3 - state.y_m) - x));
    worst_velocity = std::max(worst_velocity, std::abs(-state.vy_mps - xdot));
    if (i > 0 && i < 2000) {
      EXPECT_TRUE(state.in_contact);
      EXPECT_NEAR(state.contact_force_n, k * x + c * xdot, 1e-4);
    }
  }
  EXPECT_LT(worst, kPositionTolerance);
  EXPECT_LT(worst_velocity, 1e-7);
  std::printf("KV contact: worst position error %.3g m, velocity %.3g m/s over %d steps\n", worst, worst_velocity,
              trajectory.steps());
}

// docs/methods.md §2: v = sqrt(2 g h), textbook (energy conservation), table to 9 digits.
TEST(ForwardModel, FreeFallImpactSpeedIsSqrtTwoGH) {
  const double heights[] = {0.05, 0.10, 0.20, 0.30, 0.50, 1.00};
  const double speeds[] = {0.990285312, 1.400474919, 1.980570625, 2.425693715, 3.131557121, 4.428690551};
  for (int i = 0; i < 6; ++i) {
    DropScenario scenario;
    scenario.setup.law = LawId::kKelvinVoigt;
    scenario.setup.mass_kg = 10.0;
    scenario.law_params = {2e5, 300};
    scenario.onset_height_m = 0.3;
    scenario.start_height_m = 0.3 + heights[i];
    scenario.start_time_s = 0.25;
    scenario.end_time_s = 1.0;
    const Trajectory trajectory = SimulateDrop(scenario);
    ASSERT_GE(trajectory.impacts().size(), 1u);
    const ImpactTruth& impact = trajectory.impacts()[0];
    EXPECT_NEAR(impact.impact_speed_mps, speeds[i], 0.5e-9 + 1e-12) << "h " << heights[i];
    EXPECT_NEAR(impact.t_contact_s, 0.25 + speeds[i] / kStandardGravityMps2, 1e-9);
    // Flight is a parabola with acceleration -g.
    const HubState mid = trajectory.At(0.25 + 0.5 * speeds[i] / kStandardGravityMps2);
    EXPECT_DOUBLE_EQ(mid.ay_mps2, -kStandardGravityMps2);
    EXPECT_FALSE(mid.in_contact);
  }
}

// docs/methods.md §4 (DERIVED; the Hertz constant 2.943 as in Johnson 1985 section 11.4, FROM
// MEMORY): elastic power law F = k delta^1.5, delta_max = (5 m v^2/(4k))^(2/5),
// t_c = 2.943275184 delta_max / v, e = 1.
TEST(ForwardModel, HertzImpactMatchesDeflectionDurationAndPeakForce) {
  struct Row {
    double m, k, v, delta_max, tc, f_max;
  };
  const Row rows[] = {{10, 1e7, 2, 7.578582833e-3, 1.115292739e-2, 6597.53955},
                      {10, 1e7, 1, 4.352752816e-3, 1.281134935e-2, 2871.74589},
                      {1, 1, 1, 1.093362074, 3.218065460, 1.143262630},
                      {10, 5e6, 3.131557121, 1.431476668e-2, 1.345410475e-2, 8563.40363}};
  for (const Row& row : rows) {
    const Trajectory trajectory =
        SimulateSingleImpact(LawId::kHertz, {row.k, 1.5, 0.0}, row.m, row.v, 0.0, 5.0 * row.tc);
    ASSERT_GE(trajectory.impacts().size(), 1u);
    const ImpactTruth& impact = trajectory.impacts()[0];
    EXPECT_NEAR(impact.max_deflection_m, row.delta_max, 1e-9 * row.delta_max) << row.k << " " << row.v;
    EXPECT_NEAR(impact.contact_duration_s, row.tc, 1e-9 * row.tc) << row.k << " " << row.v;
    EXPECT_NEAR(impact.peak_force_n, row.f_max, 1e-8 * row.f_max) << row.k << " " << row.v;
    EXPECT_NEAR(impact.cor, 1.0, 1e-9);
    const double closed_delta = std::pow(5.0 * row.m * row.v * row.v / (4.0 * row.k), 0.4);
    EXPECT_NEAR(impact.max_deflection_m, closed_delta, 1e-9 * closed_delta);
    EXPECT_NEAR(impact.contact_duration_s, 2.943275184 * closed_delta / row.v, 1e-9 * impact.contact_duration_s);
    // The peak is at exactly half the contact.
    EXPECT_NEAR(impact.t_lowest_s - impact.t_contact_s, 0.5 * impact.contact_duration_s, 1e-9 * row.tc);
  }
}

// docs/methods.md §5 (DERIVED exact relation for F = k delta^n (1 + alpha delta_dot), no gravity):
// with w = alpha v_in, w - ln(1 + w) = -e w - ln(1 - e w), independent of n, k, m.
double ExactHuntCrossleyCor(double w) {
  double lo = 0.0, hi = 1.0;  // f(e) = -e w - ln(1 - e w) - (w - ln(1 + w)) rises with e
  for (int i = 0; i < 200; ++i) {
    const double e = 0.5 * (lo + hi);
    const double f = -e * w - std::log(1.0 - e * w) - (w - std::log(1.0 + w));
    (f < 0.0 ? lo : hi) = e;
  }
  return 0.5 * (lo + hi);
}

TEST(ForwardModel, HuntCrossleyCorSolvesTheExactImplicitRelationForEveryExponent) {
  for (double n : {1.0, 1.5, 2.0}) {
    // w = alpha v = 0.5 -> e = 0.7484349316 (docs/methods.md §5, for n = 1, 1.5, 2).
    const Trajectory trajectory = SimulateSingleImpact(LawId::kHuntCrossley, {1e7, n, 0.25}, 10.0, 2.0, 0.0, 0.2);
    const ImpactTruth& impact = trajectory.impacts().at(0);
    EXPECT_NEAR(impact.cor, 0.7484349316, 0.5e-10 + 1e-11) << "n " << n;
    EXPECT_NEAR(impact.cor, ExactHuntCrossleyCor(0.5), 1e-10) << "n " << n;
    // Multiplicative damping: the force vanishes at delta = 0, so x_sep = 0 and e_sep = e_level.
    EXPECT_EQ(impact.separation_deflection_m, 0.0);
    EXPECT_NEAR(impact.separation_speed_mps, impact.rebound_speed_mps, 1e-15);
  }
  // The "exact alpha v" column of docs/methods.md §5 gives back its target e.
  const double exact_w[] = {0.07892661, 0.16648195, 0.37314620, 0.63482828, 0.97487171, 1.43275053, 3.08708198};
  const double target_e[] = {0.95, 0.9, 0.8, 0.7, 0.6, 0.5, 0.3};
  for (int i = 0; i < 7; ++i) {
    const Trajectory trajectory =
        SimulateSingleImpact(LawId::kHuntCrossley, {1e7, 1.5, exact_w[i] / 2.0}, 10.0, 2.0, 0.0, 0.2);
    // The listed w has 8 decimals: de/dw ~ 0.3-1, so e is good to ~1e-8.
    EXPECT_NEAR(trajectory.impacts().at(0).cor, target_e[i], 2e-8) << "w " << exact_w[i];
  }
}

TEST(ForwardModel, HuntCrossleySpeedTableForAlphaPointTwo) {
  // docs/methods.md §5 speed table: alpha = 0.2 s/m, n = 1.5, m = 10, k = 1e7, no gravity.
  const double speeds[] = {0.5, 1.0, 1.4005, 2.0, 2.4257, 3.1316, 4.0};
  const double cors[] = {0.937476, 0.882190, 0.842259, 0.788539, 0.754152, 0.702885, 0.647967};
  const double tcs[] = {1.4817e-2, 1.2992e-2, 1.2217e-2, 1.1480e-2, 1.1119e-2, 1.0683e-2, 1.0316e-2};
  for (int i = 0; i < 7; ++i) {
    const Trajectory trajectory =
        SimulateSingleImpact(LawId::kHuntCrossley, {1e7, 1.5, 0.2}, 10.0, speeds[i], 0.0, 0.2);
    const ImpactTruth& impact = trajectory.impacts().at(0);
    EXPECT_NEAR(impact.cor, cors[i], 0.5e-6) << "v " << speeds[i];
    EXPECT_NEAR(impact.cor, ExactHuntCrossleyCor(0.2 * speeds[i]), 1e-10) << "v " << speeds[i];
    EXPECT_NEAR(impact.contact_duration_s, tcs[i], 0.5e-6) << "v " << speeds[i];
  }
  // With gravity in contact, v = 2: e = 0.779462 (docs/methods.md §5, last paragraph).
  const Trajectory with_gravity =
      SimulateSingleImpact(LawId::kHuntCrossley, {1e7, 1.5, 0.2}, 10.0, 2.0, kStandardGravityMps2, 0.2);
  EXPECT_NEAR(with_gravity.impacts().at(0).cor, 0.779462, 0.5e-6);
}

// docs/methods.md §7d (DERIVED, no publication claimed): piecewise-linear spring.
TEST(ForwardModel, BilinearSpringMatchesThePiecewiseClosedForm) {
  struct Row {
    double k1, k2, knee, tc, delta_max;
  };
  const Row rows[] = {{1e5, 1e6, 0.01, 0.0192644426, 0.0145677644}, {2e5, 5e4, 0.005, 0.0312313520, 0.0181662479}};
  for (const Row& row : rows) {
    const Trajectory trajectory =
        SimulateSingleImpact(LawId::kBilinear, {row.k1, row.k2, row.knee, 0.0}, 10.0, 2.0, 0.0, 0.2);
    const ImpactTruth& impact = trajectory.impacts().at(0);
    EXPECT_NEAR(impact.contact_duration_s, row.tc, 0.5e-10 + 1e-12) << row.k1 << " " << row.k2;
    EXPECT_NEAR(impact.max_deflection_m, row.delta_max, 0.5e-10 + 1e-12) << row.k1 << " " << row.k2;
    EXPECT_NEAR(impact.cor, 1.0, 1e-9);
  }
}

// Energy conservation (textbook): without damping every law returns the impact speed at the
// onset height, with gravity acting during contact too.
TEST(ForwardModel, ZeroDampingGivesACorOfOneForEveryLaw) {
  const ContactSetup base;
  struct Case {
    LawId law;
    std::vector<double> params;
  };
  const Case cases[] = {{LawId::kKelvinVoigt, {2e5, 0.0}},
                        {LawId::kHuntCrossley, {1e7, 1.3, 0.0}},
                        {LawId::kHertz, {1e7, 1.5, 0.0}},
                        {LawId::kBilinear, {1e5, 3e5, 0.004, 0.0}},
                        {LawId::kVolumetric, {2e7, 0.0}}};
  for (const Case& test_case : cases) {
    const DropScenario scenario = synth::MakeDropScenario(test_case.law, test_case.params,
                                                          MakeTreadGeometry(0.3, 0.0, 0.05), 10.0, 0.3, 0.3, 1.5);
    const Trajectory trajectory = SimulateDrop(scenario);
    ASSERT_GE(trajectory.impacts().size(), 2u) << ToString(test_case.law);
    for (const ImpactTruth& impact : trajectory.impacts()) {
      if (!impact.complete) continue;
      EXPECT_NEAR(impact.cor, 1.0, 1e-9) << ToString(test_case.law);
      EXPECT_NEAR(impact.impact_speed_mps, std::sqrt(2.0 * kStandardGravityMps2 * 0.3), 1e-9);
    }
  }
}

// Bounce sequence: each flight is a parabola, so the next impact speed equals the previous
// rebound speed, and the apex is at v^2/(2g) above the onset height; the Kelvin-Voigt hub
// eventually stops separating and rests at the static deflection m g / k.
TEST(ForwardModel, BouncesChainThroughFlightsAndComeToRest) {
  DropScenario scenario;
  scenario.setup.law = LawId::kKelvinVoigt;
  scenario.setup.mass_kg = 10.0;
  scenario.law_params = {2e5, 300};
  scenario.onset_height_m = 0.3;
  scenario.start_height_m = 0.5;
  scenario.end_time_s = 4.0;
  const Trajectory trajectory = SimulateDrop(scenario);
  const auto& impacts = trajectory.impacts();
  ASSERT_GE(impacts.size(), 5u);
  for (std::size_t i = 0; i + 1 < impacts.size(); ++i) {
    ASSERT_TRUE(impacts[i].complete) << i;
    EXPECT_NEAR(impacts[i + 1].impact_speed_mps, impacts[i].rebound_speed_mps, 1e-12) << i;
    EXPECT_NEAR(impacts[i + 1].t_contact_s - impacts[i].t_level_s,
                2.0 * impacts[i].rebound_speed_mps / kStandardGravityMps2, 1e-12);
    EXPECT_LT(impacts[i].t_separation_s, impacts[i].t_level_s);
  }
  EXPECT_TRUE(impacts.back().pressed_at_end);
  const HubState last = trajectory.At(4.0);
  EXPECT_TRUE(last.in_contact);
  EXPECT_NEAR(last.y_m, 0.3 - 10.0 * kStandardGravityMps2 / 2e5, 1e-9);
  EXPECT_NEAR(last.contact_force_n, 10.0 * kStandardGravityMps2, 1e-4);
  std::printf("KV bounce sequence: %zu impacts to rest, %d steps\n", impacts.size(), trajectory.steps());
}

// docs/methods.md §3c with the contract's rule: a Kelvin-Voigt hub that separates with
// c g / k < v_sep < 2 c g / k cannot climb back to the onset height (v_level^2 =
// v_sep (v_sep - 2 c g/k) < 0, DERIVED from the flight parabola), so the force returns while
// it is still below the onset height: that hop belongs to the same impact.
TEST(ForwardModel, HopBelowTheOnsetHeightStaysWithinItsImpact) {
  // Heavy damping (zeta = 1.06): the only separation of this drop has v_sep = 0.21 m/s,
  // between c g / k = 0.147 and 0.294 m/s.
  const double k = 2e5, c = 3000, g = kStandardGravityMps2;
  const double s = c * g / k;
  const Trajectory trajectory = SimulateSingleImpact(LawId::kKelvinVoigt, {k, c}, 10.0, 2.0, g, 0.3);
  const auto& impacts = trajectory.impacts();
  ASSERT_EQ(impacts.size(), 1u);
  const ImpactTruth& impact = impacts[0];
  EXPECT_TRUE(impact.pressed_at_end);
  // It did leave the floor once: find a force-free instant below the onset height.
  bool found_free_hop = false;
  for (const Trajectory::Segment& segment : trajectory.segments()) {
    if (!segment.pressed && segment.t0_s > impact.t_contact_s && segment.c[0] > 0.0) {
      found_free_hop = true;
      const double v_sep = -segment.c[1];
      EXPECT_GT(v_sep, s);
      EXPECT_LT(v_sep, 2.0 * s);
      const HubState mid = trajectory.At(0.5 * (segment.t0_s + segment.t1_s));
      EXPECT_FALSE(mid.in_contact);
      EXPECT_LT(mid.y_m, 0.3);
      break;
    }
  }
  EXPECT_TRUE(found_free_hop);
}

TEST(ForwardModel, StartingPressedGivesAnIncompleteImpact) {
  DropScenario scenario;
  scenario.setup.mass_kg = 10.0;
  scenario.law_params = {2e5, 300};
  scenario.onset_height_m = 0.3;
  scenario.start_height_m = 0.295;
  scenario.start_velocity_mps = -0.5;
  scenario.end_time_s = 0.5;
  const Trajectory trajectory = SimulateDrop(scenario);
  ASSERT_GE(trajectory.impacts().size(), 2u);
  EXPECT_FALSE(trajectory.impacts()[0].complete);
  EXPECT_TRUE(std::isnan(trajectory.impacts()[0].t_contact_s));
  EXPECT_TRUE(trajectory.impacts()[1].complete);
  EXPECT_NEAR(trajectory.At(0.0).contact_force_n, 2e5 * 0.005 + 300 * 0.5, 1e-9);
}

TEST(ForwardModel, DriftAndSpinAreLinearDecorations) {
  DropScenario scenario;
  scenario.law_params = {2e5, 300};
  scenario.setup.mass_kg = 10.0;
  scenario.start_time_s = 0.1;
  scenario.start_x_m = 0.2;
  scenario.drift_speed_mps = 0.05;
  scenario.start_spin_angle_rad = 1.0;
  scenario.spin_rate_radps = 2.0;
  const Trajectory trajectory = SimulateDrop(scenario);
  const HubState state = trajectory.At(0.6);
  EXPECT_DOUBLE_EQ(state.x_m, 0.2 + 0.05 * 0.5);
  EXPECT_DOUBLE_EQ(state.spin_angle_rad, 1.0 + 2.0 * 0.5);
}

TEST(ForwardModel, BadScenarioIsRejectedWithTheOffendingValue) {
  DropScenario scenario;
  scenario.law_params = {2e5, -3.0};
  try {
    SimulateDrop(scenario);
    FAIL() << "no exception";
  } catch (const std::invalid_argument& e) {
    EXPECT_STREQ(e.what(), "kelvin-voigt: c_ns_per_m = -3 must not be negative; fix the drop scenario");
  }
  scenario.law_params = {2e5, 3.0};
  scenario.end_time_s = scenario.start_time_s;
  EXPECT_THROW(SimulateDrop(scenario), std::invalid_argument);
}

// The templated simulator must agree with the double trajectory and its ceres::Jet
// derivatives with central finite differences (Ceres' own practice, GradientChecker).
template <int N>
using Jet = ceres::Jet<double, N>;

struct FitCase {
  LawId law;
  std::vector<double> params;
};

std::vector<double> SampleTimes(double t0, double t1, double rate_hz) {
  std::vector<double> times;
  for (double t = t0; t <= t1; t += 1.0 / rate_hz) times.push_back(t);
  return times;
}

TEST(ForwardModel, TemplatedHeightsEqualTheTrajectory) {
  const FitCase cases[] = {{LawId::kKelvinVoigt, {2e5, 300}},
                           {LawId::kHuntCrossley, {1e7, 1.4, 0.2}},
                           {LawId::kHertz, {1e7, 1.5, 0.2}},
                           {LawId::kBilinear, {1e5, 3e5, 0.004, 200}},
                           {LawId::kVolumetric, {2e7, 0.3}}};
  for (const FitCase& test_case : cases) {
    const DropScenario scenario = synth::MakeDropScenario(test_case.law, test_case.params,
                                                          MakeTreadGeometry(0.3, 0.0, 0.05), 10.0, 0.3, 0.2, 0.6);
    const Trajectory trajectory = SimulateDrop(scenario);
    const std::vector<double> times = SampleTimes(0.0, 0.6, 2000.0);
    std::vector<double> heights(times.size()), velocities(times.size());
    const SimulationStatus status = SimulateHubHeights(
        scenario.setup, scenario.law_params.data(), scenario.onset_height_m, 0.0, scenario.start_height_m,
        scenario.start_velocity_mps, times.data(), static_cast<int>(times.size()), heights.data(), velocities.data());
    ASSERT_EQ(status, SimulationStatus::kOk);
    for (std::size_t i = 0; i < times.size(); ++i) {
      const HubState state = trajectory.At(times[i]);
      EXPECT_NEAR(heights[i], state.y_m, 1e-13) << ToString(test_case.law) << " t " << times[i];
      EXPECT_NEAR(velocities[i], state.vy_mps, 1e-11) << ToString(test_case.law) << " t " << times[i];
    }
  }
}

TEST(ForwardModel, JetDerivativesMatchCentralFiniteDifferences) {
  // Central differences with relative step 1e-5: truncation error measured ~1e-8 relative
  // (it scales with the step squared: 1e-4 gives ~1e-6); the adaptive step sequence changes
  // with the parameters and adds noise of ~1e-13 m / step. Compared to 1e-6 of the largest
  // sensitivity of each variable (the brief's target); measured worst: ~1.5e-7.
  constexpr double kDerivativeRelative = 1e-6;
  constexpr double kFdStep = 1e-5;
  const FitCase cases[] = {{LawId::kKelvinVoigt, {2e5, 300}},
                           {LawId::kHuntCrossley, {1e7, 1.4, 0.2}},
                           {LawId::kHertz, {1e7, 1.5, 0.2}},
                           {LawId::kBilinear, {1e5, 3e5, 0.004, 200}},
                           {LawId::kVolumetric, {2e7, 0.3}}};
  for (const FitCase& test_case : cases) {
    ContactSetup setup;
    setup.law = test_case.law;
    setup.mass_kg = 10.0;
    setup.tread = MakeTreadGeometry(0.3, 0.0, 0.05);
    const int np = ParameterCount(test_case.law);
    // Variables: law params, onset, start height, start velocity.
    std::vector<double> values = test_case.params;
    values.push_back(0.3);   // onset
    values.push_back(0.32);  // start height (just above the onset: falling in)
    values.push_back(-1.9);  // start velocity
    const int nv = static_cast<int>(values.size());
    const std::vector<double> times = SampleTimes(0.0, 0.08, 2000.0);
    const int ns = static_cast<int>(times.size());
    constexpr int kN = 7;
    ASSERT_LE(nv, kN);
    std::vector<Jet<kN>> jets(nv);
    for (int i = 0; i < nv; ++i) jets[i] = Jet<kN>(values[i], i);
    std::vector<Jet<kN>> heights(ns);
    ASSERT_EQ(SimulateHubHeights(setup, jets.data(), jets[np], 0.0, jets[np + 1], jets[np + 2], times.data(), ns,
                                 heights.data()),
              SimulationStatus::kOk);
    auto simulate = [&](const std::vector<double>& v) {
      std::vector<double> out(ns);
      EXPECT_EQ(SimulateHubHeights(setup, v.data(), v[np], 0.0, v[np + 1], v[np + 2], times.data(), ns, out.data()),
                SimulationStatus::kOk);
      return out;
    };
    double worst_overall = 0.0;
    for (int j = 0; j < nv; ++j) {
      if (test_case.law == LawId::kHertz && j == 1) continue;  // the exponent is fixed at 1.5
      const double step = kFdStep * std::max(std::abs(values[j]), 0.01);
      std::vector<double> plus = values, minus = values;
      plus[j] += step;
      minus[j] -= step;
      const std::vector<double> up = simulate(plus), down = simulate(minus);
      double largest = 0.0;
      for (int i = 0; i < ns; ++i) largest = std::max(largest, std::abs(heights[i].v[j]));
      ASSERT_GT(largest, 0.0) << ToString(test_case.law) << " variable " << j;
      double worst = 0.0;
      for (int i = 0; i < ns; ++i) {
        const double numeric = (up[i] - down[i]) / (2.0 * step);
        worst = std::max(worst, std::abs(heights[i].v[j] - numeric) / largest);
      }
      EXPECT_LT(worst, kDerivativeRelative) << ToString(test_case.law) << " variable " << j;
      worst_overall = std::max(worst_overall, worst);
    }
    std::printf("%s: worst Jet vs finite-difference mismatch %.3g of the largest sensitivity\n",
                ToString(test_case.law).c_str(), worst_overall);
  }
}

}  // namespace
}  // namespace dropfit::analysis
