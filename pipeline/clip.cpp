#include "pipeline/clip.h"

#include <chrono>
#include <cmath>
#include <cstdio>
#include <stdexcept>

#include "calib/rig.h"
#include "calib/rig_uncertainty.h"
#include "pipeline/uncertainty.h"

namespace dropfit::pipeline {

namespace {

double Seconds(std::chrono::steady_clock::time_point since) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - since).count();
}

std::string SizeText(cv::Size s) { return std::to_string(s.width) + "x" + std::to_string(s.height); }

std::string Mm(double metres) {
  char buf[48];
  std::snprintf(buf, sizeof buf, "%.1f mm", metres * 1000);
  return buf;
}

// The figures read again at a fitted onset height (the best law's, or the one a saved result
// reports): the track is not segmented again (analysis::ReadAtOnsetHeight).
void ReadAtFittedOnset(const analysis::KinematicsOptions& kinematics_options, double height_m, double sd_m,
                       ClipMeasurement& m, analysis::OnsetHeightSource source = analysis::OnsetHeightSource::kFit) {
  analysis::KinematicsOptions refit = kinematics_options;
  refit.onset_height_m = height_m;
  refit.onset_height_sd_m = sd_m;
  refit.onset_height_source = source;
  analysis::KinematicsResult again = analysis::ReadAtOnsetHeight(m.series, m.kinematics, refit);
  if (!again.failure) {
    m.kinematics = std::move(again);
    m.onset_refitted = true;
  }
}

// The per-clip law fits, and with them the onset height when the geometry gave none: the best
// law's fitted onset height replaces the track's estimate (docs/formats.md: onset_height_source
// "fit").
void FitLaws(const analysis::KinematicsOptions& kinematics_options, ClipMeasurement& m) {
  const auto fit_start = std::chrono::steady_clock::now();
  if (!m.fit_clip->windows.empty()) {
    m.laws = analysis::FitAllLaws({*m.fit_clip}, m.fit_options);
    for (const analysis::LawFitResult& fit : m.laws->fits)
      m.law_traces.push_back(TraceFit(fit, {*m.fit_clip}, 0, m.fit_options));
    // A law that does not fit gives no onset height to trust: the track's stays.
    const analysis::LawChoice& choice = m.laws->choice;
    if (choice.best && !choice.no_law_fits) {
      const analysis::LawFitResult& best = m.laws->fits[static_cast<size_t>(*choice.best)];
      if (!kinematics_options.onset_height_m) {
        ReadAtFittedOnset(kinematics_options, best.onset_height_m, best.onset_height_sd_m, m);
      } else if (best.onset_prior_m) {
        // The geometry entered as a prior: the best law's onset height, and a word where the two
        // disagree (docs/methods.md §13).
        const double g = *best.onset_prior_m, g_sd = best.onset_prior_sd_m;
        ReadAtFittedOnset(kinematics_options, best.onset_height_m, best.onset_height_sd_m, m,
                          analysis::OnsetHeightSource::kGeometryPrior);
        // (after the figures are read again, which replaces the kinematics' warnings)
        const double sd = std::hypot(g_sd, best.onset_height_sd_m);
        if (std::abs(best.onset_height_m - g) > 3.0 * sd) {
          m.kinematics.warnings.push_back(
              "the bounces put the onset height at " + Mm(best.onset_height_m) + ", " + Mm(best.onset_height_m - g) +
              " from the geometry's " + Mm(g) + " (floor + free radius, sd " + Mm(g_sd) +
              "): more than 3 standard uncertainties; check free_radius_m and the rig's floor (--corner-height)");
        }
      }
    }
  }
  m.fit_seconds = Seconds(fit_start);
}

std::vector<analysis::FlightWindow> FlightWindowsOf(const analysis::Segmentation& segmentation) {
  std::vector<analysis::FlightWindow> windows;
  for (const analysis::FlightPhase& f : segmentation.flights)
    windows.push_back({f.first_index, f.last_index, f.cut_by_clip_start});
  return windows;
}

// The gravity ruler on a measured clip (docs/formats.md, "Gravity ruler"): estimate the marker
// plane's offset; with none given, apply it when the policy allows (mapping the track again and
// measuring it again, twice at most); with one given, warn where they disagree beyond 3 sd.
void ApplyGravityRulerSteps(const calib::Rig& rig, double fps, const tracker::Track& track,
                            const analysis::KinematicsOptions& kinematics_options, ClipMeasurement& m);

// The ruler's Newton steps may ask for a plane the rig cannot map (behind the camera) when the
// flights are far from g (e.g. a rate 2x too low): that is no marker offset but a wrong rate,
// unit or rig, left to the plausibility gate (pipeline/plausibility.h) with the kinematics as
// they were.
void ApplyGravityRuler(const calib::Rig& rig, double fps, const tracker::Track& track,
                       const analysis::KinematicsOptions& kinematics_options, ClipMeasurement& m) {
  const ClipMeasurement before = m;
  try {
    ApplyGravityRulerSteps(rig, fps, track, kinematics_options, m);
  } catch (const std::invalid_argument&) {
    m = before;
    m.gravity_warnings.push_back(
        "the gravity ruler found no marker plane in front of the camera that makes the flights fall at g: this is no "
        "marker offset but a wrong capture rate, unit or rig; not applied");
  }
}

void ApplyGravityRulerSteps(const calib::Rig& rig, double fps, const tracker::Track& track,
                            const analysis::KinematicsOptions& kinematics_options, ClipMeasurement& m) {
  if (!m.camera_distance_m) {
    m.gravity_warnings.push_back(
        "the gravity ruler was skipped: the rig knows no pose of its calibrated plane (plane view only, no lens "
        "model), so the marker's plane cannot be estimated; calibrate with lens views");
    return;
  }
  analysis::GravityRulerOptions ruler;
  ruler.gravity_mps2 = m.conditions.gravity_mps2;
  const analysis::SeriesAtOffset series_at = [&](double offset_m) {
    return TimeSeriesFromTrack(track, rig, fps, offset_m);
  };
  const double distance = *m.camera_distance_m;
  analysis::MarkerOffsetEstimate estimate = analysis::EstimateMarkerOffset(
      series_at, m.marker_offset.offset_m, FlightWindowsOf(m.kinematics.segmentation), ruler);
  m.gravity_offset = estimate;
  if (estimate.failure) {
    m.gravity_warnings.push_back("the gravity ruler made no estimate: " + *estimate.failure);
    return;
  }
  const std::string said = "the flights fall at g with the marker's plane " + Mm(estimate.offset_m) + " +- " +
                           Mm(estimate.sd_m) + " in front of the calibrated plane (camera " + Mm(distance) + " away)";
  if (m.marker_offset.given()) {
    const double apart = estimate.offset_m - m.marker_offset.offset_m;
    if (std::abs(apart) > ruler.apply_sigmas * estimate.sd_m) {
      m.gravity_warnings.push_back(said + ", but the offset given is " + Mm(m.marker_offset.offset_m) +
                                   ": check the offset, the local gravity (--gravity, gravity_mps2) and the rig");
    }
    return;
  }
  const analysis::OffsetVerdict verdict = analysis::JudgeMarkerOffset(estimate, distance, ruler);
  if (verdict == analysis::OffsetVerdict::kOutOfRange) {
    m.gravity_warnings.push_back(said +
                                 ": beyond 10 % of the camera distance this is no marker offset but a wrong "
                                 "capture rate, unit or rig; not applied");
    return;
  }
  if (verdict != analysis::OffsetVerdict::kApply) return;
  // Apply: map again at the estimate, measure again, and estimate again on the new flights.
  double applied = estimate.offset_m;
  for (int pass = 0; pass < 2; ++pass) {
    m.series = series_at(applied);
    m.kinematics = analysis::AnalyzeKinematics(m.series, kinematics_options);
    m.marker_offset = {applied, MarkerOffsetSource::kGravity};
    if (m.kinematics.failure) return;
    estimate = analysis::EstimateMarkerOffset(series_at, applied, FlightWindowsOf(m.kinematics.segmentation), ruler);
    m.gravity_offset = estimate;
    if (estimate.failure || std::abs(estimate.offset_m - applied) <= 0.1 * estimate.sd_m) break;
    if (pass == 0) applied = estimate.offset_m;
  }
}

analysis::LawFitOptions LawFitOptionsOf(const analysis::DropConditions& conditions) {
  analysis::LawFitOptions o;
  o.gravity_mps2 = conditions.gravity_mps2;
  o.tread = conditions.tread;
  return o;
}

}  // namespace

analysis::DropConditions DropConditionsOf(const ClipRequest& request) {
  analysis::DropConditions c;
  c.mass_kg = request.mass_kg;
  c.gravity_mps2 = request.gravity_mps2.value_or(analysis::kStandardGravityMps2);
  c.tread = analysis::MakeTreadGeometry(request.free_radius_m.value_or(0.0), request.tread_width_m.value_or(0.0),
                                        request.section_radius_m.value_or(0.0));
  return c;
}

std::optional<double> GeometryOnsetHeight(const ClipRequest& request, const calib::Rig& rig) {
  if (request.free_radius_m && rig.y_origin == calib::YOrigin::kFloor) return *request.free_radius_m;
  return std::nullopt;
}

analysis::KinematicsOptions KinematicsOptionsFor(const ClipRequest& request, const calib::Rig& rig, double fps) {
  analysis::KinematicsOptions k;
  k.mass_kg = request.mass_kg;
  k.gravity_mps2 = request.gravity_mps2.value_or(analysis::kStandardGravityMps2);
  k.onset_height_m = GeometryOnsetHeight(request, rig);
  k.onset_height_source = analysis::OnsetHeightSource::kGeometry;
  k.drop_height_m = request.drop_height_m;
  k.capture_fps = fps;
  return k;
}

analysis::LawFitOptions LawFitOptionsFor(const ClipRequest& request) {
  return LawFitOptionsOf(DropConditionsOf(request));
}

OpenedClip OpenClip(const ClipRequest& request, const calib::Rig& rig) {
  OpenedClip out;
  const std::string name = request.clip_path.filename().string();
  try {
    out.source = media::FrameSource::Open(request.clip_path);
  } catch (const std::exception& e) {
    out.problem = e.what();  // names the clip and says what to do (media/frame_source.h)
    return out;
  }
  const media::FrameSourceInfo& info = out.source->info();
  out.rate = ResolveCaptureRate(request.fps_option, request.fps_manifest, rig.capture_fps, info.container_fps);
  if (!out.rate) {
    out.setup_problem = true;
    out.problem = name +
                  ": no capture rate is known (none given with --fps or in the manifest's capture_fps, none in the "
                  "rig, none in the clip's container); give the camera's true frames per second: --fps N, or "
                  "capture_fps in the manifest";
    return out;
  }
  out.marker_offset = ResolveMarkerOffset(request.marker_offset_option_m, request.marker_offset_manifest_m);
  if (auto offset_problem = calib::MarkerOffsetProblem(rig, out.marker_offset.offset_m)) {
    out.setup_problem = true;
    out.problem = name + ": " + *offset_problem;
    return out;
  }
  if (!rig.image_size.empty() && info.size != rig.image_size) {
    out.setup_problem = true;
    out.problem = name + ": frames are " + SizeText(info.size) + " but the rig was made for " +
                  SizeText(rig.image_size) +
                  " images; use the rig of this camera set-up (or make one with dropfit calibrate)";
    return out;
  }
  return out;
}

analysis::TimeSeries TimeSeriesFromTrack(const tracker::Track& track, const calib::Rig& rig, double fps,
                                         double marker_offset_m) {
  if (!(fps > 0.0) || !std::isfinite(fps))
    throw std::invalid_argument("TimeSeriesFromTrack: capture rate " + std::to_string(fps) + " is not > 0");
  if (auto problem = calib::MarkerOffsetProblem(rig, marker_offset_m))
    throw std::invalid_argument("TimeSeriesFromTrack: " + *problem);
  const int first_frame = track.samples.empty() ? 0 : track.samples.front().frame;
  analysis::TimeSeries series = analysis::MakeTimeSeries(static_cast<int>(track.samples.size()), fps, first_frame);
  for (size_t i = 0; i < track.samples.size(); ++i) {
    const tracker::TrackSample& s = track.samples[i];
    if (s.frame != first_frame + static_cast<int>(i))
      throw std::invalid_argument("TimeSeriesFromTrack: sample " + std::to_string(i) + " is frame " +
                                  std::to_string(s.frame) + ", expected " +
                                  std::to_string(first_frame + static_cast<int>(i)));
    if (!s.found) continue;
    const cv::Point2d p = calib::MarkerPlaneFromImage(rig, s.centre_px, marker_offset_m);
    if (std::isfinite(p.x) && std::isfinite(p.y)) {
      series.x_m[i] = p.x;
      series.y_m[i] = p.y;
      series.valid[i] = true;
    }
  }
  return series;
}

double MaxMarkerStepPx(double drop_height_m, double gravity_mps2, double fps, double metres_per_px) {
  // Speed after a free fall from rest through h: v = sqrt(2 g h) (Galilei; any mechanics text).
  const double fall_m = std::max(0.0, drop_height_m) + kFallMarginM;
  return std::sqrt(2.0 * gravity_mps2 * fall_m) / fps / metres_per_px;
}

TrackedClip TrackOpenedClip(const ClipRequest& request, const calib::Rig& rig, OpenedClip& opened,
                            const ClipProgress& progress) {
  if (!opened.ok() || !opened.source || !opened.rate)
    throw std::invalid_argument("TrackOpenedClip: the clip was not opened: " + opened.problem.value_or("no source"));
  tracker::TrackOptions track_options;
  track_options.marker = request.marker;
  track_options.seed_px = request.seed_px;
  if (request.drop_height_m && rig.quality.metres_per_px_centre > 0) {
    track_options.max_step_px =
        MaxMarkerStepPx(*request.drop_height_m, request.gravity_mps2.value_or(analysis::kStandardGravityMps2),
                        opened.rate->fps, rig.quality.metres_per_px_centre);
  }
  TrackedClip out;
  out.track = tracker::TrackClip(*opened.source, track_options, progress);
  opened.source.reset();  // read to the end; free the decoder
  out.series = TimeSeriesFromTrack(out.track, rig, opened.rate->fps, opened.marker_offset.offset_m);
  return out;
}

ClipMeasurement MeasureClip(const ClipRequest& request, const calib::Rig& rig, analysis::TimeSeries series, double fps,
                            const MeasureOptions& options) {
  ClipMeasurement m;
  m.series = std::move(series);
  m.marker_offset = options.marker_offset;
  m.camera_distance_m = calib::CameraDistanceM(rig);
  if (!options.track) m.gravity_offset = options.saved_gravity_offset;
  m.conditions = DropConditionsOf(request);
  m.fit_options = LawFitOptionsOf(m.conditions);
  const analysis::KinematicsOptions kinematics_options = KinematicsOptionsFor(request, rig, fps);
  m.kinematics = analysis::AnalyzeKinematics(m.series, kinematics_options);
  if (m.kinematics.failure) return m;
  if (options.track && request.gravity_ruler) ApplyGravityRuler(rig, fps, *options.track, kinematics_options, m);
  if (m.kinematics.failure) return m;
  // The plausibility gate: the rate as ResolveCaptureRate found it (the clip's own as the last).
  const std::optional<CaptureRate> rate =
      ResolveCaptureRate(request.fps_option, request.fps_manifest, rig.capture_fps, fps);
  if (rate) m.plausibility_problem = GravityGateProblem(m.kinematics.checks.gravity, *rate);
  if (m.plausibility_problem) m.flags.push_back(kFlagRateOrScale);
  m.fit_clip = analysis::MakeFitClip(request.clip_id, request.drop_height_m.value_or(0.0), request.mass_kg, m.series,
                                     m.kinematics.segmentation, m.kinematics.impacts);
  if (m.fit_clip->known_onset_height_m && options.fit_laws) {
    // The geometry's onset height as a prior: the rig's height sd there (floor included) and
    // the free radius's tolerance.
    const double g = *m.fit_clip->known_onset_height_m;
    double floor_sd = 0.0005;  // no rig uncertainty: a corner height read by eye (from memory)
    try {
      floor_sd = calib::HeightSdAt(rig, cv::Point2d(0.0, g));
    } catch (const std::exception&) {
    }
    const double sd = std::hypot(floor_sd, request.free_radius_sd_m);
    if (sd > 0.0) m.fit_clip->onset_prior_sd_m = sd;
  }
  if (options.fit_laws && !m.plausibility_problem) {
    FitLaws(kinematics_options, m);
  } else if (options.onset_from_fit) {
    ReadAtFittedOnset(kinematics_options, options.onset_from_fit->first, options.onset_from_fit->second, m,
                      kinematics_options.onset_height_m ? analysis::OnsetHeightSource::kGeometryPrior
                                                        : analysis::OnsetHeightSource::kFit);
  }
  m.track_force = TrackForceDeflection(m.series, m.kinematics, m.conditions.mass_kg, m.conditions.gravity_mps2);
  ClipScaleUncertainty scale = ScaleUncertaintyOf(request, rig, m);
  m.scale_uncertainty = scale.scale;
  m.uncertainty_notes = std::move(scale.notes);
  return m;
}

ClipOutcome AnalyzeClip(const ClipRequest& request, const calib::Rig& rig, OpenedClip opened,
                        const ClipProgress& progress) {
  ClipOutcome out;
  out.opened = std::move(opened);
  if (!out.opened.ok()) {
    out.stopped = ClipOutcome::Stop::kNotOpened;
    return out;
  }
  out.tracked = TrackOpenedClip(request, rig, out.opened, progress);
  const tracker::Track& track = out.tracked->track;
  if (track.frames == 0) {
    out.stopped = ClipOutcome::Stop::kNoFrames;
    return out;
  }
  if (track.tracked_frames == 0) {
    out.stopped = ClipOutcome::Stop::kMarkerNeverFound;
    return out;
  }
  MeasureOptions measure;
  measure.fit_laws = request.fit_laws;
  measure.marker_offset = out.opened.marker_offset;
  measure.track = &out.tracked->track;
  out.measurement = MeasureClip(request, rig, out.tracked->series, out.opened.rate->fps, measure);
  return out;
}

}  // namespace dropfit::pipeline
