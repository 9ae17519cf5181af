#include "cli/analyze_command.h"

#include <iostream>

#include "cli/exit_status.h"

namespace dropfit::cli {

int RunAnalyze(const AnalyzeCommandOptions& /*options*/) {
  std::cerr << "dropfit analyze: not built yet (its issue is open); nothing was written\n";
  return kExitBadUsage;
}

}  // namespace dropfit::cli
