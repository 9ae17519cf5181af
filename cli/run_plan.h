#pragma once
// `dropfit plan`: which frame rate, scale, exposure and repeats a drop test needs, by simulation
// (plan/plan.h; docs/methods.md §22). Writes plan.json (docs/formats.md, "plan.json") and
// plan.html into the output folder and prints the table.

#include <cstdint>
#include <filesystem>
#include <functional>
#include <iosfwd>
#include <string>
#include <vector>

#include "plan/plan.h"

namespace dropfit::cli {

struct PlanCommandOptions {
  plan::PlanOptions plan;
  std::string out_dir = "plan_out";  // output folder (created)
  int render = 0;                    // --render N: N rendered clips per height at the chosen setting; [0, 200]
};

// Returns the contract's exit status: 0 done (whether or not a setting meets the targets), 2 bad
// usage. The table goes to `out`; progress to `err`, only when `err` is std::cerr on a terminal.
int RunPlan(const PlanCommandOptions& options, std::ostream& out, std::ostream& err);
int RunPlan(const PlanCommandOptions& options);

// One rendered clip's figures, analysed on the road of `dropfit run` (pipeline::OpenClip, then
// pipeline::AnalyzeClip with the exact rig of the setting's camera): the clip is rendered by
// synth/render.h as a lossless FFV1 file into `work_dir` (removed afterwards) with the span
// plan::PlanClipSpan gives, sub-frame phase and noise from `seed`.
plan::ClipFigures RenderAndMeasure(const plan::PlanOptions& options, const plan::PlannedSpecimen& specimen,
                                   const plan::RateOffer& rate, double scale_m_per_px, double height_m, uint64_t seed,
                                   const std::filesystem::path& work_dir);

// N such clips on `threads` threads; `done` is told each finished clip (calls never overlap).
std::vector<plan::ClipFigures> RenderCheck(const plan::PlanOptions& options, const plan::PlannedSpecimen& specimen,
                                           const plan::RateOffer& rate, double scale_m_per_px, double height_m, int n,
                                           uint64_t seed, int threads, const std::filesystem::path& work_dir,
                                           const std::function<void(int, int)>& done = {});

}  // namespace dropfit::cli
