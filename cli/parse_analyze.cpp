#include <memory>

#include "cli/analyze_command.h"
#include "cli/subcommands.h"

namespace dropfit::cli {

void AddAnalyzeCommand(CLI::App& app, CommandAction& action) {
  auto opts = std::make_shared<AnalyzeCommandOptions>();
  CLI::App* sub = app.add_subcommand("analyze", "One clip -> impacts, COR, fitted contact laws (result.json, track.csv)");
  sub->add_option("clip", opts->clip, "Video file or folder of numbered images")->required();
  sub->add_option("--rig", opts->rig_path, "Rig file from `dropfit calibrate`")->required();
  sub->add_option("--mass", opts->mass_kg, "Dropped mass [kg]")->required();
  sub->add_option("--fps", opts->fps, "True capture rate [frames/s]");
  sub->add_option("--drop-height", opts->drop_height_m, "Nominal drop height [m]");
  sub->add_option("--free-radius", opts->free_radius_m, "Unloaded radius, hub centre to tread [m]");
  sub->add_option("-o,--output", opts->out_dir, "Output folder")->required();
  sub->footer("Example:\n  dropfit analyze demo_clips/drop_0400_a.avi --rig demo_clips/rig.json --mass 12.5 --drop-height 0.4 --free-radius 0.2 -o out/a");
  sub->callback([opts, &action] { action = [opts] { return RunAnalyze(*opts); }; });
}

}  // namespace dropfit::cli
