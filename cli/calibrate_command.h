#pragma once
// `dropfit calibrate`: checkerboard images -> rig file (once per camera set-up).
//
//   dropfit calibrate IMAGES_OR_FOLDER_OR_VIDEO... --board 9x6 --square 0.025 --plane IMAGE
//                     [--corner-height M] [--corner-height-sd M] [--up top|bottom|left|right] [--fps N] [--force] -o
//                     rig.json
//
// Reads the inputs (calib/calibration_input.h), calibrates (calib/calibrate.h), prints the
// quality figures, and writes the rig (cli/rig_io.h) with the effective options under
// "calibrate_options". Exit status: 0 rig written (warnings on stderr); 2 bad usage, an input
// that cannot be read, or a calibration refused by its quality gates (the reason and what to do
// on stderr), with nothing written.

#include <iosfwd>
#include <optional>
#include <string>
#include <vector>

namespace dropfit::cli {

struct CalibrateCommandOptions {
  std::vector<std::string> inputs;        // image files, folders of images, or a video of the board
  std::string board;                      // inner corners, columns x rows; required (no default)
  std::optional<double> square_m;         // checkerboard square size [m], 0.002..0.3; required (no default)
  std::string plane_image;                // the view whose board lies in the drop plane
  std::optional<double> corner_height_m;  // height of the plane view's lowest inner-corner row above the floor [m]
  double corner_height_sd_m = 0.0005;     // its standard uncertainty [m], 0..1 (calib::CalibrateOptions)
  std::string up = "top";                 // image side that physical up points to
  std::optional<double> fps;              // capture rate of the clips filmed with this rig [frames/s]
  bool force = false;                     // write the rig despite too few views or a high RMS (with warnings)
  std::string out_path;                   // rig.json to write
};

// Returns the contract's exit status. Messages go to `err`, the summary to `out`.
int RunCalibrate(const CalibrateCommandOptions& options, std::ostream& out, std::ostream& err);
// Same, on std::cout and std::cerr.
int RunCalibrate(const CalibrateCommandOptions& options);

}  // namespace dropfit::cli
