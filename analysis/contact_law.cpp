#include "analysis/contact_law.h"

#include <array>
#include <stdexcept>
#include <utility>

namespace dropfit::analysis {

namespace {

struct LawInfo {
  LawId id;
  const char* name;
  std::vector<std::string> parameters;
};

const std::array<LawInfo, 5>& Table() {
  static const std::array<LawInfo, 5> table{{
      {LawId::kKelvinVoigt, "kelvin-voigt", {"k_n_per_m", "c_ns_per_m"}},
      {LawId::kHuntCrossley, "hunt-crossley", {"k", "n", "alpha_s_per_m"}},
      {LawId::kHertz, "hertz", {"k", "n", "alpha_s_per_m"}},
      {LawId::kBilinear, "bilinear", {"k1_n_per_m", "k2_n_per_m", "knee_m", "c_ns_per_m"}},
      {LawId::kVolumetric, "volumetric", {"kv_n_per_m3", "a_s_per_m"}},
  }};
  return table;
}

const LawInfo& Info(LawId law) {
  for (const auto& info : Table()) {
    if (info.id == law) return info;
  }
  throw std::logic_error("contact law missing from the law table");
}

}  // namespace

const std::vector<LawId>& AllLaws() {
  static const std::vector<LawId> laws = [] {
    std::vector<LawId> out;
    for (const auto& info : Table()) out.push_back(info.id);
    return out;
  }();
  return laws;
}

std::string ToString(LawId law) { return Info(law).name; }

LawId LawIdFromString(const std::string& text) {
  for (const auto& info : Table()) {
    if (text == info.name) return info.id;
  }
  std::string valid;
  for (const auto& info : Table()) valid += (valid.empty() ? "" : ", ") + std::string(info.name);
  throw std::invalid_argument("unknown contact law '" + text + "'; valid: " + valid);
}

const std::vector<std::string>& ParameterNames(LawId law) { return Info(law).parameters; }

}  // namespace dropfit::analysis
