#pragma once
// `dropfit analyze`: one clip -> impacts, COR, fitted contact laws (result.json, track.csv).

#include <optional>
#include <string>
#include <vector>

namespace dropfit::cli {

struct AnalyzeCommandOptions {
  std::string clip;                 // video file or folder of numbered images
  std::string rig_path;             // rig.json
  double mass_kg = 0.0;             // dropped mass [kg]
  std::optional<double> fps;        // true capture rate [frames/s]
  std::optional<double> drop_height_m;   // nominal drop height [m]
  std::optional<double> free_radius_m;   // unloaded radius, hub to tread [m]
  std::string out_dir;              // folder for result.json and track.csv
};

// Returns the contract's exit status.
int RunAnalyze(const AnalyzeCommandOptions& options);

}  // namespace dropfit::cli
