#include "pipeline/capture_rate.h"

#include <cmath>
#include <cstdio>
#include <stdexcept>

namespace dropfit::pipeline {

namespace {

bool Usable(const std::optional<double>& v) { return v && std::isfinite(*v) && *v > 0; }

std::string Num(double v) {
  char buf[48];
  std::snprintf(buf, sizeof buf, "%g", v);
  return buf;
}

}  // namespace

std::string ToString(CaptureRateSource source) {
  switch (source) {
    case CaptureRateSource::kOption:
      return "option";
    case CaptureRateSource::kManifest:
      return "manifest";
    case CaptureRateSource::kRig:
      return "rig";
    case CaptureRateSource::kContainer:
      return "container";
  }
  return "option";
}

CaptureRateSource CaptureRateSourceFromString(const std::string& text) {
  for (CaptureRateSource s : {CaptureRateSource::kOption, CaptureRateSource::kManifest, CaptureRateSource::kRig,
                              CaptureRateSource::kContainer}) {
    if (ToString(s) == text) return s;
  }
  throw std::invalid_argument("unknown capture rate source \"" + text + "\"; valid: option, manifest, rig, container");
}

std::optional<CaptureRate> ResolveCaptureRate(std::optional<double> option_fps, std::optional<double> manifest_fps,
                                              std::optional<double> rig_fps, std::optional<double> container_fps) {
  if (Usable(option_fps)) return CaptureRate{*option_fps, CaptureRateSource::kOption, std::nullopt};
  if (Usable(manifest_fps)) return CaptureRate{*manifest_fps, CaptureRateSource::kManifest, std::nullopt};
  if (Usable(rig_fps)) return CaptureRate{*rig_fps, CaptureRateSource::kRig, std::nullopt};
  if (Usable(container_fps)) {
    CaptureRate r{*container_fps, CaptureRateSource::kContainer, std::nullopt};
    if (*container_fps <= kPlaybackRateMaxFps) {
      r.warning = "the only capture rate found is the container's " + Num(*container_fps) +
                  " frames/s, which looks like a playback rate, not a high-speed capture rate; times and speeds "
                  "are wrong unless it is the true rate: give --fps N (or capture_fps in the manifest or the rig)";
    }
    return r;
  }
  return std::nullopt;
}

}  // namespace dropfit::pipeline
