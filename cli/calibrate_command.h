#pragma once
// `dropfit calibrate`: checkerboard images -> rig file (once per camera set-up).

#include <optional>
#include <string>
#include <vector>

namespace dropfit::cli {

struct CalibrateCommandOptions {
  std::vector<std::string> inputs;  // image files, folders of images, or a video of the board
  std::string board = "9x6";        // inner corners, columns x rows
  double square_m = 0.025;          // checkerboard square size [m]
  std::string plane_image;          // the view whose board lies in the drop plane
  std::optional<double> corner_height_m;  // height of the plane view's lowest inner-corner row above the floor [m]
  std::string up = "top";           // image side that physical up points to
  std::optional<double> fps;        // capture rate of the clips filmed with this rig [frames/s]
  std::string out_path;             // rig.json to write
};

// Returns the contract's exit status.
int RunCalibrate(const CalibrateCommandOptions& options);

}  // namespace dropfit::cli
