#include "pipeline/marker_offset.h"

#include <cmath>
#include <stdexcept>

namespace dropfit::pipeline {

std::string ToString(MarkerOffsetSource source) {
  switch (source) {
    case MarkerOffsetSource::kOption:
      return "option";
    case MarkerOffsetSource::kManifest:
      return "manifest";
    case MarkerOffsetSource::kGravity:
      return "gravity";
    case MarkerOffsetSource::kNone:
      return "none";
  }
  return "none";
}

MarkerOffsetSource MarkerOffsetSourceFromString(const std::string& text) {
  for (MarkerOffsetSource s : {MarkerOffsetSource::kOption, MarkerOffsetSource::kManifest, MarkerOffsetSource::kGravity,
                               MarkerOffsetSource::kNone}) {
    if (ToString(s) == text) return s;
  }
  throw std::invalid_argument("unknown marker offset source \"" + text + "\"; valid: option, manifest, gravity, none");
}

MarkerOffset ResolveMarkerOffset(std::optional<double> option_m, std::optional<double> manifest_m) {
  if (option_m && std::isfinite(*option_m)) return {*option_m, MarkerOffsetSource::kOption};
  if (manifest_m && std::isfinite(*manifest_m)) return {*manifest_m, MarkerOffsetSource::kManifest};
  return {};
}

}  // namespace dropfit::pipeline
