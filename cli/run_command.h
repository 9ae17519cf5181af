#pragma once
// `dropfit run`: a folder of drop clips -> per-height impact summary, fitted laws, report.

#include <iosfwd>
#include <optional>
#include <string>

namespace dropfit::cli {

// The most clips `run` analyses at once (--jobs).
inline constexpr int kMaxJobs = 256;

struct RunCommandOptions {
  std::string folder;    // clip folder holding manifest.csv
  std::string rig_path;  // rig.json from `dropfit calibrate`
  std::string out_dir;   // output folder
  int jobs = 0;          // clips in parallel; 0 = number of cores; [0, kMaxJobs]
  // Offset of the marker's plane from the calibrated plane for every clip, toward the camera
  // positive [m]; wins over the manifest's marker_offset_m; |value| <= kMaxMarkerOffsetM
  // (cli/manifest.h); needs a rig with a plane pose (calib/rig.h).
  std::optional<double> marker_offset_m;
  std::optional<double> gravity_mps2;  // local gravity [m/s^2], (0, 100]; wins over the manifest's gravity_mps2
  bool no_gravity_ruler = false;       // --no-gravity-ruler: no marker-plane estimate from the flights
};

// Returns the contract's exit status. Messages and progress go to `err` (progress rewritten in
// place only when `err` is std::cerr on a terminal); `out` receives nothing today.
int RunRun(const RunCommandOptions& options, std::ostream& out, std::ostream& err);
// Same, on std::cout and std::cerr.
int RunRun(const RunCommandOptions& options);

}  // namespace dropfit::cli
