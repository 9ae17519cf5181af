#include "tracker/marker_kind.h"

#include <stdexcept>
#include <utility>

namespace dropfit::tracker {

namespace {
constexpr std::pair<MarkerKind, const char*> kKinds[] = {{MarkerKind::kAuto, "auto"},
                                                         {MarkerKind::kQuadrant, "quadrant"},
                                                         {MarkerKind::kDot, "dot"},
                                                         {MarkerKind::kTemplate, "template"}};
}  // namespace

std::string ToString(MarkerKind kind) {
  for (const auto& [value, name] : kKinds) {
    if (value == kind) return name;
  }
  return "auto";
}

MarkerKind MarkerKindFromString(const std::string& text) {
  for (const auto& [value, name] : kKinds) {
    if (text == name) return value;
  }
  std::string valid;
  for (const auto& [value, name] : kKinds) valid += (valid.empty() ? "" : ", ") + std::string(name);
  throw std::invalid_argument("unknown marker kind '" + text + "'; valid: " + valid);
}

}  // namespace dropfit::tracker
