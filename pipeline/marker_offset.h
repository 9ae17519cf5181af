#pragma once
// The offset of the hub marker's plane from the calibrated plane, and where it came from
// (docs/formats.md, "Marker plane"; the geometry and its sign convention: calib/rig.h, "The
// marker's plane").
//
// Precedence, as for the capture rate (pipeline/capture_rate.h): the command-line option
// (`--marker-offset`), then the manifest's marker_offset_m. Without either the marker is taken
// to lie in the calibrated plane (offset 0, source "none"), unless the gravity ruler's estimate is
// applied (source "gravity"; pipeline/clip.h, MeasureClip; analysis/gravity_ruler.h).

#include <optional>
#include <string>

namespace dropfit::pipeline {

enum class MarkerOffsetSource { kOption, kManifest, kGravity, kNone };
// "option", "manifest", "gravity", "none" (result.json's marker_offset_source).
std::string ToString(MarkerOffsetSource source);
// Throws std::invalid_argument naming the text and listing the valid ones.
MarkerOffsetSource MarkerOffsetSourceFromString(const std::string& text);

struct MarkerOffset {
  double offset_m = 0.0;  // toward the camera positive [m]
  MarkerOffsetSource source = MarkerOffsetSource::kNone;
  // Given by the user (option or manifest), not estimated.
  bool given() const { return source == MarkerOffsetSource::kOption || source == MarkerOffsetSource::kManifest; }
};

// The first offset given in order of precedence (non-finite values are skipped); offset 0 with
// source "none" when neither gives one.
MarkerOffset ResolveMarkerOffset(std::optional<double> option_m, std::optional<double> manifest_m);

}  // namespace dropfit::pipeline
