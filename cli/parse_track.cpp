#include <memory>

#include "cli/subcommands.h"
#include "cli/track_command.h"

namespace dropfit::cli {

void AddTrackCommand(CLI::App& app, CommandAction& action) {
  auto opts = std::make_shared<TrackCommandOptions>();
  CLI::App* sub = app.add_subcommand("track", "One clip -> sub-pixel hub-marker track (track.csv, result.json)");
  sub->add_option("clip", opts->clip, "Video file (e.g. MJPG .avi) or folder of numbered images (PNG, TIFF, BMP, JPEG)")
      ->required();
  sub->add_option("--rig", opts->rig_path, "Rig file from `dropfit calibrate` (pixels -> metres)")->required();
  sub->add_option("--fps", opts->fps,
                  "True capture rate [frames/s]; wins over the rig's and the container's (a container rate of "
                  "120 or less is taken for a playback rate and warned about)");
  AddMarkerOffsetOption(sub, &opts->marker_offset_m);
  sub->add_option("--marker", opts->marker,
                  "Marker kind: auto (detect; quadrant discs first), quadrant (disc of black and white quarters), "
                  "dot (plain dot, bright or dark), template (any textured patch; needs --marker-at)")
      ->default_val("auto");
  AddMarkerAtOption(sub, &opts->marker_at);
  sub->add_option("--overlay", opts->overlay_path,
                  "Also write a video (.avi, .mp4, .mov, .mkv) showing the found centre, search window and trail");
  sub->add_option("-o,--output", opts->out_dir, "Output folder for track.csv and result.json")->required();
  sub->footer(
      "Exit status: 0 tracked; 1 tracked in part or not at all (reasons in result.json and on stderr);\n"
      "2 bad usage or unusable input (nothing written).\n"
      "Example (on the demo clips in the source tree):\n  dropfit track demo_clips/drop_h150mm_r1.mp4 --rig "
      "demo_clips/rig_exact.json -o out/h150_r1 --overlay out/h150_r1/overlay.avi\n");
  sub->callback([opts, &action] { action = [opts] { return RunTrack(*opts); }; });
}

}  // namespace dropfit::cli
