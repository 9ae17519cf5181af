#pragma once
// The capture rate of a clip and where it came from (docs/formats.md, "Capture rate").
//
// Precedence: the command-line option, the manifest's capture_fps, the rig file, the clip's
// container. A container rate of at most kPlaybackRateMaxFps is taken but flagged: high-speed
// clips are usually stored at a playback rate, which would make every time and speed wrong.

#include <optional>
#include <string>

namespace dropfit::pipeline {

enum class CaptureRateSource { kOption, kManifest, kRig, kContainer };
// "option", "manifest", "rig", "container" (result.json's capture_fps_source).
std::string ToString(CaptureRateSource source);
// Throws std::invalid_argument naming the text and listing the valid ones.
CaptureRateSource CaptureRateSourceFromString(const std::string& text);

struct CaptureRate {
  double fps = 0.0;  // [frames/s]
  CaptureRateSource source = CaptureRateSource::kOption;
  std::optional<std::string> warning;  // set when only the container's rate was found and it
                                       // looks like a playback rate (<= kPlaybackRateMaxFps)
};
// Highest container rate still taken for a playback rate [frames/s].
inline constexpr double kPlaybackRateMaxFps = 120.0;

// The first usable rate in order of precedence; non-finite or non-positive values are skipped.
// Nothing when no rate is known.
std::optional<CaptureRate> ResolveCaptureRate(std::optional<double> option_fps, std::optional<double> manifest_fps,
                                              std::optional<double> rig_fps, std::optional<double> container_fps);

}  // namespace dropfit::pipeline
