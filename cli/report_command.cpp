#include "cli/report_command.h"

#include <algorithm>
#include <chrono>
#include <ctime>
#include <filesystem>
#include <iostream>

#include "cli/atomic_write.h"
#include "cli/exit_status.h"
#include "cli/report_html.h"
#include "cli/results.h"

namespace dropfit::cli {

std::vector<ClipReportData> ReadClipResults(const std::filesystem::path& out_dir, std::vector<std::string>& problems) {
  std::vector<ClipReportData> clips;
  const std::filesystem::path clips_dir = out_dir / "clips";
  if (!std::filesystem::is_directory(clips_dir)) return clips;
  std::vector<std::filesystem::path> folders;
  for (const auto& entry : std::filesystem::directory_iterator(clips_dir)) {
    if (entry.is_directory()) folders.push_back(entry.path());
  }
  std::sort(folders.begin(), folders.end());
  for (const auto& folder : folders) {
    if (!std::filesystem::exists(folder / "result.json")) continue;
    try {
      ClipReportData data;
      data.result = ReadClipResult(folder / "result.json");
      if (std::filesystem::exists(folder / "track.csv")) data.track = ReadTrackCsv(folder / "track.csv");
      clips.push_back(std::move(data));
    } catch (const std::exception& e) {
      problems.push_back(e.what());
    }
  }
  return clips;
}

std::string NowText() {
  const std::time_t now = std::chrono::system_clock::to_time_t(std::chrono::system_clock::now());
  char buf[64];
  std::strftime(buf, sizeof(buf), "built %Y-%m-%d %H:%M UTC", std::gmtime(&now));
  return buf;
}

int RunReport(const ReportCommandOptions& options, std::ostream& /*out*/, std::ostream& err) {
  const std::filesystem::path out(options.out_dir);
  Summary summary;
  try {
    summary = ReadSummaryJson(out / "summary.json");
  } catch (const std::exception& e) {
    err << "dropfit report: " << e.what() << "; give the output folder of a `dropfit run`\n";
    return kExitBadUsage;
  }
  std::vector<std::string> problems;
  std::vector<ClipReportData> clips = ReadClipResults(out, problems);
  // Only the clips of the run's manifest: a result left by a row since removed is not the run's.
  if (!summary.clips.empty()) {
    std::erase_if(clips, [&](const ClipReportData& c) {
      return std::find(summary.clips.begin(), summary.clips.end(), c.result.clip) == summary.clips.end();
    });
  }
  for (const std::string& p : problems) {
    err << "dropfit report: skipped " << p << "\n";
    summary.warnings.push_back({"", "report: skipped " + p});
  }
  WriteFileAtomically(out / "report.html", BuildReportHtml(summary, clips, NowText()));
  err << "dropfit report: wrote " << (out / "report.html").string() << "\n";
  return problems.empty() ? kExitDone : kExitPartial;
}

int RunReport(const ReportCommandOptions& options) { return RunReport(options, std::cout, std::cerr); }

}  // namespace dropfit::cli
