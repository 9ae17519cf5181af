#include <memory>

#include "cli/report_command.h"
#include "cli/subcommands.h"

namespace dropfit::cli {

void AddReportCommand(CLI::App& app, CommandAction& action) {
  auto opts = std::make_shared<ReportCommandOptions>();
  CLI::App* sub = app.add_subcommand("report", "Rebuild OUT/report.html from a run's results");
  sub->add_option("out", opts->out_dir, "Output folder of a `dropfit run`")->required();
  sub->footer("Example:\n  dropfit report demo_out");
  sub->callback([opts, &action] { action = [opts] { return RunReport(*opts); }; });
}

}  // namespace dropfit::cli
