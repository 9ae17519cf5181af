#include <memory>

#include "cli/calibrate_command.h"
#include "cli/subcommands.h"

namespace dropfit::cli {

void AddCalibrateCommand(CLI::App& app, CommandAction& action) {
  auto opts = std::make_shared<CalibrateCommandOptions>();
  CLI::App* sub = app.add_subcommand("calibrate", "Checkerboard images -> rig file (once per camera set-up)");
  sub->add_option("inputs", opts->inputs, "Checkerboard images, folders of images, or a video of the board being moved")
      ->required();
  sub->add_option("--board", opts->board, "Inner corners, columns x rows (e.g. 9x6 for a board of 10 x 7 squares)")
      ->required();
  sub->add_option("--square", opts->square_m, "Side of one square [m], 0.002..0.3 (e.g. 0.025 for 25 mm)")->required();
  sub->add_option("--plane", opts->plane_image, "Image whose board lies in the drop plane")->required();
  sub->add_option("--corner-height", opts->corner_height_m,
                  "Height of the plane view's lowest inner-corner row above the floor [m], 0..3");
  sub->add_option("--corner-height-sd", opts->corner_height_sd_m,
                  "Standard uncertainty of --corner-height [m], 0..1; part of the floor's uncertainty in the rig; "
                  "default 0.0005 (a steel rule read by eye)");
  sub->add_option("--up", opts->up, "Image side that physical up points to: top|bottom|left|right; default top");
  sub->add_option("--fps", opts->fps, "Capture rate of clips filmed with this rig [frames/s]");
  sub->add_flag("--force", opts->force, "Write the rig despite too few views or an RMS reprojection error above 1 px");
  sub->add_option("-o,--output", opts->out_path, "Rig file to write (JSON)")->required();
  sub->footer(
      "Refused (exit 2, nothing written) when no board is found, the plane view shows none, fewer than 5 views\n"
      "are usable or the RMS reprojection error is above 1 px (the last two pass with --force).\nExample:\n  dropfit "
      "calibrate calib_images/ --board 9x6 --square 0.025 --plane calib_images/plane.png --corner-height 0.100 -o "
      "rig.json");
  sub->callback([opts, &action] { action = [opts] { return RunCalibrate(*opts); }; });
}

}  // namespace dropfit::cli
