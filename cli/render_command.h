#pragma once
// `dropfit render`: synthetic drop clips with exact truth, and calibration images.
//
// One run writes into `out_dir`:
//   <clip>.avi|.mov|.mp4 or <clip>/frame_NNNNN.png   one clip per (height, repeat)
//   manifest.csv      the contract's clip-folder manifest (clip, drop_height_m, mass_kg,
//                     capture_fps, specimen, free_radius_m, tread_width_m/section_radius_m)
//   truth.json        what was drawn: camera, scene, law, per clip the per-frame marker centre
//                     (pixels, mid-exposure) and hub position (metres), per impact the
//                     contract's figures (cli/truth_io.h)
//   rig_exact.json    the rig a perfect calibration gives (synth::RigFromCamera)
//   calib/lens_NN.png, calib/plane.png   checkerboard views (unless calibration is off)
//   render_options.txt  the effective options, one "name = value" per line
//
// The options, their validator and the plan of the set are synth/render_plan.h; the clips and
// calibration images are drawn by synth/render_set.h. This command adds the files above that
// are not images, the progress messages and the exit status.

#include "synth/render_plan.h"

#include <iosfwd>

namespace dropfit::cli {

// Every setting of a render run: default, meaning, unit, valid range (synth/render_plan.h).
using RenderCommandOptions = synth::RenderOptions;
using synth::RenderLawDefaults;
using synth::RenderOptionsFromRecord;
using synth::ValidateRenderOptions;

// Runs the render. Returns the contract's exit status: 0 done, 2 bad options (nothing written).
// Progress and messages go to `err`.
int RunRender(const RenderCommandOptions& options, std::ostream& out, std::ostream& err);
// Same, on std::cout and std::cerr.
int RunRender(const RenderCommandOptions& options);

}  // namespace dropfit::cli
