// CLI11 bindings shared by several subcommands (cli/subcommands.h).
#include "cli/subcommands.h"

namespace dropfit::cli {

void AddMarkerOffsetOption(CLI::App* sub, std::optional<double>* offset_m) {
  sub->add_option("--marker-offset", *offset_m,
                  "Offset [m] of the hub marker's plane from the calibrated plane (the board's), toward the camera "
                  "positive (e.g. 0.03 for a hub face 30 mm in front of the tyre's mid-plane); wins over the "
                  "manifest's marker_offset_m; needs a rig with lens views (the plane's pose)");
}

void AddMarkerAtOption(CLI::App* sub, std::string* marker_at) {
  sub->add_option("--marker-at", *marker_at,
                  "U,V [px]: the hub marker's centre in the first frames, to pick it among several (and the patch "
                  "a template marker follows)");
  // The old name of --marker-at; `dropfit render` keeps --seed for its random seed.
  static std::string old_seed;  // never read: giving --seed fails the parse with the new name
  // (A hidden option is named "" in CLI11's messages, so it stays listed, in a group of its own.)
  sub->add_option("--seed", old_seed, "Renamed: the marker's start point is --marker-at U,V")
      ->group("Renamed")
      ->check(CLI::Validator(
          [](std::string&) {
            return std::string(
                "the marker's start point is now --marker-at U,V (--seed is the random seed of `dropfit render` only)");
          },
          "", "renamed"));
}

void AddGravityRulerFlag(CLI::App* sub, bool* off) {
  sub->add_flag("--no-gravity-ruler", *off,
                "Do not estimate the marker's plane from the free flights (the gravity ruler; see README \"Gravity as "
                "the ruler\")");
}

}  // namespace dropfit::cli
