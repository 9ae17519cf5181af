#include "cli/analyze_command.h"

#include <cmath>
#include <cstdio>
#include <filesystem>
#include <iostream>
#include <sstream>
#include <stdexcept>
#include <tuple>

#include "analysis/plausible_ranges.h"
#include "calib/rig.h"
#include "cli/clip_records.h"
#include "cli/exit_status.h"
#include "cli/manifest.h"
#include "cli/rig_io.h"
#include "cli/track_command.h"
#include "tracker/track.h"

namespace dropfit::cli {
namespace {

namespace fs = std::filesystem;

std::string Num(double v) {
  char buf[48];
  std::snprintf(buf, sizeof buf, "%.10g", v);
  return buf;
}

int BadUsage(std::ostream& err, const std::string& message) {
  err << "dropfit analyze: " << message << "\n";
  return kExitBadUsage;
}

std::string PositiveRangeMessage(const std::string& option, double value, double max, const std::string& unit) {
  return option + " " + Num(value) + " is outside (0, " + Num(max) + "] " + unit;
}

}  // namespace

// "--drop-height 150 is outside the plausible 0.005-5 m; did you give millimetres? ..."
std::string PlausibleRangeMessage(const std::string& option, double value, double min, double max,
                                  const std::string& unit, const std::string& what) {
  return option + " " + Num(value) + " is outside the plausible " + Num(min) + "-" + Num(max) + " " + unit + "; " +
         analysis::kMillimetresHint + " Give the " + what + " in " + (unit == "kg" ? "kilograms" : "metres");
}

std::optional<std::string> ValidateAnalyzeOptions(const AnalyzeCommandOptions& o) {
  auto in_range = [](double v, double max) { return std::isfinite(v) && v > 0.0 && v <= max; };
  auto plausible = [](double v, double min, double max) { return std::isfinite(v) && v >= min && v <= max; };
  using namespace analysis;
  if (!plausible(o.mass_kg, kMinMassKg, kMaxMassKg))
    return PlausibleRangeMessage("--mass", o.mass_kg, kMinMassKg, kMaxMassKg, "kg", "dropped mass");
  if (o.fps && !in_range(*o.fps, 1e7)) return PositiveRangeMessage("--fps", *o.fps, 1e7, "frames/s");
  if (o.drop_height_m && !plausible(*o.drop_height_m, kMinDropHeightM, kMaxDropHeightM))
    return PlausibleRangeMessage("--drop-height", *o.drop_height_m, kMinDropHeightM, kMaxDropHeightM, "m",
                                 "nominal drop height");
  const std::tuple<const char*, const std::optional<double>&, const char*> lengths[] = {
      {"--free-radius", o.free_radius_m, "unloaded radius"},
      {"--tread-width", o.tread_width_m, "tread width"},
      {"--section-radius", o.section_radius_m, "tyre section radius"}};
  for (const auto& [option, value, what] : lengths) {
    if (value && !plausible(*value, kMinWheelLengthM, kMaxWheelLengthM))
      return PlausibleRangeMessage(option, *value, kMinWheelLengthM, kMaxWheelLengthM, "m", what);
  }
  if (o.gravity_mps2 && !in_range(*o.gravity_mps2, 100.0))
    return PositiveRangeMessage("--gravity", *o.gravity_mps2, 100.0, "m/s^2 (standard gravity is 9.80665)");
  if (o.marker_offset_m && !(std::isfinite(*o.marker_offset_m) && std::abs(*o.marker_offset_m) <= kMaxMarkerOffsetM))
    return "--marker-offset " + Num(*o.marker_offset_m) + " m is outside [-" + Num(kMaxMarkerOffsetM) + ", " +
           Num(kMaxMarkerOffsetM) + "] m";
  if (o.out_dir.empty()) return std::string("-o DIR is required: the folder for result.json and track.csv");
  return std::nullopt;
}

int RunAnalyze(const AnalyzeCommandOptions& options, std::ostream& out, std::ostream& err) {
  // Everything the command cannot start from is checked before anything is written.
  if (auto message = ValidateAnalyzeOptions(options)) return BadUsage(err, *message);
  tracker::TrackOptions track_options;
  calib::Rig rig;
  if (auto message =
          StartSingleClip(options.marker, options.marker_at, options.rig_path, options.clip, track_options, rig))
    return BadUsage(err, *message);
  const fs::path clip_path(options.clip);
  std::error_code ec;

  // Track, measure and fit (pipeline/clip.h: the same code as `dropfit run`).
  pipeline::ClipRequest request;
  request.clip_path = clip_path;
  request.clip_id = ClipIdOf(clip_path);
  request.mass_kg = options.mass_kg;
  request.drop_height_m = options.drop_height_m;
  request.free_radius_m = options.free_radius_m;
  request.tread_width_m = options.tread_width_m;
  request.section_radius_m = options.section_radius_m;
  request.fps_option = options.fps;
  request.gravity_mps2 = options.gravity_mps2;
  request.marker_offset_option_m = options.marker_offset_m;
  request.gravity_ruler = !options.no_gravity_ruler;
  request.marker = track_options.marker;
  request.seed_px = track_options.seed_px;
  // A set-up problem (no capture rate, a rig for another image size) stops the command; a clip
  // that cannot be read is analysed as a failure, with the files saying why.
  pipeline::OpenedClip opened = pipeline::OpenClip(request, rig);
  if (opened.setup_problem) return BadUsage(err, *opened.problem + "; nothing was written");
  const std::optional<pipeline::CaptureRate> rate = opened.rate;
  const fs::path out_dir(options.out_dir);
  fs::create_directories(out_dir, ec);
  if (ec) return BadUsage(err, options.out_dir + ": cannot create the output folder (" + ec.message() + ")");

  ClipResult result;
  result.clip = request.clip_id;
  result.y_origin = calib::ToString(rig.y_origin);
  const double gravity = options.gravity_mps2.value_or(analysis::kStandardGravityMps2);

  // The onset height comes from the geometry only with the free radius and a floor in the rig
  // (AnalyzeClip warns otherwise); else from the track, then from the best law's fit.
  const bool geometry_onset = pipeline::GeometryOnsetHeight(request, rig).has_value();

  // The effective options, written beside the results.
  {
    std::ostringstream text;
    text << "mass_kg=" << Num(options.mass_kg);
    if (rate) text << " fps=" << Num(rate->fps) << " (" << pipeline::ToString(rate->source) << ")";
    text << " gravity_mps2=" << Num(gravity) << (options.gravity_mps2 ? " (option)" : " (standard)");
    if (options.drop_height_m) text << " drop_height_m=" << Num(*options.drop_height_m);
    if (options.free_radius_m) text << " free_radius_m=" << Num(*options.free_radius_m);
    if (options.tread_width_m) text << " tread_width_m=" << Num(*options.tread_width_m);
    if (options.section_radius_m) text << " section_radius_m=" << Num(*options.section_radius_m);
    if (options.marker_offset_m) text << " marker_offset_m=" << Num(*options.marker_offset_m);
    if (options.no_gravity_ruler) text << " gravity_ruler=off";
    text << " onset_height="
         << analysis::ToString(geometry_onset ? analysis::OnsetHeightSource::kGeometry
                                              : analysis::OnsetHeightSource::kFit);
    text << " marker=" << options.marker;
    if (!options.marker_at.empty()) text << " marker_at=" << options.marker_at;
    text << " rig=" << options.rig_path;
    result.info.push_back({"clip_path", options.clip});
    result.info.push_back({"analyze_options", text.str()});
  }

  ClipAnalysis analysis = AnalyzeAndRecordClip(request, rig, std::move(opened));
  for (auto& entry : result.info) analysis.result.info.push_back(entry);
  result = std::move(analysis.result);
  const std::vector<TrackRow>& rows = analysis.track;

  WriteTrackCsv(out_dir / "track.csv", rows);
  WriteClipResult(out_dir / "result.json", result);

  for (const std::string& w : result.warnings) err << "warning: " << w << "\n";
  for (const std::string& e : result.errors) err << "error: " << e << "\n";
  out << result.clip << ": " << result.tracked_frames << " of " << result.frames << " frames tracked, "
      << result.impacts.size() << " impact" << (result.impacts.size() == 1 ? "" : "s");
  for (const ImpactRecord& r : result.impacts) {
    if (!r.complete) continue;
    char line[160];
    std::snprintf(line, sizeof line, "; first complete: impact %.4f m/s, rebound %.4f m/s, COR %.4f",
                  r.impact_speed_mps, r.rebound_speed_mps, r.cor);
    out << line;
    break;
  }
  out << "\nwrote " << (out_dir / "track.csv").string() << " and " << (out_dir / "result.json").string() << "\n";
  return result.errors.empty() ? kExitDone : kExitPartial;
}

int RunAnalyze(const AnalyzeCommandOptions& options) { return RunAnalyze(options, std::cout, std::cerr); }

}  // namespace dropfit::cli
