#include "cli/render_command.h"

#include <chrono>
#include <cstddef>
#include <filesystem>
#include <functional>
#include <iomanip>
#include <iostream>
#include <mutex>
#include <sstream>
#include <stdexcept>
#include <string>
#include <vector>

#include "cli/atomic_write.h"
#include "cli/exit_status.h"
#include "cli/parallel_for.h"
#include "cli/rig_io.h"
#include "cli/truth_io.h"
#include "dropfit/version.h"
#include "synth/camera.h"
#include "synth/render_calibration.h"
#include "synth/render_set.h"

namespace dropfit::cli {

namespace {

namespace fs = std::filesystem;

std::string Fmt(double v) { return synth::FormatRecordNumber(v); }

void WriteManifest(const fs::path& path, const RenderCommandOptions& o, const std::vector<ClipTruth>& clips) {
  std::ostringstream csv;
  csv << "# Rendered by dropfit render; truth in truth.json\n";
  csv << "clip,drop_height_m,mass_kg,capture_fps,specimen,free_radius_m";
  if (o.section_radius_m > 0) {
    csv << ",section_radius_m";
  } else if (o.tread_width_m > 0) {
    csv << ",tread_width_m";
  }
  csv << "\n";
  for (const ClipTruth& c : clips) {
    csv << c.clip << "," << Fmt(c.drop_height_m) << "," << Fmt(o.mass_kg) << "," << Fmt(c.capture_fps) << ","
        << o.specimen << "," << Fmt(o.free_radius_m);
    if (o.section_radius_m > 0) {
      csv << "," << Fmt(o.section_radius_m);
    } else if (o.tread_width_m > 0) {
      csv << "," << Fmt(o.tread_width_m);
    }
    csv << "\n";
  }
  WriteFileAtomically(path, csv.str());
}

// The progress line of a rendered clip, and a warning when its marker left the view.
void ReportClip(std::ostream& err, const ClipTruth& clip, double seconds) {
  int out_of_view = 0;
  for (const auto& f : clip.frames) out_of_view += f.marker_in_view ? 0 : 1;
  if (out_of_view > 0) {
    err << "dropfit render: warning: " << clip.clip << ": the marker is not wholly in view in " << out_of_view
        << " frames (marker_in_view = false in truth.json)\n";
  }
  err << "dropfit render: " << clip.clip << ": " << clip.frames.size() << " frames, " << clip.impacts.size()
      << " impacts, " << std::fixed << std::setprecision(1) << seconds << " s\n";
}

// The files of the set that are not images: manifest.csv, truth.json, rig_exact.json and
// render_options.txt.
void WriteSetFiles(const fs::path& out, const synth::RenderSetPlan& set, const RenderTruth& truth) {
  WriteManifest(out / "manifest.csv", set.options, truth.clips);
  WriteTruthFile(out / "truth.json", truth);
  WriteRigFile(out / "rig_exact.json",
               synth::RigFromCamera(set.camera, synth::PlaneBoardCornerHeight(set.plan.board), set.options.fps));
  std::ostringstream text;
  for (const auto& [name, value] : truth.options) text << name << " = " << value << "\n";
  WriteFileAtomically(out / "render_options.txt", text.str());
}

}  // namespace

int RunRender(const RenderCommandOptions& options, std::ostream& /*out*/, std::ostream& err) {
  const auto started = std::chrono::steady_clock::now();
  // Every clip is planned before anything is written, so that a set that cannot be made writes
  // nothing.
  synth::RenderSetPlan set;
  try {
    set = synth::PlanRenderSet(options);
  } catch (const std::invalid_argument& e) {
    err << "dropfit render: " << e.what() << "; nothing was written\n";
    return kExitBadUsage;
  }
  // Clips are independent (own generator, own file): render them on `threads` workers.
  const synth::ClipLoop loop = [&options](size_t count, const std::function<void(size_t)>& render_clip) {
    ParallelFor(count, options.threads, render_clip);
  };
  std::mutex err_mutex;  // clips finish on several threads
  RenderTruth truth = synth::RenderSet(set, loop, [&](const ClipTruth& clip, double seconds) {
    std::lock_guard<std::mutex> lock(err_mutex);
    ReportClip(err, clip, seconds);
  });
  truth.tool_version = kVersion;
  const fs::path out(options.out_dir);
  WriteSetFiles(out, set, truth);
  long total_frames = 0;
  for (const ClipTruth& clip : truth.clips) total_frames += static_cast<long>(clip.frames.size());
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
  err << "dropfit render: wrote " << truth.clips.size() << " clips (" << total_frames << " frames) to " << out.string()
      << " in " << std::fixed << std::setprecision(1) << seconds << " s\n";
  return kExitDone;
}

int RunRender(const RenderCommandOptions& options) { return RunRender(options, std::cout, std::cerr); }

}  // namespace dropfit::cli
