#include "cli/run_command.h"

#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <ctime>
#include <fstream>
#include <iostream>
#include <mutex>
#include <sstream>
#include <thread>

#include "cli/atomic_write.h"
#include "cli/clip_records.h"
#include "cli/exit_status.h"
#include "cli/joint_stage.h"
#include "cli/manifest.h"
#include "cli/parallel_for.h"
#include "cli/report_command.h"
#include "cli/report_html.h"
#include "cli/results.h"
#include "cli/rig_io.h"
#include "cli/summary_build.h"
#include "dropfit/version.h"
#include "media/files.h"

namespace dropfit::cli {

namespace {

std::string OptionalText(const std::optional<double>& v) { return v ? FormatNumber(*v) : "-"; }

// What a clip's result depends on besides the clip file and the rig.
std::string SettingsText(const ManifestRow& row, const RunCommandOptions& options) {
  std::ostringstream s;
  s << "dropfit " << kVersion << "; mass_kg=" << FormatNumber(row.mass_kg)
    << "; drop_height_m=" << FormatNumber(row.drop_height_m) << "; capture_fps=" << OptionalText(row.capture_fps)
    << "; free_radius_m=" << OptionalText(row.free_radius_m) << "; tread_width_m=" << OptionalText(row.tread_width_m)
    << "; section_radius_m=" << OptionalText(row.section_radius_m) << "; specimen=" << row.specimen
    << "; marker_offset_m=" << OptionalText(row.marker_offset_m)
    << "; --marker-offset=" << OptionalText(options.marker_offset_m)
    << "; gravity_mps2=" << OptionalText(row.gravity_mps2) << "; --gravity=" << OptionalText(options.gravity_mps2)
    << "; gravity_ruler=" << (options.no_gravity_ruler ? "off" : "on") << "; marker=" << row.marker
    << "; marker_at=" << OptionalText(row.marker_u_px) << "," << OptionalText(row.marker_v_px);
  return s.str();
}

// Progress on `err`: on a terminal (err is std::cerr and stderr is a tty) one line rewritten in
// place; otherwise plain log lines.
class ProgressDisplay {
 public:
  ProgressDisplay(int total, std::ostream& err)
      : total_(total), err_(err), tty_(&err == &std::cerr && ::isatty(STDERR_FILENO) == 1) {}
  void Frames(const std::string& clip, int done, int total) {
    if (!tty_) return;
    std::lock_guard<std::mutex> lock(mutex_);
    const auto now = std::chrono::steady_clock::now();
    if (now - last_ < std::chrono::milliseconds(100)) return;
    last_ = now;
    char line[320];
    std::snprintf(line, sizeof line, "\r\033[K[%d/%d clips] %s: frame %d/%d", done_, total_, clip.c_str(), done, total);
    err_ << line << std::flush;
  }
  void ClipDone(const std::string& line) {
    std::lock_guard<std::mutex> lock(mutex_);
    ++done_;
    if (tty_) err_ << "\r\033[K";
    err_ << "[" << done_ << "/" << total_ << "] " << line << "\n" << std::flush;
  }
  void Line(const std::string& line) {
    std::lock_guard<std::mutex> lock(mutex_);
    if (tty_) err_ << "\r\033[K";
    err_ << line << "\n" << std::flush;
  }

 private:
  int total_;
  std::ostream& err_;
  bool tty_;
  int done_ = 0;
  std::mutex mutex_;
  std::chrono::steady_clock::time_point last_{};
};

// Warnings the run's closing lines show in full.
constexpr size_t kWarningsShown = 5;

struct ClipSlot {
  const ManifestRow* row = nullptr;
  pipeline::ClipRequest request;
  ClipResult result;
  std::vector<TrackRow> track;
  std::optional<pipeline::ClipMeasurement> measurement;
  bool analysed = false;
  bool reused = false;
  double seconds = 0.0;
};

// What the run starts from: the manifest, the rig and the output folder, all checked before any
// clip is touched.
struct RunStart {
  Manifest manifest;
  calib::Rig rig;
  std::filesystem::path out;
  std::string rig_hash;
  int jobs = 1;
};

// Returns the message (exit status 2, nothing written) when the run cannot start.
std::optional<std::string> StartRun(const RunCommandOptions& options, RunStart& start) {
  if (options.jobs < 0 || options.jobs > kMaxJobs) {
    return "--jobs " + std::to_string(options.jobs) + " is outside [0, " + std::to_string(kMaxJobs) +
           "]; give 0 (all cores) or a count of clips to analyse at once";
  }
  if (options.gravity_mps2 &&
      !(std::isfinite(*options.gravity_mps2) && *options.gravity_mps2 > 0 && *options.gravity_mps2 <= 100)) {
    return "--gravity " + FormatNumber(*options.gravity_mps2) +
           " m/s^2 is outside (0, 100] (standard gravity is 9.80665)";
  }
  if (options.marker_offset_m &&
      !(std::isfinite(*options.marker_offset_m) && std::abs(*options.marker_offset_m) <= kMaxMarkerOffsetM)) {
    return "--marker-offset " + FormatNumber(*options.marker_offset_m) + " m is outside [-" +
           FormatNumber(kMaxMarkerOffsetM) + ", " + FormatNumber(kMaxMarkerOffsetM) + "] m";
  }
  try {
    start.manifest = ReadManifest(options.folder);
  } catch (const ManifestStructureError& e) {
    return std::string(e.what()) + "; nothing was written";
  }
  try {
    start.rig = ReadRigFile(options.rig_path);
  } catch (const std::exception& e) {
    return std::string(e.what()) + "; nothing was written";
  }
  if (options.marker_offset_m) {
    if (auto problem = calib::MarkerOffsetProblem(start.rig, *options.marker_offset_m))
      return "--marker-offset: " + *problem + "; nothing was written";
  }
  start.out = std::filesystem::path(options.out_dir);
  std::error_code ec;
  std::filesystem::create_directories(start.out / "clips", ec);
  if (ec) return "cannot create " + (start.out / "clips").string() + ": " + ec.message();
  start.rig_hash = media::InputFingerprint(options.rig_path);
  const unsigned cores = std::max(1u, std::thread::hardware_concurrency());
  start.jobs = options.jobs > 0 ? options.jobs : static_cast<int>(cores);
  return std::nullopt;
}

// Re-run: the result made earlier from the same clip, rig and settings, when there is one.
bool ReuseEarlierResult(const std::filesystem::path& clip_out, const std::string& fingerprint, const calib::Rig& rig,
                        ClipSlot& slot) {
  if (!std::filesystem::exists(clip_out / "result.json") || !std::filesystem::exists(clip_out / "track.csv"))
    return false;
  try {
    ClipResult old = ReadClipResult(clip_out / "result.json");
    if (InfoValue(old, "input_fingerprint") != fingerprint) return false;
    slot.result = std::move(old);
    slot.track = ReadTrackCsv(clip_out / "track.csv");
    slot.analysed = slot.result.errors.empty();
    slot.reused = true;
  } catch (const std::exception&) {
    return false;  // an unreadable old result is simply redone
  }
  if (slot.analysed && slot.result.capture_fps > 0) {
    try {
      slot.measurement = RemeasureClip(slot.request, rig, slot.result, slot.track);
    } catch (const std::exception&) {
      // the clip's own result already says what is wrong with it; the joint fits go without it
    }
  }
  return true;
}

// One clip: reuse or analyse, then write its result.json and track.csv.
void AnalyseSlot(const RunCommandOptions& options, const RunStart& start, ProgressDisplay& progress, ClipSlot& slot) {
  const ManifestRow& row = *slot.row;
  const auto t0 = std::chrono::steady_clock::now();
  const std::filesystem::path clip_out = start.out / "clips" / row.clip_id;
  const std::string fingerprint =
      media::InputFingerprint(slot.request.clip_path) + "/" + start.rig_hash + "/" + SettingsText(row, options);
  if (ReuseEarlierResult(clip_out, fingerprint, start.rig, slot)) {
    progress.ClipDone(row.clip_id + ": unchanged since the last run (clip, rig and settings): reused");
    return;
  }
  ClipAnalysis analysis;
  try {
    analysis = AnalyzeAndRecordClip(slot.request, start.rig,
                                    [&](int done, int total) { progress.Frames(row.clip_id, done, total); });
  } catch (const std::exception& e) {
    analysis.result.clip = row.clip_id;
    analysis.result.errors.push_back(row.clip + ": " + e.what());
  }
  slot.result = std::move(analysis.result);
  slot.track = std::move(analysis.track);
  slot.measurement = std::move(analysis.measurement);
  slot.analysed = analysis.analysed;
  slot.result.info.emplace_back("input_fingerprint", fingerprint);
  slot.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  try {
    std::filesystem::create_directories(clip_out);
    WriteTrackCsv(clip_out / "track.csv", slot.track);
    WriteClipResult(clip_out / "result.json", slot.result);
  } catch (const std::exception& e) {
    slot.analysed = false;
    slot.result.errors.push_back(e.what());
  }
  char line[256];
  std::snprintf(line, sizeof(line), "%s: %s in %.1f s", row.clip_id.c_str(), slot.analysed ? "analysed" : "FAILED",
                slot.seconds);
  progress.ClipDone(line);
}

// The rig's quality and the run's own record for summary.json.
void AddRunRecord(const RunCommandOptions& options, const RunStart& start, int reused, double clip_stage_seconds,
                  double clip_stage_cpu_seconds, double joint_seconds, Summary& summary) {
  const calib::Rig& rig = start.rig;
  summary.rig_quality = {{"rms_reprojection_px", rig.quality.rms_reprojection_px},
                         {"plane_rms_px", rig.quality.plane_rms_px},
                         {"square_error_mean_mm", rig.quality.square_error_mean_mm},
                         {"square_error_max_mm", rig.quality.square_error_max_mm},
                         {"metres_per_px_centre", rig.quality.metres_per_px_centre}};
  summary.run = {{"tool_version", kVersion},
                 {"folder", options.folder},
                 {"rig", options.rig_path},
                 {"rig_fnv1a64", start.rig_hash},
                 {"out", options.out_dir},
                 {"jobs", std::to_string(start.jobs)},
                 {"clips_reused", std::to_string(reused)},
                 // Wall-clock seconds of the two stages: every clip (decode, track, per-clip fits;
                 // their own times are in each result.json) and the per-specimen joint fits.
                 {"time_clip_stage_s", FormatNumber(clip_stage_seconds)},
                 {"cpu_time_clip_stage_s", FormatNumber(clip_stage_cpu_seconds)},
                 {"time_joint_fits_s", FormatNumber(joint_seconds)}};
}

// The kind of a warning, for the run's closing count (docs/formats.md, "What `run` prints").
std::string WarningKind(const std::string& message) {
  static const std::pair<const char*, const char*> kKinds[] = {
      {"left out of the means", "implausible figure"},
      {"gravity check:", "gravity check"},
      {"tilt check:", "tilt check"},
      {"drop-height check:", "drop-height check"},
      {"gravity ruler", "gravity ruler"},
      {"marker's plane", "gravity ruler"},
      {"capture rate", "capture rate"},
      {"manifest", "manifest"},
      {"marker", "tracking"},
      {"template", "tracking"},
      {"converge", "law fit"},
      {"bound", "law fit"},
      {"law", "law fit"},
  };
  for (const auto& [needle, kind] : kKinds) {
    if (message.find(needle) != std::string::npos) return kind;
  }
  return "other";
}

// The run's closing lines: the warnings counted per kind and the first few in full.
void PrintWarnings(const std::vector<ClipMessage>& warnings, ProgressDisplay& progress) {
  if (warnings.empty()) return;
  std::vector<std::pair<std::string, int>> kinds;
  for (const ClipMessage& w : warnings) {
    const std::string kind = WarningKind(w.message);
    auto it = std::find_if(kinds.begin(), kinds.end(), [&](const auto& k) { return k.first == kind; });
    if (it == kinds.end())
      kinds.push_back({kind, 1});
    else
      ++it->second;
  }
  std::string line =
      "dropfit run: " + std::to_string(warnings.size()) + " warning" + (warnings.size() == 1 ? "" : "s") + " (";
  for (size_t i = 0; i < kinds.size(); ++i) {
    line += (i ? ", " : "") + kinds[i].first + ": ";
    line += std::to_string(kinds[i].second);
  }
  line += ")";
  const size_t shown = std::min<size_t>(warnings.size(), kWarningsShown);
  line += shown < warnings.size() ? "; the first " + std::to_string(shown) + ":" : ":";
  progress.Line(line);
  for (size_t i = 0; i < shown; ++i) {
    std::string w = "  warning: ";
    if (!warnings[i].clip.empty()) w += warnings[i].clip + ": ";
    progress.Line(w + warnings[i].message);
  }
  if (shown < warnings.size()) progress.Line("  (all of them: summary.json \"warnings\" and the report)");
}

double SecondsSince(std::chrono::steady_clock::time_point t) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - t).count();
}

}  // namespace

int RunRun(const RunCommandOptions& options, std::ostream& /*out*/, std::ostream& err) {
  const auto started = std::chrono::steady_clock::now();
  RunStart start;
  if (auto message = StartRun(options, start)) {
    err << "dropfit run: " << *message << "\n";
    return kExitBadUsage;
  }
  const Manifest& manifest = start.manifest;

  Summary summary;
  for (const std::string& w : manifest.warnings) summary.warnings.push_back({"", w});
  std::vector<ClipSlot> slots;
  for (const ManifestRow& row : manifest.rows) {
    if (!row.ok()) {
      summary.errors.push_back({row.clip_id.empty() ? row.clip : row.clip_id, row.error});
      err << "error: " << row.error << "\n";
      continue;
    }
    ClipSlot slot;
    slot.row = &row;
    slot.request = ClipRequestFor(row, manifest.folder);
    slot.request.marker_offset_option_m = options.marker_offset_m;
    if (options.gravity_mps2) slot.request.gravity_mps2 = options.gravity_mps2;
    slot.request.gravity_ruler = !options.no_gravity_ruler;
    slots.push_back(std::move(slot));
  }

  // Stage 1: every clip, on `jobs` threads.
  ProgressDisplay progress(static_cast<int>(slots.size()), err);
  progress.Line("dropfit run: " + std::to_string(slots.size()) + " clips from " + manifest.display_name + ", " +
                std::to_string(start.jobs) + " in parallel");
  const auto clip_stage_started = std::chrono::steady_clock::now();
  const std::clock_t clip_stage_cpu_started = std::clock();  // process CPU time, all threads
  ParallelFor(slots.size(), start.jobs, [&](size_t i) { AnalyseSlot(options, start, progress, slots[i]); });
  const double clip_stage_seconds = SecondsSince(clip_stage_started);
  const double clip_stage_cpu_seconds =
      static_cast<double>(std::clock() - clip_stage_cpu_started) / static_cast<double>(CLOCKS_PER_SEC);

  std::vector<AnalysedClip> analysed;
  std::vector<JointClip> joint_inputs;
  int reused = 0;
  size_t analysed_count = 0;
  for (const ClipSlot& slot : slots) {
    reused += slot.reused ? 1 : 0;
    for (const std::string& w : slot.result.warnings) summary.warnings.push_back({slot.row->clip_id, w});
    for (const std::string& e : slot.result.errors) {
      summary.errors.push_back({slot.row->clip_id, e});
      progress.Line("error: " + slot.row->clip_id + ": " + e);
    }
    // A failed clip only flags its group; the joint fits take the analysed ones.
    analysed.push_back({slot.row, &slot.result, !slot.analysed});
    if (!slot.analysed) continue;
    ++analysed_count;
    if (slot.measurement) joint_inputs.push_back({slot.row, &*slot.measurement});
  }
  for (const ManifestRow& row : manifest.rows) summary.clips.push_back(row.clip_id.empty() ? row.clip : row.clip_id);
  summary.groups = BuildSummaryGroups(analysed);

  // Stage 2: joint fits per specimen over all its clips and heights.
  const auto joint_started = std::chrono::steady_clock::now();
  summary.specimens = FitSpecimens(
      joint_inputs, [&](const std::string& line) { progress.Line(line); }, start.jobs);
  const double joint_seconds = SecondsSince(joint_started);
  AddRunRecord(options, start, reused, clip_stage_seconds, clip_stage_cpu_seconds, joint_seconds, summary);

  try {
    WriteSummaryCsv(start.out / "summary.csv", summary.groups);
    WriteLawsCsv(start.out / "laws.csv", summary.specimens);
    WriteSummaryJson(start.out / "summary.json", summary);
    std::vector<ClipReportData> report_clips;
    for (const ClipSlot& slot : slots) report_clips.push_back({slot.result, slot.track});
    WriteFileAtomically(start.out / "report.html", BuildReportHtml(summary, report_clips, NowText()));
  } catch (const std::exception& e) {
    err << "dropfit run: " << e.what() << "\n";
    return kExitPartial;
  }
  PrintWarnings(summary.warnings, progress);
  // Failures count clips, not messages: a manifest row refused, or a clip with an error.
  const size_t failed = manifest.rows.size() - analysed_count;
  char line[256];
  std::snprintf(line, sizeof(line), "dropfit run: %zu of %zu clips analysed (%d reused), %zu failed, in %.1f s",
                analysed_count, manifest.rows.size(), reused, failed, SecondsSince(started));
  progress.Line(line);
  progress.Line("dropfit run: summary: " + (start.out / "summary.csv").string() + " and summary.json; laws: " +
                (start.out / "laws.csv").string() + "; report: " + (start.out / "report.html").string());
  return summary.errors.empty() && failed == 0 ? kExitDone : kExitPartial;
}

int RunRun(const RunCommandOptions& options) { return RunRun(options, std::cout, std::cerr); }

}  // namespace dropfit::cli
