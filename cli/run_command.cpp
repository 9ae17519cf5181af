#include "cli/run_command.h"

#include <iostream>

#include "cli/exit_status.h"
#include "cli/manifest.h"

namespace dropfit::cli {

int RunRun(const RunCommandOptions& options) {
  Manifest manifest;
  try {
    manifest = ReadManifest(options.folder);
  } catch (const ManifestStructureError& e) {
    std::cerr << "dropfit run: " << e.what() << "\n";
    return kExitBadUsage;
  }
  for (const auto& w : manifest.warnings) std::cerr << "warning: " << w << "\n";
  for (const auto& row : manifest.rows) {
    if (!row.ok()) std::cerr << "error: " << row.error << "\n";
  }
  std::cerr << "dropfit run: the folder run is not built yet (its issue is open); the manifest lists "
            << manifest.rows.size() << " clips; nothing was written\n";
  return kExitBadUsage;
}

}  // namespace dropfit::cli
