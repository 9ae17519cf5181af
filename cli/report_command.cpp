#include "cli/report_command.h"

#include <iostream>

#include "cli/exit_status.h"

namespace dropfit::cli {

int RunReport(const ReportCommandOptions& /*options*/) {
  std::cerr << "dropfit report: not built yet (its issue is open); nothing was written\n";
  return kExitBadUsage;
}

}  // namespace dropfit::cli
