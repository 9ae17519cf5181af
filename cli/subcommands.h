#pragma once
// CLI11 bindings of the subcommands (only main.cpp and parse_*.cpp include this file).
// Each Add<Command>Command adds its subcommand to `app` with options bound to a plain options
// struct, and, when the subcommand is chosen, sets `action` to call Run<Command>(options).

#include <CLI/CLI.hpp>

#include <functional>
#include <optional>

namespace dropfit::cli {

using CommandAction = std::function<int()>;

void AddCalibrateCommand(CLI::App& app, CommandAction& action);
void AddTrackCommand(CLI::App& app, CommandAction& action);
void AddAnalyzeCommand(CLI::App& app, CommandAction& action);
void AddRunCommand(CLI::App& app, CommandAction& action);
void AddRenderCommand(CLI::App& app, CommandAction& action);
void AddReportCommand(CLI::App& app, CommandAction& action);
void AddPlanCommand(CLI::App& app, CommandAction& action);

// Options several subcommands share, each with one help text (parse_shared.cpp).
// --marker-offset M (track, analyze, run).
void AddMarkerOffsetOption(CLI::App* sub, std::optional<double>* offset_m);
// --marker-at U,V (track, analyze), and the old name --seed refused with the new one.
void AddMarkerAtOption(CLI::App* sub, std::string* marker_at);
// --no-gravity-ruler (analyze, run).
void AddGravityRulerFlag(CLI::App* sub, bool* off);

}  // namespace dropfit::cli
