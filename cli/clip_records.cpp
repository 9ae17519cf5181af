#include "cli/clip_records.h"

#include <cmath>
#include <cstdio>
#include <stdexcept>

#include "cli/fit_records.h"
#include "pipeline/uncertainty.h"
#include "tracker/track.h"

namespace dropfit::cli {

namespace {

using analysis::Estimate;

// value, and its sd beside it under `sd_name`.
void AddEstimate(NamedValues& extra, const std::string& name, const std::string& sd_name, const Estimate& e) {
  extra.push_back({name, e.value});
  extra.push_back({sd_name, e.sd});
}

ImpactRecord ImpactRecordOf(const analysis::ImpactFigures& f, const analysis::Segmentation& seg) {
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
  x.push_back({"falling_flight_downweighted", static_cast<double>(f.falling_flight_downweighted)});
  x.push_back({"rising_flight_downweighted", static_cast<double>(f.rising_flight_downweighted)});
  AddEstimate(x, "energy_lost_j", "energy_lost_sd_j", f.energy_lost_j);
  const analysis::Bounce& b = seg.bounces[static_cast<size_t>(f.bounce_index)];
  x.push_back({"t_lowest_s", b.t_lowest_s});
  x.push_back({"y_lowest_m", b.y_lowest_m});
  return r;
}

std::string G4(double v) {
  char buf[48];
  std::snprintf(buf, sizeof buf, "%.4g", v);
  return buf;
}

}  // namespace

void FlagImplausibleImpacts(double mass_kg, const std::string& clip, ClipResult& result) {
  for (size_t i = 0; i < result.impacts.size(); ++i) {
    ImpactRecord& im = result.impacts[i];
    const std::string where = clip + ": bounce " + std::to_string(i) + ": ";
    const std::string left_out = "; kept in result.json, flagged, and left out of the means";
    if (std::isfinite(im.cor) && im.cor > 1.0) {
      AddFlag(im.flags, kFlagCorAbove1);
      result.warnings.push_back(where + "COR " + G4(im.cor) +
                                " is above 1 (the hub left faster than it came): a wrong height calibration "
                                "(--corner-height, in metres), capture rate or marker plane" +
                                left_out);
    }
    if (std::isfinite(im.max_deflection_m) && im.max_deflection_m < 0.0) {
      AddFlag(im.flags, kFlagNegativeDeflection);
      result.warnings.push_back(where + "the maximum deflection " + G4(im.max_deflection_m) +
                                " m is negative (the hub never went below the onset height): a wrong free radius, "
                                "floor (--corner-height) or square size" +
                                left_out);
    }
    const double bound =
        kPeakForceBound * mass_kg * (im.impact_speed_mps + im.rebound_speed_mps) / im.contact_duration_s;
    if (std::isfinite(im.peak_force_n) && std::isfinite(bound) && bound > 0.0 && im.peak_force_n > bound) {
      AddFlag(im.flags, kFlagPeakForceImplausible);
      result.warnings.push_back(where + "the peak force " + G4(im.peak_force_n) + " N is above 5 m (v_impact + " +
                                "v_rebound) / t_contact = " + G4(bound) +
                                " N, more than any contact pulse of that impulse and duration: a wrong capture rate, "
                                "mass or contact law" +
                                left_out);
    }
  }
}

namespace {

// The name of a figure's sd in the records: "_sd" before the unit ("impact_speed_mps" ->
// "impact_speed_sd_mps"), after a figure without one ("cor" -> "cor_sd").
std::string SdName(const std::string& figure) {
  for (const char* unit : {"_mps", "_m", "_s", "_n", "_j"}) {
    const std::string u = unit;
    if (figure.size() > u.size() && figure.compare(figure.size() - u.size(), u.size(), u) == 0)
      return figure.substr(0, figure.size() - u.size()) + "_sd" + u;
  }
  return figure + "_sd";
}

void SetExtra(NamedValues& extra, const std::string& name, double value) {
  for (auto& [n, v] : extra) {
    if (n == name) {
      v = value;
      return;
    }
  }
  extra.emplace_back(name, value);
}

// The uncertainty budgets (pipeline/uncertainty.h): each figure's sd field becomes its combined
// standard uncertainty, its budget beside it; the law parameters' sds likewise; the clip's scale
// inputs at the top.
void AddBudgetsToResult(const pipeline::ClipMeasurement& m, const calib::Rig& rig, const std::string& name,
                        ClipResult& result) {
  const analysis::ScaleUncertainty& s = m.scale_uncertainty;
  result.extra.push_back({"rig_scale_rel_sd", s.rig_scale_rel});
  result.extra.push_back({"marker_plane_rel_sd", s.marker_plane_rel});
  result.extra.push_back({"capture_rate_rel_sd", s.capture_rate_rel});
  result.extra.push_back({"gravity_rel_sd", s.gravity_rel});
  result.info.push_back({"length_scale_from", s.gravity_ruler ? "gravity" : "rig"});
  for (const std::string& note : m.uncertainty_notes) result.warnings.push_back(name + ": " + note);
  const std::vector<std::vector<pipeline::NamedBudget>> impacts = pipeline::ImpactBudgets(m, s, &rig);
  for (size_t i = 0; i < impacts.size() && i < result.impacts.size(); ++i) {
    ImpactRecord& im = result.impacts[i];
    for (const pipeline::NamedBudget& b : impacts[i]) {
      SetExtra(im.extra, SdName(b.figure), b.budget.sd);
      im.budget.push_back(ToBudgetRecord(b.figure, b.budget));
    }
  }
  if (!m.laws) return;
  for (size_t i = 0; i < m.laws->fits.size() && i < result.fits.size(); ++i)
    AddParameterBudgets(m.laws->fits[i], s, m.conditions, result.fits[i]);
}

// The measurement's part of the records: kinematics, law fits, the track's force curve.
void AddMeasurementToResult(const pipeline::ClipRequest& request, const calib::Rig& rig,
                            const pipeline::ClipMeasurement& m, const std::string& name, const tracker::Track& track,
                            ClipResult& result) {
  AddKinematicsToResult(m.kinematics, name, result);
  if (m.kinematics.failure) {
    // A marker missing on most frames is the likelier cause: say so, with the frames.
    if (2 * track.tracked_frames < track.frames && !result.errors.empty()) {
      result.errors.back() += "; the hub marker was found on only " + std::to_string(track.tracked_frames) + " of " +
                              std::to_string(track.frames) +
                              " frames (not found: " + tracker::FormatFrameRanges(track.lost) +
                              "): check that it stays in view, lit and unhidden through the fall and the impact";
    }
    return;
  }
  if (m.plausibility_problem) {
    result.errors.push_back(name + ": " + *m.plausibility_problem);
  } else if (request.fit_laws) {
    if (!m.laws) {
      result.warnings.push_back(name + ": no complete bounce: the contact laws were not fitted");
    } else {
      AddLawFitsToResult(*m.laws, m.law_traces, result);
    }
  }
  if (request.fit_laws) result.extra.push_back({"time_fits_s", m.fit_seconds});
  AddBudgetsToResult(m, rig, name, result);
  for (const std::string& flag : m.flags) AddFlag(result, flag);
  FlagImplausibleImpacts(m.conditions.mass_kg, name, result);
  if (m.track_force) {
    result.curves.push_back(
        {"track", CurveKind::kForceDeflectionTrack, m.track_force->deflection_m, m.track_force->force_n});
  }
}

}  // namespace

pipeline::ClipRequest ClipRequestFor(const ManifestRow& row, const std::filesystem::path& folder) {
  pipeline::ClipRequest r;
  r.clip_path = folder / std::filesystem::path(row.clip).lexically_normal();
  r.clip_id = row.clip_id;
  r.mass_kg = row.mass_kg;
  r.drop_height_m = row.drop_height_m;
  r.free_radius_m = row.free_radius_m;
  if (row.free_radius_sd_m) r.free_radius_sd_m = *row.free_radius_sd_m;
  r.tread_width_m = row.tread_width_m;
  r.section_radius_m = row.section_radius_m;
  r.fps_manifest = row.capture_fps;
  r.marker_offset_manifest_m = row.marker_offset_m;
  r.gravity_mps2 = row.gravity_mps2;
  r.gravity_sd_mps2 = row.gravity_sd_mps2;
  if (row.capture_fps_tolerance_ppm) r.capture_fps_tolerance_ppm = *row.capture_fps_tolerance_ppm;
  // The manifest reader checked the kind against kManifestMarkerKinds.
  r.marker = tracker::MarkerKindFromString(row.marker.empty() ? "auto" : row.marker);
  if (row.marker_u_px && row.marker_v_px) r.seed_px = cv::Point2d(*row.marker_u_px, *row.marker_v_px);
  return r;
}

std::vector<TrackRow> TrackRowsFromTrack(const tracker::Track& track, const analysis::TimeSeries& series, double fps) {
  std::vector<TrackRow> rows;
  rows.reserve(track.samples.size());
  for (size_t i = 0; i < track.samples.size(); ++i) {
    const tracker::TrackSample& s = track.samples[i];
    TrackRow r;
    r.frame = s.frame;
    r.t_s = s.frame / fps;  // mid-exposure time of the frame (contract)
    r.quality = s.found ? s.quality : 0.0;
    if (s.found) {
      r.u_px = s.centre_px.x;
      r.v_px = s.centre_px.y;
      if (i < series.valid.size() && series.valid[i]) {
        r.x_m = series.x_m[i];
        r.y_m = series.y_m[i];
      }
    }
    rows.push_back(r);
  }
  return rows;
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

void AddMarkerOffsetToResult(const pipeline::MarkerOffset& offset, ClipResult& result) {
  result.extra.push_back({"marker_offset_m", offset.offset_m});
  result.info.push_back({"marker_offset_source", pipeline::ToString(offset.source)});
}

void AddGravityRulerToResult(const pipeline::ClipMeasurement& m, const std::string& clip, ClipResult& result) {
  if (m.camera_distance_m) result.extra.push_back({"camera_distance_m", *m.camera_distance_m});
  if (m.gravity_offset && !m.gravity_offset->failure) {
    const analysis::MarkerOffsetEstimate& e = *m.gravity_offset;
    result.extra.push_back({"marker_offset_gravity_m", e.offset_m});
    result.extra.push_back({"marker_offset_gravity_sd_m", e.sd_m});
    result.extra.push_back({"gravity_ruler_flights", static_cast<double>(e.flights)});
    result.extra.push_back({"gravity_ruler_birge_ratio", e.birge_ratio});
  }
  for (const std::string& w : m.gravity_warnings) result.warnings.push_back(clip + ": " + w);
}

void AddTrackToResult(const tracker::Track& track, ClipResult& result) {
  result.frames = track.frames;
  result.tracked_frames = track.tracked_frames;
  result.warnings.insert(result.warnings.end(), track.warnings.begin(), track.warnings.end());
  result.errors.insert(result.errors.end(), track.errors.begin(), track.errors.end());
  for (const tracker::EmptyFrame& e : track.left_empty) result.frames_left_empty.push_back({e.frame, e.reason});
  result.info.push_back({"marker_kind", track.marker_chosen ? tracker::ToString(track.kind) : "none"});
  result.info.push_back({"marker_choice", track.choice});
  result.info.push_back({"lost_frames", tracker::FormatFrameRanges(track.lost)});
  if (track.marker_chosen) result.extra.push_back({"marker_radius_px", track.marker_radius_px});
}

void AddKinematicsToResult(const analysis::KinematicsResult& kin, const std::string& clip, ClipResult& result) {
  const analysis::Segmentation& seg = kin.segmentation;
  result.gravity_check.expected_mps2 = kin.checks.gravity.expected_mps2;
  if (std::isfinite(kin.checks.gravity.flight_accel_mps2.value))
    result.gravity_check.flight_accel_mps2 = kin.checks.gravity.flight_accel_mps2.value;
  for (const analysis::ImpactFigures& f : kin.impacts) result.impacts.push_back(ImpactRecordOf(f, seg));
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

ClipAnalysis RecordsOfOutcome(const pipeline::ClipRequest& request, const calib::Rig& rig,
                              pipeline::ClipOutcome outcome) {
  ClipAnalysis out;
  ClipResult& result = out.result;
  result.clip = request.clip_id;
  result.y_origin = calib::ToString(rig.y_origin);
  const std::string name = request.clip_path.filename().string();
  if (request.free_radius_m && rig.y_origin != calib::YOrigin::kFloor) {
    result.warnings.push_back(name +
                              ": the free radius is not used: the rig does not know the floor (y_origin \"board\"); "
                              "the onset height is estimated. Calibrate with --corner-height to use the geometry");
  }
  if (outcome.stopped == pipeline::ClipOutcome::Stop::kNotOpened) {
    result.errors.push_back(*outcome.opened.problem);
    return out;
  }
  const pipeline::CaptureRate& rate = *outcome.opened.rate;
  result.capture_fps = rate.fps;
  result.capture_fps_source = pipeline::ToString(rate.source);
  if (rate.warning) result.warnings.push_back(name + ": " + *rate.warning);

  const tracker::Track& track = outcome.tracked->track;
  AddTrackToResult(track, result);
  result.extra.push_back({"time_decode_s", track.read_seconds});
  result.extra.push_back({"time_track_s", track.track_seconds});
  // The metres of the plane the clip was measured in (the gravity ruler's, when it was applied).
  out.track =
      TrackRowsFromTrack(track, outcome.measurement ? outcome.measurement->series : outcome.tracked->series, rate.fps);
  AddMarkerOffsetToResult(outcome.measurement ? outcome.measurement->marker_offset : outcome.opened.marker_offset,
                          result);
  if (outcome.measurement) AddGravityRulerToResult(*outcome.measurement, name, result);
  if (outcome.stopped == pipeline::ClipOutcome::Stop::kNoFrames) {
    result.errors.push_back(name + ": no frames could be read");
    return out;
  }
  if (outcome.stopped == pipeline::ClipOutcome::Stop::kMarkerNeverFound) {
    result.errors.push_back(
        name +
        ": the hub marker was not found on any frame; check the marker kind or its contrast "
        "(try `dropfit track --marker ... --marker-at U,V` on this clip; in a folder run, the manifest's "
        "marker, marker_u_px and marker_v_px columns)");
    return out;
  }
  AddMeasurementToResult(request, rig, *outcome.measurement, name, track, result);
  out.analysed = result.errors.empty();
  out.measurement = std::move(outcome.measurement);
  return out;
}

ClipAnalysis AnalyzeAndRecordClip(const pipeline::ClipRequest& request, const calib::Rig& rig,
                                  pipeline::OpenedClip opened, const pipeline::ClipProgress& progress) {
  return RecordsOfOutcome(request, rig, pipeline::AnalyzeClip(request, rig, std::move(opened), progress));
}

ClipAnalysis AnalyzeAndRecordClip(const pipeline::ClipRequest& request, const calib::Rig& rig,
                                  const pipeline::ClipProgress& progress) {
  return AnalyzeAndRecordClip(request, rig, pipeline::OpenClip(request, rig), progress);
}

pipeline::ClipMeasurement RemeasureClip(const pipeline::ClipRequest& request, const calib::Rig& rig,
                                        const ClipResult& result, const std::vector<TrackRow>& track) {
  pipeline::MeasureOptions options;
  options.fit_laws = false;
  // The metres of track.csv are in the plane the clip was measured in.
  const double offset = ExtraValue(result, "marker_offset_m");
  const std::string offset_source = InfoValue(result, "marker_offset_source");
  if (std::isfinite(offset) && !offset_source.empty())
    options.marker_offset = {offset, pipeline::MarkerOffsetSourceFromString(offset_source)};
  const std::string source = InfoValue(result, "onset_height_source");
  const analysis::OnsetHeightSource saved =
      source.empty() ? analysis::OnsetHeightSource::kTrack : analysis::OnsetHeightSourceFromString(source);
  if (saved == analysis::OnsetHeightSource::kFit || saved == analysis::OnsetHeightSource::kGeometryPrior) {
    const double h = ExtraValue(result, "onset_height_m"), sd = ExtraValue(result, "onset_height_sd_m");
    if (std::isfinite(h) && std::isfinite(sd)) options.onset_from_fit = std::make_pair(h, sd);
  }
  // The gravity ruler's estimate as the result saved it (the run pools it over the specimen).
  const double est = ExtraValue(result, "marker_offset_gravity_m"),
               sd = ExtraValue(result, "marker_offset_gravity_sd_m");
  if (std::isfinite(est) && std::isfinite(sd)) {
    analysis::MarkerOffsetEstimate e;
    e.offset_m = est;
    e.sd_m = sd;
    e.flights = static_cast<int>(ExtraValue(result, "gravity_ruler_flights"));
    options.saved_gravity_offset = e;
  }
  pipeline::ClipMeasurement m = pipeline::MeasureClip(request, rig, TimeSeriesFromTrackRows(track, result.capture_fps),
                                                      result.capture_fps, options);
  return m;
}

}  // namespace dropfit::cli
