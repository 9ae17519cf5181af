#pragma once
// `dropfit report`: rebuilds OUT/report.html from the results of a run, re-running nothing.

#include <string>

namespace dropfit::cli {

struct ReportCommandOptions {
  std::string out_dir;  // the output folder of a `dropfit run`
};

// Returns the contract's exit status.
int RunReport(const ReportCommandOptions& options);

}  // namespace dropfit::cli
