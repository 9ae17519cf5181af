#pragma once
// `dropfit report`: rebuilds OUT/report.html from the results of a run, re-running nothing.

#include <filesystem>
#include <iosfwd>
#include <string>
#include <vector>

#include "cli/report_html.h"

namespace dropfit::cli {

struct ReportCommandOptions {
  std::string out_dir;  // the output folder of a `dropfit run`
};

// Returns the contract's exit status: 2 when OUT/summary.json cannot be read (nothing
// written), 1 when some clip results could not be read (the rest is reported), else 0.
// Messages go to `err`.
int RunReport(const ReportCommandOptions& options, std::ostream& out, std::ostream& err);
// Same, on std::cout and std::cerr.
int RunReport(const ReportCommandOptions& options);

// Reads every OUT/clips/<id>/result.json (and track.csv beside it), in clip-id order.
// Unreadable ones are skipped and described in `problems`.
std::vector<ClipReportData> ReadClipResults(const std::filesystem::path& out_dir, std::vector<std::string>& problems);

// "built YYYY-MM-DD HH:MM UTC".
std::string NowText();

}  // namespace dropfit::cli
