#include "cli/calibrate_command.h"

#include <iostream>

#include "cli/exit_status.h"

namespace dropfit::cli {

int RunCalibrate(const CalibrateCommandOptions& /*options*/) {
  std::cerr << "dropfit calibrate: not built yet (its issue is open); nothing was written\n";
  return kExitBadUsage;
}

}  // namespace dropfit::cli
