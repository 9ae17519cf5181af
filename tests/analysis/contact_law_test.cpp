// Law ids and parameter names are fixed by ../shared/contract.md ("law ids").
#include "analysis/contact_law.h"

#include <gtest/gtest.h>

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
                 "unknown contact law 'maxwell'; valid: kelvin-voigt, hunt-crossley, hertz, bilinear, volumetric");
  }
}

}  // namespace
}  // namespace dropfit::analysis
