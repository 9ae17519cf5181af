// CLI11 bindings shared by several subcommands (cli/subcommands.h).
#include "cli/subcommands.h"

namespace dropfit::cli {

void AddMarkerOffsetOption(CLI::App* sub, std::optional<double>* offset_m) {
  sub->add_option("--marker-offset", *offset_m,
                  "Offset [m] of the hub marker's plane from the calibrated plane (the board's), toward the camera "
                  "positive (e.g. 0.03 for a hub face 30 mm in front of the tyre's mid-plane); wins over the "
                  "manifest's marker_offset_m; needs a rig with lens views (the plane's pose)");
}

void AddGravityRulerFlag(CLI::App* sub, bool* off) {
  sub->add_flag("--no-gravity-ruler", *off,
                "Do not estimate the marker's plane from the free flights (the gravity ruler; see README \"Gravity as "
                "the ruler\")");
}

}  // namespace dropfit::cli
