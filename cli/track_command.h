#pragma once
// `dropfit track`: one clip -> sub-pixel hub-marker track (track.csv, result.json).
//
//   dropfit track CLIP --rig rig.json [--fps N] [--marker-offset M] [--marker auto|quadrant|dot|template]
//                 [--marker-at U,V] [--overlay FILE] -o DIR
//
// Writes DIR/track.csv (docs/formats.md, "track.csv": frame,t_s,u_px,v_px,x_m,y_m,quality; coordinates
// empty where the marker was not found) and DIR/result.json with the tracking fields (clip,
// capture_fps and its source, frames, tracked_frames, y_origin, warnings, errors; the marker
// chosen and why, the lost frame ranges and the options used under "info").
//
// Exit status (cli/exit_status.h): 0 tracked (warnings allowed: frames that cannot be read, as
// in a truncated file or an image folder with a missing or damaged image, are left empty with a
// warning naming them); 1 the clip could not be tracked (nothing decodes, marker never found),
// with the reasons in result.json's errors and on stderr and both files written; 2 bad usage
// or an input the command cannot start from (bad option, unreadable rig, missing clip, no
// capture rate, a rig made for another image size), nothing written.
//
// The pieces below are shared with `analyze` (the clip itself goes through pipeline/clip.h).

#include <iosfwd>
#include <optional>
#include <string>
#include <vector>

#include "calib/rig.h"
#include "cli/results.h"
#include "tracker/track.h"

namespace dropfit::cli {

struct TrackCommandOptions {
  std::string clip;           // video file or folder of numbered images
  std::string rig_path;       // rig.json from `dropfit calibrate`
  std::optional<double> fps;  // true capture rate [frames/s]; overrides rig and container
  // Offset of the marker's plane from the calibrated plane, toward the camera positive [m];
  // |value| <= kMaxMarkerOffsetM (cli/manifest.h); needs a rig with a plane pose (calib/rig.h).
  std::optional<double> marker_offset_m;
  std::string marker = "auto";  // auto|quadrant|dot|template
  std::string marker_at;        // --marker-at "U,V" [px]: the marker's centre in the first frames
  std::string overlay_path;     // optional overlay video (.avi, .mp4, .mov, .mkv)
  std::string out_dir;          // folder for track.csv and result.json
};

// Returns the contract's exit status. Messages and progress go to `err`, the summary to `out`.
int RunTrack(const TrackCommandOptions& options, std::ostream& out, std::ostream& err);
// Same, on std::cout and std::cerr.
int RunTrack(const TrackCommandOptions& options);

// Parses "U,V" (pixels, two finite numbers). Throws std::invalid_argument naming the text.
cv::Point2d ParseMarkerAt(const std::string& text);

// The start `track` and `analyze` share: the marker kind and start point (--marker-at) into `track_options` (then
// validated), the rig file into `rig`, and the clip's existence. Returns the message when the
// command cannot start (exit status 2, nothing written), else nothing.
std::optional<std::string> StartSingleClip(const std::string& marker, const std::string& marker_at,
                                           const std::string& rig_path, const std::string& clip,
                                           tracker::TrackOptions& track_options, calib::Rig& rig);

}  // namespace dropfit::cli
