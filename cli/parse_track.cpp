#include <memory>

#include "cli/track_command.h"
#include "cli/subcommands.h"

namespace dropfit::cli {

void AddTrackCommand(CLI::App& app, CommandAction& action) {
  auto opts = std::make_shared<TrackCommandOptions>();
  CLI::App* sub = app.add_subcommand("track", "One clip -> sub-pixel hub-marker track (track.csv, result.json)");
  sub->add_option("clip", opts->clip, "Video file or folder of numbered images")->required();
  sub->add_option("--rig", opts->rig_path, "Rig file from `dropfit calibrate`")->required();
  sub->add_option("--fps", opts->fps, "True capture rate [frames/s]");
  sub->add_option("--marker", opts->marker, "Marker kind: auto|quadrant|dot|template");
  sub->add_option("--seed", opts->seed, "Marker position U,V [px] in the first frame");
  sub->add_option("--overlay", opts->overlay_path, "Write an overlay video for checking by eye");
  sub->add_option("-o,--output", opts->out_dir, "Output folder")->required();
  sub->footer("Example:\n  dropfit track demo_clips/drop_0400_a.avi --rig demo_clips/rig.json -o out/track_a");
  sub->callback([opts, &action] { action = [opts] { return RunTrack(*opts); }; });
}

}  // namespace dropfit::cli
