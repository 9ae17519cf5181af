#pragma once
// `dropfit track`: one clip -> sub-pixel hub-marker track (track.csv, result.json).

#include <optional>
#include <string>
#include <vector>

namespace dropfit::cli {

struct TrackCommandOptions {
  std::string clip;                 // video file or folder of numbered images
  std::string rig_path;             // rig.json from `dropfit calibrate`
  std::optional<double> fps;        // true capture rate [frames/s]; overrides rig and container
  std::string marker = "auto";      // auto|quadrant|dot|template
  std::string seed;                 // "U,V" [px] to pick one marker among several
  std::string overlay_path;         // optional overlay video
  std::string out_dir;              // folder for track.csv and result.json
};

// Returns the contract's exit status.
int RunTrack(const TrackCommandOptions& options);

}  // namespace dropfit::cli
