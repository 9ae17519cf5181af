#include "cli/track_command.h"

#include <unistd.h>

#include <charconv>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <iostream>
#include <stdexcept>

#include "cli/clip_pipeline.h"
#include "cli/exit_status.h"
#include "cli/manifest.h"
#include "cli/rig_io.h"

namespace dropfit::cli {

namespace {

namespace fs = std::filesystem;

std::string Num(double v, const char* fmt = "%g") {
  char buf[48];
  std::snprintf(buf, sizeof buf, fmt, v);
  return buf;
}

bool Usable(const std::optional<double>& v) { return v && std::isfinite(*v) && *v > 0; }

int BadUsage(const std::string& message) {
  std::cerr << "dropfit track: " << message << "\n";
  return kExitBadUsage;
}

// Progress on stderr, only on a terminal: "frames 1200/4000".
class TerminalProgress {
 public:
  TerminalProgress() : enabled_(isatty(fileno(stderr)) != 0) {}
  void operator()(int done, int total) {
    if (!enabled_) return;
    if (total > 0) {
      std::fprintf(stderr, "\rtracking: frame %d of %d (%d%%)", done, total, static_cast<int>(100.0 * done / total));
    } else {
      std::fprintf(stderr, "\rtracking: frame %d", done);
    }
    std::fflush(stderr);
    shown_ = true;
  }
  void Done() {
    if (shown_) std::fprintf(stderr, "\n");
  }
  bool enabled() const { return enabled_; }

 private:
  bool enabled_;
  bool shown_ = false;
};

}  // namespace

std::optional<CaptureRate> ResolveCaptureRate(std::optional<double> option_fps, std::optional<double> manifest_fps,
                                              std::optional<double> rig_fps, std::optional<double> container_fps) {
  if (Usable(option_fps)) return CaptureRate{*option_fps, "option", std::nullopt};
  if (Usable(manifest_fps)) return CaptureRate{*manifest_fps, "manifest", std::nullopt};
  if (Usable(rig_fps)) return CaptureRate{*rig_fps, "rig", std::nullopt};
  if (Usable(container_fps)) {
    CaptureRate r{*container_fps, "container", std::nullopt};
    if (*container_fps <= kPlaybackRateMaxFps) {
      r.warning = "the only capture rate found is the container's " + Num(*container_fps) +
                  " frames/s, which looks like a playback rate, not a high-speed capture rate; times and speeds "
                  "are wrong unless it is the true rate: give --fps N (or capture_fps in the manifest or the rig)";
    }
    return r;
  }
  return std::nullopt;
}

cv::Point2d ParseSeed(const std::string& text) {
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
    throw std::invalid_argument("--seed '" + text + "' is not U,V in pixels (two numbers, e.g. --seed 412.5,230)");
  }
  return {u, v};
}

std::vector<TrackRow> TrackRowsFromTrack(const tracker::Track& track, const calib::Rig& rig, double fps) {
  std::vector<TrackRow> rows;
  rows.reserve(track.samples.size());
  for (const tracker::TrackSample& s : track.samples) {
    TrackRow r;
    r.frame = s.frame;
    r.t_s = s.frame / fps;  // mid-exposure time of the frame (contract)
    r.quality = s.found ? s.quality : 0.0;
    if (s.found) {
      r.u_px = s.centre_px.x;
      r.v_px = s.centre_px.y;
      const cv::Point2d p = calib::PlaneFromImage(rig, s.centre_px);
      if (std::isfinite(p.x) && std::isfinite(p.y)) {
        r.x_m = p.x;
        r.y_m = p.y;
      }
    }
    rows.push_back(r);
  }
  return rows;
}

void AddTrackToResult(const tracker::Track& track, ClipResult& result) {
  result.frames = track.frames;
  result.tracked_frames = track.tracked_frames;
  result.warnings.insert(result.warnings.end(), track.warnings.begin(), track.warnings.end());
  result.errors.insert(result.errors.end(), track.errors.begin(), track.errors.end());
  result.info.push_back({"marker_kind", track.marker_chosen ? tracker::ToString(track.kind) : "none"});
  result.info.push_back({"marker_choice", track.choice});
  result.info.push_back({"lost_frames", tracker::FormatFrameRanges(track.lost)});
  if (track.marker_chosen) result.extra.push_back({"marker_radius_px", track.marker_radius_px});
}

std::optional<std::string> StartSingleClip(const std::string& marker, const std::string& seed,
                                           const std::string& rig_path, const std::string& clip,
                                           tracker::TrackOptions& track_options, calib::Rig& rig) {
  try {
    track_options.marker = tracker::MarkerKindFromString(marker);
    if (!seed.empty()) track_options.seed_px = ParseSeed(seed);
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

int RunTrack(const TrackCommandOptions& options) {
  // Everything the command cannot start from is checked before anything is written.
  if (options.fps && !Usable(options.fps)) {
    return BadUsage("--fps " + Num(*options.fps) + " is not a positive number of frames per second");
  }
  if (options.out_dir.empty()) return BadUsage("-o DIR is required: the folder for track.csv and result.json");
  tracker::TrackOptions track_options;
  calib::Rig rig;
  if (auto message = StartSingleClip(options.marker, options.seed, options.rig_path, options.clip, track_options, rig))
    return BadUsage(*message);
  const fs::path clip_path(options.clip);
  std::error_code ec;

  ClipResult result;
  result.clip = ClipIdOf(clip_path);
  result.y_origin = calib::ToString(rig.y_origin);
  result.info.push_back({"clip_path", options.clip});
  result.info.push_back(
      {"track_options", "marker=" + options.marker + (options.seed.empty() ? "" : " seed=" + options.seed) +
                            (options.fps ? " fps=" + Num(*options.fps) : "") +
                            (options.overlay_path.empty() ? "" : " overlay=" + options.overlay_path)});
  const fs::path out(options.out_dir);

  // The start-up checks shared with analyze and run (cli/clip_pipeline.h). A set-up problem
  // (no capture rate, a rig for another image size) stops the command; a clip that cannot be
  // read fails, with the files saying why.
  ClipRequest request;
  request.clip_path = clip_path;
  request.clip_id = result.clip;
  request.fps_option = options.fps;
  OpenedClip opened = OpenClip(request, rig);
  if (opened.setup_problem) return BadUsage(opened.problem + "; nothing was written");
  media::FrameSource* source = opened.source.get();
  const std::optional<CaptureRate>& rate = opened.rate;

  fs::create_directories(out, ec);
  if (ec) return BadUsage(options.out_dir + ": cannot create the output folder (" + ec.message() + ")");

  std::vector<TrackRow> rows;
  if (!source) {
    // Nothing decodes: the clip fails; the files still say why.
    result.errors.push_back(opened.problem);
  } else {
    result.capture_fps = rate->fps;
    result.capture_fps_source = rate->source;
    if (rate->warning) result.warnings.push_back(options.clip + ": " + *rate->warning);
    TerminalProgress progress;
    tracker::OverlayOptions overlay;
    overlay.path = options.overlay_path;
    tracker::Track track;
    try {
      track = tracker::TrackClip(*source, track_options,
                                 progress.enabled() ? tracker::ProgressCallback(std::ref(progress)) : nullptr, overlay);
    } catch (const std::invalid_argument& e) {
      progress.Done();
      return BadUsage(e.what());
    } catch (const std::runtime_error& e) {
      progress.Done();
      return BadUsage(e.what());
    }
    progress.Done();
    AddTrackToResult(track, result);
    rows = TrackRowsFromTrack(track, rig, rate->fps);
    if (track.frames == 0) result.errors.push_back(options.clip + ": no frames could be read");
  }

  WriteTrackCsv(out / "track.csv", rows);
  WriteClipResult(out / "result.json", result);

  for (const std::string& w : result.warnings) std::cerr << "warning: " << w << "\n";
  for (const std::string& e : result.errors) std::cerr << "error: " << e << "\n";
  std::cout << result.clip << ": " << result.tracked_frames << " of " << result.frames << " frames tracked";
  for (const auto& [name, text] : result.info) {
    if (name == "marker_choice" && !text.empty()) std::cout << "; marker: " << text;
  }
  std::cout << "\nwrote " << (out / "track.csv").string() << " and " << (out / "result.json").string() << "\n";
  return result.errors.empty() ? kExitDone : kExitPartial;
}

}  // namespace dropfit::cli
