#include "cli/analyze_command.h"

#include <cmath>
#include <cstdio>
#include <filesystem>
#include <iostream>
#include <sstream>
#include <stdexcept>

#include "calib/rig.h"
#include "cli/clip_pipeline.h"
#include "cli/exit_status.h"
#include "cli/manifest.h"
#include "cli/rig_io.h"
#include "cli/track_command.h"
#include "tracker/track.h"

namespace dropfit::cli {
namespace {

namespace fs = std::filesystem;
using analysis::Estimate;

std::string Num(double v) {
  char buf[48];
  std::snprintf(buf, sizeof buf, "%.10g", v);
  return buf;
}

int BadUsage(const std::string& message) {
  std::cerr << "dropfit analyze: " << message << "\n";
  return kExitBadUsage;
}

// value, and its sd beside it under `sd_name`.
void AddEstimate(NamedValues& extra, const std::string& name, const std::string& sd_name, const Estimate& e) {
  extra.push_back({name, e.value});
  extra.push_back({sd_name, e.sd});
}

std::string PositiveRangeMessage(const std::string& option, double value, double max, const std::string& unit) {
  return option + " " + Num(value) + " is outside (0, " + Num(max) + "] " + unit;
}

}  // namespace

std::optional<std::string> ValidateAnalyzeOptions(const AnalyzeCommandOptions& o) {
  auto in_range = [](double v, double max) { return std::isfinite(v) && v > 0.0 && v <= max; };
  if (!in_range(o.mass_kg, 1e4)) return PositiveRangeMessage("--mass", o.mass_kg, 1e4, "kg: give the dropped mass");
  if (o.fps && !in_range(*o.fps, 1e7)) return PositiveRangeMessage("--fps", *o.fps, 1e7, "frames/s");
  if (o.drop_height_m && !in_range(*o.drop_height_m, 100.0))
    return PositiveRangeMessage("--drop-height", *o.drop_height_m, 100.0, "m");
  if (o.free_radius_m && !in_range(*o.free_radius_m, 10.0))
    return PositiveRangeMessage("--free-radius", *o.free_radius_m, 10.0, "m");
  if (o.gravity_mps2 && !in_range(*o.gravity_mps2, 100.0))
    return PositiveRangeMessage("--gravity", *o.gravity_mps2, 100.0, "m/s^2 (standard gravity is 9.80665)");
  if (o.out_dir.empty()) return std::string("-o DIR is required: the folder for result.json and track.csv");
  return std::nullopt;
}

analysis::TimeSeries TimeSeriesFromTrackRows(const std::vector<TrackRow>& rows, double fps) {
  const int first_frame = rows.empty() ? 0 : rows.front().frame;
  analysis::TimeSeries series = analysis::MakeTimeSeries(static_cast<int>(rows.size()), fps, first_frame);
  for (size_t i = 0; i < rows.size(); ++i) {
    if (rows[i].frame != first_frame + static_cast<int>(i)) {
      throw std::invalid_argument("track rows are not consecutive frames: row " + std::to_string(i) + " is frame " +
                                  std::to_string(rows[i].frame) + ", expected " +
                                  std::to_string(first_frame + static_cast<int>(i)));
    }
    if (rows[i].x_m && rows[i].y_m) {
      series.x_m[i] = *rows[i].x_m;
      series.y_m[i] = *rows[i].y_m;
      series.valid[i] = true;
    }
  }
  return series;
}

void AddKinematicsToResult(const analysis::KinematicsResult& kin, const std::string& clip, ClipResult& result) {
  const analysis::Segmentation& seg = kin.segmentation;
  result.gravity_check.expected_mps2 = kin.checks.gravity.expected_mps2;
  if (std::isfinite(kin.checks.gravity.flight_accel_mps2.value))
    result.gravity_check.flight_accel_mps2 = kin.checks.gravity.flight_accel_mps2.value;
  for (const analysis::ImpactFigures& f : kin.impacts) {
    ImpactRecord r;
    r.t_contact_s = f.t_contact_s.value;
    r.impact_speed_mps = f.impact_speed_mps.value;
    r.rebound_speed_mps = f.rebound_speed_mps.value;
    r.cor = f.cor.value;
    r.max_deflection_m = f.max_deflection_m.value;
    r.onset_height_m = f.onset_height_m;
    r.onset_height_source = analysis::ToString(f.onset_height_source);
    r.complete = f.complete;
    // No law fitted yet: the track-only estimates stand in the contract's fields.
    r.source = "track";
    r.t_separation_s = f.t_separation_track_s.value;
    r.contact_duration_s = f.contact_duration_track_s.value;
    r.peak_force_n = f.peak_force_track_n.value;
    NamedValues& x = r.extra;
    x.push_back({"bounce", static_cast<double>(f.bounce_index)});
    x.push_back({"t_contact_sd_s", f.t_contact_s.sd});
    x.push_back({"impact_speed_sd_mps", f.impact_speed_mps.sd});
    x.push_back({"rebound_speed_sd_mps", f.rebound_speed_mps.sd});
    x.push_back({"cor_sd", f.cor.sd});
    x.push_back({"max_deflection_sd_m", f.max_deflection_m.sd});
    x.push_back({"onset_height_sd_m", f.onset_height_sd_m});
    AddEstimate(x, "cor_from_apex", "cor_from_apex_sd", f.cor_from_apex);
    AddEstimate(x, "drop_height_above_onset_m", "drop_height_above_onset_sd_m", f.drop_height_above_onset_m);
    AddEstimate(x, "rebound_height_above_onset_m", "rebound_height_above_onset_sd_m", f.rebound_height_above_onset_m);
    AddEstimate(x, "t_separation_track_s", "t_separation_track_sd_s", f.t_separation_track_s);
    AddEstimate(x, "contact_duration_track_s", "contact_duration_track_sd_s", f.contact_duration_track_s);
    AddEstimate(x, "peak_force_track_n", "peak_force_track_sd_n", f.peak_force_track_n);
    x.push_back({"t_peak_force_track_s", f.t_peak_force_track_s});
    AddEstimate(x, "energy_lost_j", "energy_lost_sd_j", f.energy_lost_j);
    const analysis::Bounce& b = seg.bounces[static_cast<size_t>(f.bounce_index)];
    x.push_back({"t_lowest_s", b.t_lowest_s});
    x.push_back({"y_lowest_m", b.y_lowest_m});
    result.impacts.push_back(r);
  }
  NamedValues& x = result.extra;
  x.push_back({"noise_sd_m", seg.noise_sd_m});
  x.push_back({"onset_height_m", seg.onset_height_m});
  x.push_back({"onset_height_sd_m", seg.onset_height_sd_m});
  result.info.push_back({"onset_height_source", analysis::ToString(seg.onset_height_source)});
  x.push_back({"flight_accel_sd_mps2", kin.checks.gravity.flight_accel_mps2.sd});
  x.push_back({"gravity_ratio", kin.checks.gravity.ratio});
  x.push_back({"flights", static_cast<double>(seg.flights.size())});
  if (kin.checks.tilt) {
    x.push_back({"tilt_deg", kin.checks.tilt->tilt_deg.value});
    x.push_back({"tilt_sd_deg", kin.checks.tilt->tilt_deg.sd});
  }
  if (kin.checks.drop_height) {
    x.push_back({"expected_impact_speed_mps", kin.checks.drop_height->expected_speed_mps});
    x.push_back({"implied_drop_height_m", kin.checks.drop_height->implied_height_m});
  }
  for (const std::string& w : kin.warnings) result.warnings.push_back(clip + ": " + w);
  if (kin.failure) result.errors.push_back(clip + ": " + *kin.failure);
}

int RunAnalyze(const AnalyzeCommandOptions& options) {
  // Everything the command cannot start from is checked before anything is written.
  if (auto message = ValidateAnalyzeOptions(options)) return BadUsage(*message);
  tracker::TrackOptions track_options;
  calib::Rig rig;
  if (auto message = StartSingleClip(options.marker, options.seed, options.rig_path, options.clip, track_options, rig))
    return BadUsage(*message);
  const fs::path clip_path(options.clip);
  std::error_code ec;

  // Track, measure and fit (cli/clip_pipeline.h: the same code as `dropfit run`).
  ClipRequest request;
  request.clip_path = clip_path;
  request.clip_id = ClipIdOf(clip_path);
  request.mass_kg = options.mass_kg;
  request.drop_height_m = options.drop_height_m;
  request.free_radius_m = options.free_radius_m;
  request.fps_option = options.fps;
  request.gravity_mps2 = options.gravity_mps2;
  request.marker = options.marker;
  request.seed = options.seed;
  // A set-up problem (no capture rate, a rig for another image size) stops the command; a clip
  // that cannot be read is analysed as a failure, with the files saying why.
  OpenedClip opened = OpenClip(request, rig);
  if (opened.setup_problem) return BadUsage(opened.problem + "; nothing was written");
  const std::optional<CaptureRate>& rate = opened.rate;
  const fs::path out(options.out_dir);
  fs::create_directories(out, ec);
  if (ec) return BadUsage(options.out_dir + ": cannot create the output folder (" + ec.message() + ")");

  ClipResult result;
  result.clip = request.clip_id;
  result.y_origin = calib::ToString(rig.y_origin);
  const double gravity = options.gravity_mps2.value_or(analysis::kStandardGravityMps2);

  // The onset height comes from the geometry only with the free radius and a floor in the rig
  // (AnalyzeClip warns otherwise); else from the track, then from the best law's fit.
  const bool geometry_onset = options.free_radius_m && rig.y_origin == calib::YOrigin::kFloor;

  // The effective options, written beside the results.
  {
    std::ostringstream text;
    text << "mass_kg=" << Num(options.mass_kg);
    if (rate) text << " fps=" << Num(rate->fps) << " (" << rate->source << ")";
    text << " gravity_mps2=" << Num(gravity) << (options.gravity_mps2 ? " (option)" : " (standard)");
    if (options.drop_height_m) text << " drop_height_m=" << Num(*options.drop_height_m);
    if (options.free_radius_m) text << " free_radius_m=" << Num(*options.free_radius_m);
    text << " onset_height=" << (geometry_onset ? "geometry" : "fit");
    text << " marker=" << options.marker;
    if (!options.seed.empty()) text << " seed=" << options.seed;
    text << " rig=" << options.rig_path;
    result.info.push_back({"clip_path", options.clip});
    result.info.push_back({"analyze_options", text.str()});
  }

  ClipAnalysis analysis = AnalyzeClip(request, rig, opened);
  for (auto& entry : result.info) analysis.result.info.push_back(entry);
  result = std::move(analysis.result);
  const std::vector<TrackRow>& rows = analysis.track;

  WriteTrackCsv(out / "track.csv", rows);
  WriteClipResult(out / "result.json", result);

  for (const std::string& w : result.warnings) std::cerr << "warning: " << w << "\n";
  for (const std::string& e : result.errors) std::cerr << "error: " << e << "\n";
  std::cout << result.clip << ": " << result.tracked_frames << " of " << result.frames << " frames tracked, "
            << result.impacts.size() << " impact" << (result.impacts.size() == 1 ? "" : "s");
  for (const ImpactRecord& r : result.impacts) {
    if (!r.complete) continue;
    char line[160];
    std::snprintf(line, sizeof line, "; first complete: impact %.4f m/s, rebound %.4f m/s, COR %.4f",
                  r.impact_speed_mps, r.rebound_speed_mps, r.cor);
    std::cout << line;
    break;
  }
  std::cout << "\nwrote " << (out / "track.csv").string() << " and " << (out / "result.json").string() << "\n";
  return result.errors.empty() ? kExitDone : kExitPartial;
}

}  // namespace dropfit::cli
