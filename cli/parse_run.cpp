#include <memory>

#include "cli/run_command.h"
#include "cli/subcommands.h"

namespace dropfit::cli {

void AddRunCommand(CLI::App& app, CommandAction& action) {
  auto opts = std::make_shared<RunCommandOptions>();
  CLI::App* sub = app.add_subcommand("run", "A folder of drop clips -> per-height summary, fitted laws, report");
  sub->add_option("folder", opts->folder, "Clip folder holding manifest.csv")->required();
  sub->add_option("--rig", opts->rig_path, "Rig file from `dropfit calibrate`")->required();
  sub->add_option("-o,--output", opts->out_dir, "Output folder")->required();
  sub->add_option("--jobs", opts->jobs, "Clips analysed in parallel (0 = number of cores)")
      ->check(CLI::Range(0, kMaxJobs));
  AddMarkerOffsetOption(sub, &opts->marker_offset_m);
  sub->add_option("--gravity", opts->gravity_mps2,
                  "Local gravity [m/s^2] for every clip; wins over the manifest's gravity_mps2 (default: standard "
                  "gravity 9.80665)");
  AddGravityRulerFlag(sub, &opts->no_gravity_ruler);
  sub->footer(
      "Example (on the demo clips in the source tree):\n  dropfit run demo_clips --rig demo_clips/rig_exact.json -o "
      "demo_out --jobs 2");
  sub->callback([opts, &action] { action = [opts] { return RunRun(*opts); }; });
}

}  // namespace dropfit::cli
