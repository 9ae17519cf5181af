#include "cli/track_command.h"

#include <iostream>

#include "cli/exit_status.h"

namespace dropfit::cli {

int RunTrack(const TrackCommandOptions& /*options*/) {
  std::cerr << "dropfit track: not built yet (its issue is open); nothing was written\n";
  return kExitBadUsage;
}

}  // namespace dropfit::cli
