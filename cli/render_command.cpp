#include "cli/render_command.h"

#include <iostream>

#include "cli/exit_status.h"

namespace dropfit::cli {

int RunRender(const RenderCommandOptions& /*options*/) {
  std::cerr << "dropfit render: not built yet (its issue is open); nothing was written\n";
  return kExitBadUsage;
}

}  // namespace dropfit::cli
