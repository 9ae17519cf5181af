#include "cli/clip_pipeline.h"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <sstream>

#include "analysis/forward_model.h"
#include "analysis/kinematics.h"
#include "analysis/law_fit.h"
#include "cli/analyze_command.h"
#include "cli/fit_records.h"
#include "cli/track_command.h"
#include "media/frame_source.h"
#include "tracker/track.h"

namespace dropfit::cli {

namespace {

double Seconds(std::chrono::steady_clock::time_point since) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - since).count();
}

// Force against deflection of the first complete bounce from the filtered track,
// m (a + g), for the report (curve kind "force_deflection_track").
void AddTrackForceCurve(const analysis::TimeSeries& series, const analysis::KinematicsResult& kinematics,
                        const ClipRequest& request, ClipResult& result) {
  const double g = request.gravity_mps2.value_or(analysis::kStandardGravityMps2);
  const double onset = kinematics.segmentation.onset_height_m;
  if (!std::isfinite(onset)) return;
  for (const analysis::Bounce& b : kinematics.segmentation.bounces) {
    if (!b.complete) continue;
    const analysis::ContactAccelerationTrace acc = analysis::ContactAcceleration(series, b);
    Curve curve{"track", "force_deflection_track", {}, {}};
    for (size_t k = 0; k < acc.t_s.size(); ++k) {
      curve.x.push_back(onset - acc.y_m[k]);
      curve.y.push_back(request.mass_kg * (acc.accel_mps2[k] + g));
    }
    result.curves.push_back(curve);
    return;
  }
}

}  // namespace

ClipRequest ClipRequestFor(const ManifestRow& row, const std::filesystem::path& folder) {
  ClipRequest r;
  r.clip_path = folder / std::filesystem::path(row.clip).lexically_normal();
  r.clip_id = row.clip_id;
  r.mass_kg = row.mass_kg;
  r.drop_height_m = row.drop_height_m;
  r.free_radius_m = row.free_radius_m;
  r.tread_width_m = row.tread_width_m;
  r.section_radius_m = row.section_radius_m;
  r.fps_manifest = row.capture_fps;
  return r;
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
  analysis::LawFitOptions o;
  o.gravity_mps2 = request.gravity_mps2.value_or(analysis::kStandardGravityMps2);
  o.tread = analysis::MakeTreadGeometry(request.free_radius_m.value_or(0.0), request.tread_width_m.value_or(0.0),
                                        request.section_radius_m.value_or(0.0));
  return o;
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
  if (!rig.image_size.empty() && info.size != rig.image_size) {
    out.setup_problem = true;
    out.problem = name + ": frames are " + std::to_string(info.size.width) + "x" + std::to_string(info.size.height) +
                  " but the rig was made for " + std::to_string(rig.image_size.width) + "x" +
                  std::to_string(rig.image_size.height) +
                  " images; use the rig of this camera set-up (or make one with dropfit calibrate)";
    return out;
  }
  return out;
}

ClipAnalysis AnalyzeClip(const ClipRequest& request, const calib::Rig& rig, const ClipProgress& progress) {
  OpenedClip opened = OpenClip(request, rig);
  return AnalyzeClip(request, rig, opened, progress);
}

ClipAnalysis AnalyzeClip(const ClipRequest& request, const calib::Rig& rig, OpenedClip& opened,
                         const ClipProgress& progress) {
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
  if (!opened.ok()) {
    result.errors.push_back(opened.problem);
    return out;
  }
  media::FrameSource* source = opened.source.get();
  const std::optional<CaptureRate>& rate = opened.rate;
  result.capture_fps = rate->fps;
  result.capture_fps_source = rate->source;
  if (rate->warning) result.warnings.push_back(name + ": " + *rate->warning);

  tracker::TrackOptions track_options;
  track_options.marker = tracker::MarkerKindFromString(request.marker);
  if (!request.seed.empty()) track_options.seed_px = ParseSeed(request.seed);
  const tracker::Track track = tracker::TrackClip(*source, track_options, progress);
  AddTrackToResult(track, result);
  result.extra.push_back({"time_decode_s", track.read_seconds});
  result.extra.push_back({"time_track_s", track.track_seconds});
  out.track = TrackRowsFromTrack(track, rig, rate->fps);
  if (track.frames == 0) {
    result.errors.push_back(name + ": no frames could be read");
    return out;
  }
  if (track.tracked_frames == 0) {
    result.errors.push_back(name +
                            ": the hub marker was not found on any frame; check the marker kind or its contrast "
                            "(try `dropfit track --marker ... --seed U,V` on this clip)");
    return out;
  }

  const analysis::TimeSeries series = TimeSeriesFromTrackRows(out.track, rate->fps);
  const analysis::KinematicsOptions kin_options = KinematicsOptionsFor(request, rig, rate->fps);
  analysis::KinematicsResult kinematics = analysis::AnalyzeKinematics(series, kin_options);
  const ClipResult tracked = result;  // tracking fields only, to rebuild from after a refit
  AddKinematicsToResult(kinematics, name, result);
  if (kinematics.failure) {
    // A marker missing on most frames is the likelier cause: say so, with the frames.
    if (2 * track.tracked_frames < track.frames && !result.errors.empty()) {
      result.errors.back() += "; the hub marker was found on only " + std::to_string(track.tracked_frames) + " of " +
                              std::to_string(track.frames) +
                              " frames (not found: " + tracker::FormatFrameRanges(track.lost) +
                              "): check that it stays in view, lit and unhidden through the fall and the impact";
    }
    return out;
  }

  if (request.fit_laws) {
    const auto fit_start = std::chrono::steady_clock::now();
    const analysis::FitClip fit_clip =
        analysis::MakeFitClip(request.clip_id, request.drop_height_m.value_or(0.0), request.mass_kg, series,
                              kinematics.segmentation, kinematics.impacts);
    if (fit_clip.windows.empty()) {
      result.warnings.push_back(name + ": no complete bounce: the contact laws were not fitted");
    } else {
      const analysis::LawFitOptions fit_options = LawFitOptionsFor(request);
      const analysis::LawComparison laws = analysis::FitAllLaws({fit_clip}, fit_options);
      // Without the geometry, the best law's onset height replaces the track's estimate: the
      // speeds and COR are read again at that height (contract: onset_height_source "fit").
      if (laws.best && !kin_options.onset_height_m) {
        const analysis::LawFitResult& best = laws.fits[static_cast<size_t>(*laws.best)];
        analysis::KinematicsOptions refit = kin_options;
        refit.onset_height_m = best.onset_height_m;
        refit.onset_height_sd_m = best.onset_height_sd_m;
        refit.onset_height_source = analysis::OnsetHeightSource::kFit;
        analysis::KinematicsResult again = analysis::AnalyzeKinematics(series, refit);
        if (!again.failure) {
          kinematics = std::move(again);
          result = tracked;
          AddKinematicsToResult(kinematics, name, result);
        }
      }
      AddLawFitsToResult(laws, {fit_clip}, fit_options, result);
    }
    result.extra.push_back({"time_fits_s", Seconds(fit_start)});
  }
  AddTrackForceCurve(series, kinematics, request, result);
  out.analysed = result.errors.empty();
  return out;
}

}  // namespace dropfit::cli
