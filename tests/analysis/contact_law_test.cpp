// Law ids and parameter names are fixed by docs/formats.md ("Law ids").
#include "analysis/contact_law.h"

#include <ceres/jet.h>
#include <gtest/gtest.h>

#include <algorithm>

#include <cmath>

namespace dropfit::analysis {
namespace {

TEST(ContactLaw, IdsAndParameterNamesFollowTheContract) {
  EXPECT_EQ(ToString(LawId::kKelvinVoigt), "kelvin-voigt");
  EXPECT_EQ(ParameterNames(LawId::kKelvinVoigt), (std::vector<std::string>{"k_n_per_m", "c_ns_per_m"}));
  EXPECT_EQ(ParameterNames(LawId::kHuntCrossley), (std::vector<std::string>{"k", "n", "alpha_s_per_m"}));
  EXPECT_EQ(ParameterNames(LawId::kBilinear),
            (std::vector<std::string>{"k1_n_per_m", "k2_n_per_m", "knee_m", "c_ns_per_m"}));
  EXPECT_EQ(ParameterNames(LawId::kVolumetric), (std::vector<std::string>{"kv_n_per_m3", "a_s_per_m"}));
  EXPECT_EQ(AllLaws().size(), 5u);
  for (LawId law : AllLaws()) EXPECT_EQ(LawIdFromString(ToString(law)), law);
}

TEST(ContactLaw, UnknownLawIdIsRejectedWithTheValidList) {
  try {
    LawIdFromString("maxwell");
    FAIL() << "no exception";
  } catch (const std::invalid_argument& e) {
    EXPECT_STREQ(e.what(),
                 "unknown contact law 'maxwell'; valid: kelvin-voigt, hunt-crossley, hertz, bilinear, volumetric, "
                 "bottoming");
  }
}

// The force laws as written in docs/formats.md ("Law ids") and contact_law.h.
TEST(ContactLaw, ForcesFollowTheirDefiningEquations) {
  const TreadGeometry none;
  const double kv[] = {2e5, 300};
  EXPECT_DOUBLE_EQ(ContactForce(LawId::kKelvinVoigt, kv, none, 0.01, 0.5), 2e5 * 0.01 + 300 * 0.5);
  // Never tensile: restitution with fast rebound gives zero, not a negative force.
  EXPECT_EQ(ContactForce(LawId::kKelvinVoigt, kv, none, 0.001, -1.0), 0.0);
  EXPECT_LT(UnclampedContactForce(LawId::kKelvinVoigt, kv, none, 0.001, -1.0), 0.0);
  EXPECT_EQ(ContactForce(LawId::kKelvinVoigt, kv, none, -0.001, 1.0), 0.0);
  // Hunt & Crossley 1975: k delta^n (1 + alpha delta_dot).
  const double hc[] = {1e7, 1.3, 0.2};
  EXPECT_NEAR(ContactForce(LawId::kHuntCrossley, hc, none, 0.004, 1.5), 1e7 * std::pow(0.004, 1.3) * 1.3, 1e-9);
  // Hertz: exponent fixed at 1.5 whatever params[1] holds.
  const double hz[] = {1e7, 99.0, 0.0};
  EXPECT_NEAR(ContactForce(LawId::kHertz, hz, none, 0.004, 0.0), 1e7 * std::pow(0.004, 1.5), 1e-9);
  // Bilinear: continuous at the knee.
  const double bl[] = {1e5, 1e6, 0.01, 50.0};
  EXPECT_NEAR(ContactForce(LawId::kBilinear, bl, none, 0.01, 0.0), 1000.0, 1e-9);
  EXPECT_NEAR(ContactForce(LawId::kBilinear, bl, none, 0.015, 0.2), 1000.0 + 1e6 * 0.005 + 50.0 * 0.2, 1e-9);
  EXPECT_NEAR(ElasticContactForce(LawId::kBilinear, bl, none, 0.01 - 1e-12),
              ElasticContactForce(LawId::kBilinear, bl, none, 0.01 + 1e-12), 1e-5);
  // bottoming (a rendering truth): (k d + k3 <d - knee>^3)(1 + a d_dot), by hand.
  const double bt[] = {6e4, 3e9, 0.012, 0.3};
  EXPECT_DOUBLE_EQ(UnclampedContactForce(LawId::kBottoming, bt, none, 0.010, 1.0), 6e4 * 0.010 * 1.3);
  EXPECT_NEAR(UnclampedContactForce(LawId::kBottoming, bt, none, 0.020, -1.0), (6e4 * 0.02 + 3e9 * 512e-9) * 0.7, 1e-9);
  EXPECT_EQ(std::count(AllLaws().begin(), AllLaws().end(), LawId::kBottoming), 0);
  EXPECT_EQ(RenderableLaws().size(), AllLaws().size() + 1);
}

// docs/methods.md §7c: volumetric law with the torus of §7b (R = 0.25, a = 0.05) and
// kv = 1e8 N/m^3 (Gonthier et al. 2004 form, VERIFIED secondary there).
TEST(ContactLaw, VolumetricElasticForceMatchesTheTorusTable) {
  TreadGeometry torus = MakeTreadGeometry(0.30, 0.0, 0.05);
  const double params[] = {1e8, 0.0};
  // Printed to 5-7 significant digits (0.005 N).
  EXPECT_NEAR(ContactForce(LawId::kVolumetric, params, torus, 0.005, 0.0), 946.50, 0.005);
  EXPECT_NEAR(ContactForce(LawId::kVolumetric, params, torus, 0.010, 0.0), 3723.99, 0.005);
  EXPECT_NEAR(ContactForce(LawId::kVolumetric, params, torus, 0.020, 0.0), 14394.78, 0.005);
  // Damping multiplies: kv V (1 + a delta_dot).
  const double damped[] = {1e8, 0.3};
  EXPECT_NEAR(ContactForce(LawId::kVolumetric, damped, torus, 0.010, 2.0), 3723.994233 * 1.6, 1e-5);
  // Cylinder of unit width (the contract's default): kv w A(r, delta).
  const TreadGeometry unit = MakeTreadGeometry(0.25, 0.0, 0.0);
  EXPECT_NEAR(ContactForce(LawId::kVolumetric, params, unit, 0.010, 0.0), 1e8 * 9.371318255e-4, 1e8 * 1e-12);
}

TEST(ContactLaw, ForceIsDifferentiableWithJetsIncludingTheExponent) {
  using Jet = ceres::Jet<double, 4>;
  const TreadGeometry none;
  const Jet params[] = {Jet(1e7, 0), Jet(1.3, 1), Jet(0.2, 2)};
  const Jet delta(0.004, 3);
  const Jet force = ContactForce(LawId::kHuntCrossley, params, none, delta, Jet(1.5));
  const double base = std::pow(0.004, 1.3);
  EXPECT_NEAR(force.v[0], base * 1.3, 1e-12);
  EXPECT_NEAR(force.v[1], 1e7 * base * std::log(0.004) * 1.3, 1e-6);
  EXPECT_NEAR(force.v[2], 1e7 * base * 1.5, 1e-6);
  EXPECT_NEAR(force.v[3], 1e7 * 1.3 * std::pow(0.004, 0.3) * 1.3, 1e-4);
  // At delta = 0 the force and all its derivatives are zero (no 0 * log 0).
  const Jet at_zero = ContactForce(LawId::kHuntCrossley, params, none, Jet(0.0, 3), Jet(1.5));
  EXPECT_EQ(at_zero.a, 0.0);
  for (int i = 0; i < 4; ++i) EXPECT_TRUE(std::isfinite(at_zero.v[i]));
}

TEST(ContactLaw, InvalidParametersAreNamedWithTheirValue) {
  EXPECT_EQ(ValidateLawParameters(LawId::kKelvinVoigt, {2e5, 300}), std::nullopt);
  EXPECT_EQ(ValidateLawParameters(LawId::kHuntCrossley, {1e7, 7, 0.2}), "hunt-crossley: n = 7 is outside [0.5, 4]");
  EXPECT_EQ(ValidateLawParameters(LawId::kHertz, {1e7, 1.4, 0.2}),
            "hertz: n = 1.4 must be 1.5 (fixed for the hertz law)");
  EXPECT_EQ(ValidateLawParameters(LawId::kBilinear, {1e5, 1e6, 0.0, 1.0}), "bilinear: knee_m = 0 must be positive");
  EXPECT_EQ(ValidateLawParameters(LawId::kVolumetric, {1e8}), "volumetric: expected 2 parameters, got 1");
  EXPECT_EQ(ParameterCount(LawId::kBilinear), 4);
  EXPECT_TRUE(IsMultiplicativeDamping(LawId::kVolumetric));
  EXPECT_FALSE(IsMultiplicativeDamping(LawId::kBilinear));
}

}  // namespace
}  // namespace dropfit::analysis
