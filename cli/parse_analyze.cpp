#include <memory>

#include "cli/analyze_command.h"
#include "cli/subcommands.h"

namespace dropfit::cli {

void AddAnalyzeCommand(CLI::App& app, CommandAction& action) {
  auto opts = std::make_shared<AnalyzeCommandOptions>();
  CLI::App* sub = app.add_subcommand(
      "analyze", "One clip -> hub track, impacts, COR with uncertainties, set-up checks (result.json, track.csv)");
  sub->add_option("clip", opts->clip, "Video file or folder of numbered images")->required();
  sub->add_option("--rig", opts->rig_path, "Rig file from `dropfit calibrate`")->required();
  sub->add_option("--mass", opts->mass_kg, "Dropped mass [kg], (0, 10000]")->required();
  sub->add_option("--fps", opts->fps,
                  "True capture rate [frames/s]; overrides the rig's and the container's (a playback rate is wrong)");
  sub->add_option("--drop-height", opts->drop_height_m,
                  "Nominal drop height [m]: tread to floor at release; checked against the first impact speed");
  sub->add_option(
      "--free-radius", opts->free_radius_m,
      "Unloaded radius, hub centre to tread [m]; with a floor in the rig it fixes the contact-onset height");
  sub->add_option("--gravity", opts->gravity_mps2, "Local gravity [m/s^2] (default: standard gravity 9.80665)");
  AddMarkerOffsetOption(sub, &opts->marker_offset_m);
  AddGravityRulerFlag(sub, &opts->no_gravity_ruler);
  sub->add_option("--marker", opts->marker, "Hub marker kind: auto|quadrant|dot|template (default auto)");
  AddMarkerAtOption(sub, &opts->marker_at);
  sub->add_option("-o,--output", opts->out_dir, "Output folder for result.json and track.csv")->required();
  sub->footer(
      "Exit status: 0 done (warnings allowed), 1 the clip could not be analysed (reason in result.json and on\n"
      "stderr), 2 bad options or unreadable rig (nothing written).\n"
      "Example:\n  dropfit analyze demo_clips/drop_0400_a.avi --rig demo_clips/rig.json --mass 12.5 --drop-height 0.4 "
      "--free-radius 0.2 -o out/a");
  sub->callback([opts, &action] { action = [opts] { return RunAnalyze(*opts); }; });
}

}  // namespace dropfit::cli
