#pragma once
// `dropfit run`: a folder of drop clips -> per-height impact summary, fitted laws, report.

#include <string>

namespace dropfit::cli {

struct RunCommandOptions {
  std::string folder;    // clip folder holding manifest.csv
  std::string rig_path;  // rig.json from `dropfit calibrate`
  std::string out_dir;   // output folder
  int jobs = 0;          // clips in parallel; 0 = number of cores
};

// Returns the contract's exit status.
int RunRun(const RunCommandOptions& options);

}  // namespace dropfit::cli
