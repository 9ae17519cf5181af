// Exact impact relations used for the fits' starting values (analysis/fit_initial_guess.h),
// against the check values of docs/methods.md:
//   §3b Schwager & Poeschel (2007), Granular Matter 9:465-469, eq. 21 (zero-force separation);
//   §4  power-law impact constants C_n = (2/(n+1)) B(1/(n+1), 1/2) (DERIVED there; Johnson
//       1985 §11.4 quotes 2.94, FROM MEMORY);
//   §5  the exact Hunt-Crossley COR relation w - ln(1+w) = -e w - ln(1 - e w) (DERIVED there).
#include "analysis/fit_initial_guess.h"

#include <gtest/gtest.h>

#include <cmath>

#include "analysis/forward_model.h"

namespace dropfit::analysis {
namespace {

constexpr double kTableTol = 2e-9;  // the tables give 9-10 significant digits

TEST(FitInitialGuess, KelvinVoigtRelationsMatchSchwagerAndPoeschelTable) {
  // docs/methods.md §3b dimensionless sweep (zero-force columns).
  EXPECT_NEAR(KelvinVoigtCor(0.1), 0.744079398, kTableTol);
  EXPECT_NEAR(KelvinVoigtOmegaContactTime(0.1), 2.956075325, kTableTol);
  EXPECT_NEAR(KelvinVoigtCor(0.7), 0.210284564, kTableTol);
  EXPECT_NEAR(KelvinVoigtCor(1.2), 0.105210491, kTableTol);
  EXPECT_NEAR(KelvinVoigtOmegaContactTime(2.0), 1.520691993, kTableTol);
  EXPECT_NEAR(KelvinVoigtCor(1.0 / std::sqrt(2.0)), std::exp(-M_PI / 2.0), 1e-12);
  for (double zeta : {0.05, 0.3, 0.9, 1.0, 2.0}) EXPECT_NEAR(KelvinVoigtZetaFromCor(KelvinVoigtCor(zeta)), zeta, 1e-9);
}

TEST(FitInitialGuess, KelvinVoigtDeflectionMatchesTheReferenceCase) {
  // docs/methods.md §3b: m = 10, k = 2e5, c = 300, v = 2 -> max penetration 0.0120967952 m.
  const double omega0 = std::sqrt(2e5 / 10.0);
  const double zeta = 300.0 / (2.0 * std::sqrt(2e5 * 10.0));
  EXPECT_NEAR(2.0 / omega0 * KelvinVoigtDeflectionFactor(zeta), 0.0120967952, 1e-10);
}

TEST(FitInitialGuess, ExactMultiplicativeDampingRelationMatchesTheTable) {
  // docs/methods.md §5, column "exact alpha v", and w = 0.5 -> e = 0.7484349316.
  EXPECT_NEAR(MultiplicativeDampingFromCor(0.9), 0.16648195, 1e-8);
  EXPECT_NEAR(MultiplicativeDampingFromCor(0.7), 0.63482828, 1e-8);
  EXPECT_NEAR(MultiplicativeDampingFromCor(0.3), 3.08708198, 1e-8);
  EXPECT_NEAR(CorFromMultiplicativeDamping(0.5), 0.7484349316, 1e-10);
  EXPECT_EQ(MultiplicativeDampingFromCor(1.0), 0.0);
}

TEST(FitInitialGuess, PowerLawContactTimeConstantsMatchTheBetaFunctionValues) {
  EXPECT_NEAR(PowerLawContactTimeConstant(1.0), M_PI, 1e-12);
  EXPECT_NEAR(PowerLawContactTimeConstant(1.5), 2.943275184, kTableTol);
  EXPECT_NEAR(PowerLawContactTimeConstant(2.0), 2.804364211, kTableTol);
  EXPECT_NEAR(PowerLawExponentFromContactTimeConstant(2.804364211), 2.0, 1e-7);
}

// Without gravity the relations are exact, so the starting values from the forward model's
// own figures are the forward model's parameters.
TEST(FitInitialGuess, StartsFromExactFiguresAreTheTrueParametersWithoutGravity) {
  struct Case {
    LawId law;
    std::vector<double> params;
  };
  const TreadGeometry tread = MakeTreadGeometry(0.3, 0.2, 0.0);
  for (const Case& c : {Case{LawId::kKelvinVoigt, {2e5, 300.0}}, Case{LawId::kHertz, {1e7, 1.5, 0.15}},
                        Case{LawId::kVolumetric, {2.5e7, 0.2}}}) {
    SCOPED_TRACE(ToString(c.law));
    DropScenario s;
    s.setup.law = c.law;
    s.setup.tread = tread;
    s.setup.mass_kg = 10.0;
    s.setup.gravity_mps2 = 0.0;
    s.law_params = c.params;
    s.onset_height_m = 0.3;
    s.start_height_m = 0.31;
    s.start_velocity_mps = -2.0;
    s.end_time_s = 0.1;
    const ImpactTruth i = SimulateDrop(s).impacts().at(0);
    // The separation-speed COR is the one of the no-gravity relations.
    const ImpactGuessFigures f{i.impact_speed_mps, i.separation_speed_mps / i.impact_speed_mps, i.contact_duration_s,
                               i.max_deflection_m};
    const InitialGuessResult g = GuessLawParameters(c.law, f, 10.0, tread);
    ASSERT_TRUE(g.guess) << g.failure;
    const std::vector<double>& start = g.guess->starts.front();
    for (size_t k = 0; k < c.params.size(); ++k) EXPECT_NEAR(start[k] / c.params[k], 1.0, 1e-5) << k;
  }
}

TEST(FitInitialGuess, MissingFiguresAreReportedNotGuessed) {
  const InitialGuessResult g = GuessLawParameters(LawId::kKelvinVoigt, ImpactGuessFigures{2.0, 0.7, 0.0, 0.0}, 10.0,
                                                  MakeTreadGeometry(0.3, 0.2, 0.0));
  EXPECT_FALSE(g.guess);
  EXPECT_NE(g.failure.find("deflection"), std::string::npos);
  EXPECT_THROW(KelvinVoigtZetaFromCor(1.5), std::invalid_argument);
}

}  // namespace
}  // namespace dropfit::analysis
