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
  sub->add_option("--mass", opts->mass_kg, "Dropped mass [kg], 0.01..2000")->required();
  sub->add_option("--fps", opts->fps,
                  "True capture rate [frames/s]; overrides the rig's and the container's (a playback rate is wrong)");
  sub->add_option(
      "--drop-height", opts->drop_height_m,
      "Nominal drop height [m], 0.005..5: tread to floor at release; checked against the first impact speed");
  sub->add_option("--free-radius", opts->free_radius_m,
                  "Unloaded radius, hub centre to tread [m], 0.005..1.5; with a floor in the rig it fixes the "
                  "contact-onset height");
  sub->add_option("--tread-width", opts->tread_width_m,
                  "Tread width [m], 0.005..1.5: the volumetric law's contact as a cylinder of this width");
  sub->add_option("--section-radius", opts->section_radius_m,
                  "Tyre section radius [m], 0.005..1.5: the volumetric law's contact as a torus (wins over "
                  "--tread-width); without either the volumetric law is not ranked");
  sub->add_option("--gravity", opts->gravity_mps2, "Local gravity [m/s^2] (default: standard gravity 9.80665)");
  AddMarkerOffsetOption(sub, &opts->marker_offset_m);
  AddGravityRulerFlag(sub, &opts->no_gravity_ruler);
  sub->add_option("--marker", opts->marker, "Hub marker kind: auto|quadrant|dot|template (default auto)");
  AddMarkerAtOption(sub, &opts->marker_at);
  sub->add_option("-o,--output", opts->out_dir, "Output folder for result.json and track.csv")->required();
  sub->footer(
      "Exit status: 0 done (warnings allowed), 1 the clip could not be analysed (reason in result.json and on\n"
      "stderr), 2 bad options or unreadable rig (nothing written).\n"
      "Example (on the demo clips in the source tree):\n  dropfit analyze demo_clips/drop_h250mm_r1.mp4 --rig "
      "demo_clips/rig_exact.json --mass 2.4 --drop-height 0.25 --free-radius 0.1 --section-radius 0.025 -o "
      "out/h250_r1");
  sub->callback([opts, &action] { action = [opts] { return RunAnalyze(*opts); }; });
}

}  // namespace dropfit::cli
