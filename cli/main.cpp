// dropfit's entry point: parse argv with CLI11 into a subcommand's options struct and run it.
// Everything else lives in the libraries; see cli/*_command.h for the Run<Command> functions.
#include <glog/logging.h>

#include <exception>
#include <iostream>

#include "cli/exit_status.h"
#include "cli/subcommands.h"
#include "dropfit/version.h"
#include "media/library_log.h"

int main(int argc, char** argv) {
  // Ceres logs through glog; dropfit reports problems through its own messages.
  FLAGS_minloglevel = 3;
  google::InitGoogleLogging(argv[0]);

  CLI::App app{
      "dropfit: drop-test video analysis. From high-speed clips of a specimen dropped in a rig, it gives\n"
      "calibrated hub trajectories, impact and rebound speeds, coefficient of restitution, contact\n"
      "duration, deflection, peak force, and fitted contact laws with uncertainties.\n\n"
      "Typical day: `dropfit calibrate` once per camera set-up, then `dropfit run FOLDER --rig rig.json -o OUT`.",
      "dropfit"};
  app.set_version_flag("--version", std::string("dropfit ") + dropfit::kVersion);
  app.require_subcommand(1, 1);
  app.fallthrough();  // --verbose also after the subcommand
  bool verbose = false;
  app.add_flag("--verbose", verbose,
               "Let the video decoder's (FFmpeg's) and OpenCV's own log lines through (default: quiet; dropfit "
               "reports a clip's problems in its own words)");
  app.footer("Run `dropfit <command> --help` for a command's options, units and a worked example.");

  dropfit::cli::CommandAction action;
  dropfit::cli::AddCalibrateCommand(app, action);
  dropfit::cli::AddTrackCommand(app, action);
  dropfit::cli::AddAnalyzeCommand(app, action);
  dropfit::cli::AddRunCommand(app, action);
  dropfit::cli::AddRenderCommand(app, action);
  dropfit::cli::AddReportCommand(app, action);
  dropfit::cli::AddPlanCommand(app, action);

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    const int code = app.exit(e);
    return code == 0 ? dropfit::cli::kExitDone : dropfit::cli::kExitBadUsage;
  }
  if (!action) return dropfit::cli::kExitBadUsage;
  dropfit::media::SetLibraryLogQuiet(!verbose);
  try {
    return action();
  } catch (const std::exception& e) {
    std::cerr << "dropfit: " << e.what() << "\n";
    return dropfit::cli::kExitBadUsage;
  }
}
