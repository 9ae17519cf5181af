#pragma once
// `dropfit render`: synthetic drop clips with exact truth, and calibration images.

#include <optional>
#include <string>
#include <vector>

namespace dropfit::cli {

struct RenderCommandOptions {
  std::string out_dir;              // folder to write clips, manifest.csv, truth.json
};

// Returns the contract's exit status.
int RunRender(const RenderCommandOptions& options);

}  // namespace dropfit::cli
