#include <memory>

#include "cli/render_command.h"
#include "cli/subcommands.h"

namespace dropfit::cli {

void AddRenderCommand(CLI::App& app, CommandAction& action) {
  auto opts = std::make_shared<RenderCommandOptions>();
  CLI::App* sub = app.add_subcommand("render", "Synthetic drop clips with exact truth, and calibration images");
  sub->add_option("-o,--output", opts->out_dir, "Output folder")->required();
  sub->footer("Example:\n  dropfit render -o /tmp/clip_set --law hunt-crossley --height 0.4 --seed 7");
  sub->callback([opts, &action] { action = [opts] { return RunRender(*opts); }; });
}

}  // namespace dropfit::cli
