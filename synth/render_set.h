#pragma once
// Renders one clip set with known truth (what `dropfit render` makes), in two steps so that a
// set that cannot be made writes nothing:
//   PlanRenderSet   checks the options and plans every clip (synth/render_plan.h);
//   RenderSet       writes into options.out_dir, which it creates:
//                     <clip>.avi|.mov|.mp4 or <clip>/frame_NNNNN.png   one clip per (height, repeat),
//                       through the renderer (synth/render.h) and media/'s frame writer;
//                     calib/lens_NN.png, calib/plane.png   checkerboard views
//                       (synth/render_calibration.h), unless options.calibration is false;
//                   and returns what it drew as plain data (synth/render_truth.h).
// The manifest, truth.json, the exact rig and the options text are the command's files
// (cli/render_command.h). The output depends on the options only: not on the order the clips
// are rendered in, nor on how many at once.

#include <cstddef>
#include <functional>
#include <memory>
#include <vector>

#include "synth/camera.h"
#include "synth/render.h"
#include "synth/render_plan.h"
#include "synth/render_truth.h"

namespace dropfit::synth {

// A set planned from valid options; nothing written yet. Move-only (it owns the renderer).
struct RenderSetPlan {
  struct Clip {
    std::string clip_id;         // ClipName(height, repeat)
    std::string file;            // clip_id + the format's extension ("" for PNG folders)
    double drop_height_m = 0.0;  // nominal
    ClipPlan plan;
  };
  RenderOptions options;
  RenderPlan plan;
  PinholeCamera camera;
  std::unique_ptr<const SceneRenderer> renderer;
  std::vector<Clip> clips;  // heights in the given order, each with its repeats 1..repeats
};

// Checks the options and plans every clip. Throws std::invalid_argument with
// ValidateRenderOptions' message, or naming the height whose marker never comes into view.
RenderSetPlan PlanRenderSet(const RenderOptions& options);

// Calls render_clip(i) once for every clip index i in [0, count), possibly concurrently
// (render_clip is safe to call so), e.g. cli::ParallelFor on options.threads threads.
using ClipLoop = std::function<void(size_t count, const std::function<void(size_t)>& render_clip)>;
// Told each clip as it is done, with the seconds it took; calls never overlap.
using ClipDone = std::function<void(const ClipTruth& clip, double seconds)>;

// Writes the calibration images, then the clips (through `loop`; one after another when it is
// empty), and returns the truth; its tool_version is left empty. Throws std::runtime_error when
// a file cannot be written (media/video_out.h for the clips).
RenderTruth RenderSet(const RenderSetPlan& set, const ClipLoop& loop = {}, const ClipDone& clip_done = {});

}  // namespace dropfit::synth
