#include "analysis/contact_law.h"

#include <array>
#include <cmath>
#include <sstream>
#include <stdexcept>
#include <utility>

namespace dropfit::analysis {

namespace {

struct LawInfo {
  LawId id;
  const char* name;
  std::vector<std::string> parameters;
};

const std::array<LawInfo, 6>& Table() {
  static const std::array<LawInfo, 6> table{{
      {LawId::kKelvinVoigt, "kelvin-voigt", {"k_n_per_m", "c_ns_per_m"}},
      {LawId::kHuntCrossley, "hunt-crossley", {"k", "n", "alpha_s_per_m"}},
      {LawId::kHertz, "hertz", {"k", "n", "alpha_s_per_m"}},
      {LawId::kBilinear, "bilinear", {"k1_n_per_m", "k2_n_per_m", "knee_m", "c_ns_per_m"}},
      {LawId::kVolumetric, "volumetric", {"kv_n_per_m3", "a_s_per_m"}},
      {LawId::kBottoming, "bottoming", {"k_n_per_m", "k3_n_per_m3", "knee_m", "a_s_per_m"}},
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
    for (const auto& info : Table()) {
      if (info.id != LawId::kBottoming) out.push_back(info.id);
    }
    return out;
  }();
  return laws;
}

const std::vector<LawId>& RenderableLaws() {
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

int ParameterCount(LawId law) { return static_cast<int>(Info(law).parameters.size()); }

bool IsMultiplicativeDamping(LawId law) {
  return law == LawId::kHuntCrossley || law == LawId::kHertz || law == LawId::kVolumetric || law == LawId::kBottoming;
}

std::optional<std::string> ValidateLawParameters(LawId law, const std::vector<double>& params) {
  const auto& names = ParameterNames(law);
  std::ostringstream message;
  message << ToString(law) << ": ";
  if (params.size() != names.size()) {
    message << "expected " << names.size() << " parameters, got " << params.size();
    return message.str();
  }
  for (std::size_t i = 0; i < params.size(); ++i) {
    if (!std::isfinite(params[i])) {
      message << names[i] << " = " << params[i] << " is not finite";
      return message.str();
    }
  }
  auto fail = [&](std::size_t i, const char* requirement) -> std::optional<std::string> {
    message << names[i] << " = " << params[i] << " " << requirement;
    return message.str();
  };
  switch (law) {
    case LawId::kKelvinVoigt:
      if (!(params[0] > 0.0)) return fail(0, "must be positive");
      if (!(params[1] >= 0.0)) return fail(1, "must not be negative");
      break;
    case LawId::kHuntCrossley:
      if (!(params[0] > 0.0)) return fail(0, "must be positive");
      if (!(params[1] >= kHuntCrossleyExponentMin && params[1] <= kHuntCrossleyExponentMax)) {
        return fail(1, "is outside [0.5, 4]");
      }
      if (!(params[2] >= 0.0)) return fail(2, "must not be negative");
      break;
    case LawId::kHertz:
      if (!(params[0] > 0.0)) return fail(0, "must be positive");
      if (params[1] != 1.5) return fail(1, "must be 1.5 (fixed for the hertz law)");
      if (!(params[2] >= 0.0)) return fail(2, "must not be negative");
      break;
    case LawId::kBilinear:
      if (!(params[0] > 0.0)) return fail(0, "must be positive");
      if (!(params[1] > 0.0)) return fail(1, "must be positive");
      if (!(params[2] > 0.0)) return fail(2, "must be positive");
      if (!(params[3] >= 0.0)) return fail(3, "must not be negative");
      break;
    case LawId::kVolumetric:
      if (!(params[0] > 0.0)) return fail(0, "must be positive");
      if (!(params[1] >= 0.0)) return fail(1, "must not be negative");
      break;
    case LawId::kBottoming:
      if (!(params[0] > 0.0)) return fail(0, "must be positive");
      if (!(params[1] >= 0.0)) return fail(1, "must not be negative");
      if (!(params[2] > 0.0)) return fail(2, "must be positive");
      if (!(params[3] >= 0.0)) return fail(3, "must not be negative");
      break;
  }
  return std::nullopt;
}

}  // namespace dropfit::analysis
