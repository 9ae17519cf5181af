#include "cli/track_command.h"

#include <unistd.h>

#include <charconv>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <iostream>
#include <stdexcept>

#include "cli/clip_records.h"
#include "cli/exit_status.h"
#include "cli/manifest.h"
#include "cli/rig_io.h"
#include "pipeline/clip.h"

namespace dropfit::cli {

namespace {

namespace fs = std::filesystem;

std::string Num(double v, const char* fmt = "%g") {
  char buf[48];
  std::snprintf(buf, sizeof buf, fmt, v);
  return buf;
}

bool Usable(const std::optional<double>& v) { return v && std::isfinite(*v) && *v > 0; }

int BadUsage(std::ostream& err, const std::string& message) {
  err << "dropfit track: " << message << "\n";
  return kExitBadUsage;
}

// Progress on `err`, only when it is the standard error stream on a terminal: "frames 1200/4000".
class TerminalProgress {
 public:
  explicit TerminalProgress(std::ostream& err)
      : err_(err), enabled_(&err == &std::cerr && isatty(fileno(stderr)) != 0) {}
  void operator()(int done, int total) {
    if (!enabled_) return;
    char line[96];
    if (total > 0) {
      std::snprintf(line, sizeof line, "\rtracking: frame %d of %d (%d%%)", done, total,
                    static_cast<int>(100.0 * done / total));
    } else {
      std::snprintf(line, sizeof line, "\rtracking: frame %d", done);
    }
    err_ << line << std::flush;
    shown_ = true;
  }
  void Done() {
    if (shown_) err_ << "\n";
  }
  bool enabled() const { return enabled_; }

 private:
  std::ostream& err_;
  bool enabled_;
  bool shown_ = false;
};

}  // namespace

cv::Point2d ParseMarkerAt(const std::string& text) {
  const auto comma = text.find(',');
  auto parse = [&](const std::string& part, double& out) {
    const char* b = part.data();
    const char* e = b + part.size();
    while (b < e && *b == ' ') ++b;
    auto [ptr, ec] = std::from_chars(b, e, out);
    return ec == std::errc() && ptr == e && std::isfinite(out);
  };
  double u = 0, v = 0;
  if (comma == std::string::npos || !parse(text.substr(0, comma), u) || !parse(text.substr(comma + 1), v)) {
    throw std::invalid_argument("--marker-at '" + text +
                                "' is not U,V in pixels (two numbers, e.g. --marker-at 412.5,230)");
  }
  return {u, v};
}

std::optional<std::string> StartSingleClip(const std::string& marker, const std::string& marker_at,
                                           const std::string& rig_path, const std::string& clip,
                                           tracker::TrackOptions& track_options, calib::Rig& rig) {
  try {
    track_options.marker = tracker::MarkerKindFromString(marker);
    if (!marker_at.empty()) track_options.seed_px = ParseMarkerAt(marker_at);
  } catch (const std::invalid_argument& e) {
    return e.what();
  }
  if (auto message = tracker::ValidateTrackOptions(track_options)) return message;
  try {
    rig = ReadRigFile(rig_path);
  } catch (const std::exception& e) {
    return std::string(e.what()) + "; nothing was written";
  }
  std::error_code ec;
  if (!fs::exists(fs::path(clip), ec)) return clip + ": no such file or folder; check the path";
  return std::nullopt;
}

int RunTrack(const TrackCommandOptions& options, std::ostream& out, std::ostream& err) {
  // Everything the command cannot start from is checked before anything is written.
  if (options.fps && !Usable(options.fps)) {
    return BadUsage(err, "--fps " + Num(*options.fps) + " is not a positive number of frames per second");
  }
  if (options.marker_offset_m &&
      !(std::isfinite(*options.marker_offset_m) && std::abs(*options.marker_offset_m) <= kMaxMarkerOffsetM)) {
    return BadUsage(err, "--marker-offset " + Num(*options.marker_offset_m) + " m is outside [-" +
                             Num(kMaxMarkerOffsetM) + ", " + Num(kMaxMarkerOffsetM) + "] m");
  }
  if (options.out_dir.empty()) return BadUsage(err, "-o DIR is required: the folder for track.csv and result.json");
  tracker::TrackOptions track_options;
  calib::Rig rig;
  if (auto message =
          StartSingleClip(options.marker, options.marker_at, options.rig_path, options.clip, track_options, rig))
    return BadUsage(err, *message);
  const fs::path clip_path(options.clip);
  std::error_code ec;

  ClipResult result;
  result.clip = ClipIdOf(clip_path);
  result.y_origin = calib::ToString(rig.y_origin);
  result.info.push_back({"clip_path", options.clip});
  result.info.push_back(
      {"track_options", "marker=" + options.marker +
                            (options.marker_at.empty() ? "" : " marker_at=" + options.marker_at) +
                            (options.fps ? " fps=" + Num(*options.fps) : "") +
                            (options.marker_offset_m ? " marker_offset_m=" + Num(*options.marker_offset_m) : "") +
                            (options.overlay_path.empty() ? "" : " overlay=" + options.overlay_path)});
  const fs::path out_dir(options.out_dir);

  // The start-up checks shared with analyze and run (pipeline/clip.h, OpenClip). A set-up problem
  // (no capture rate, a rig for another image size) stops the command; a clip that cannot be
  // read fails, with the files saying why.
  pipeline::ClipRequest request;
  request.clip_path = clip_path;
  request.clip_id = result.clip;
  request.fps_option = options.fps;
  request.marker_offset_option_m = options.marker_offset_m;
  pipeline::OpenedClip opened = pipeline::OpenClip(request, rig);
  if (opened.setup_problem) return BadUsage(err, *opened.problem + "; nothing was written");
  media::FrameSource* source = opened.source.get();
  const std::optional<pipeline::CaptureRate>& rate = opened.rate;

  fs::create_directories(out_dir, ec);
  if (ec) return BadUsage(err, options.out_dir + ": cannot create the output folder (" + ec.message() + ")");

  std::vector<TrackRow> rows;
  if (!source) {
    // Nothing decodes: the clip fails; the files still say why.
    result.errors.push_back(opened.problem.value_or(""));
  } else {
    result.capture_fps = rate->fps;
    result.capture_fps_source = pipeline::ToString(rate->source);
    if (rate->warning) result.warnings.push_back(options.clip + ": " + *rate->warning);
    AddMarkerOffsetToResult(opened.marker_offset, result);
    TerminalProgress progress(err);
    tracker::OverlayOptions overlay;
    overlay.path = options.overlay_path;
    tracker::Track track;
    try {
      track = tracker::TrackClip(*source, track_options,
                                 progress.enabled() ? tracker::ProgressCallback(std::ref(progress)) : nullptr, overlay);
    } catch (const std::invalid_argument& e) {
      progress.Done();
      return BadUsage(err, e.what());
    } catch (const std::runtime_error& e) {
      progress.Done();
      return BadUsage(err, e.what());
    }
    progress.Done();
    AddTrackToResult(track, result);
    rows = TrackRowsFromTrack(
        track, pipeline::TimeSeriesFromTrack(track, rig, rate->fps, opened.marker_offset.offset_m), rate->fps);
    if (track.frames == 0) result.errors.push_back(options.clip + ": no frames could be read");
  }

  WriteTrackCsv(out_dir / "track.csv", rows);
  WriteClipResult(out_dir / "result.json", result);

  for (const std::string& w : result.warnings) err << "warning: " << w << "\n";
  for (const std::string& e : result.errors) err << "error: " << e << "\n";
  out << result.clip << ": " << result.tracked_frames << " of " << result.frames << " frames tracked";
  for (const auto& [name, text] : result.info) {
    if (name == "marker_choice" && !text.empty()) out << "; marker: " << text;
  }
  out << "\nwrote " << (out_dir / "track.csv").string() << " and " << (out_dir / "result.json").string() << "\n";
  return result.errors.empty() ? kExitDone : kExitPartial;
}

int RunTrack(const TrackCommandOptions& options) { return RunTrack(options, std::cout, std::cerr); }

}  // namespace dropfit::cli
