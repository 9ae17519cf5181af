#pragma once
// One clip from its file to its measured result: the road every clip takes through `dropfit
// analyze` and `dropfit run`, and the benches. No global state: several clips may be measured at
// once on separate threads.
//
//   ClipRequest --OpenClip--> OpenedClip --TrackOpenedClip--> TrackedClip (track, series in metres)
//       --MeasureClip--> ClipMeasurement (kinematics, fit input, per-clip laws, onset height)
//
// AnalyzeClip runs the three. A clip whose track was saved earlier (track.csv) is measured by
// MeasureClip alone, from its series.
//
// Onset height, decided here and nowhere else (docs/formats.md, "Impact figures"):
//   - geometry: the free radius, when the rig knows the floor (y_origin "floor");
//   - otherwise the track's provisional estimate (analysis/impacts.h, step 4), and then, when a
//     law converged, the best law's fitted onset height ("fit"): the per-bounce figures are read
//     again at that height (analysis::ReadAtOnsetHeight); the track is not segmented again.
//   The joint stage (pipeline/joint_stage.h) fits the onset height itself, starting from the
//   geometry's value where there is one (JointFitClip).

#include <opencv2/core.hpp>

#include <filesystem>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "analysis/drop_conditions.h"
#include "analysis/gravity_ruler.h"
#include "analysis/kinematics.h"
#include "analysis/law_choice.h"
#include "analysis/law_fit.h"
#include "analysis/time_series.h"
#include "analysis/uncertainty_budget.h"
#include "calib/rig.h"
#include "media/frame_source.h"
#include "pipeline/capture_rate.h"
#include "pipeline/law_curves.h"
#include "pipeline/marker_offset.h"
#include "pipeline/plausibility.h"
#include "tracker/marker_kind.h"
#include "tracker/track.h"

namespace dropfit::pipeline {

// What is known about one clip before it is read.
struct ClipRequest {
  std::filesystem::path clip_path;      // video file or folder of numbered images
  std::string clip_id;                  // for messages and result.json's "clip"
  double mass_kg = 0.0;                 // dropped mass [kg], > 0
  std::optional<double> drop_height_m;  // nominal drop height [m]
  std::optional<double> free_radius_m;  // unloaded radius, hub to tread [m]
  // Its standard uncertainty [m] (manifest free_radius_sd_m; default 0.5 mm, a tape or rule
  // read by eye, from memory): with the rig's floor uncertainty, the onset height's prior.
  double free_radius_sd_m = 0.0005;
  std::optional<double> tread_width_m;     // volumetric law: cylinder width [m]
  std::optional<double> section_radius_m;  // volumetric law: torus section radius [m] (wins)
  std::optional<double> fps_option;        // --fps (wins over everything)
  std::optional<double> fps_manifest;      // manifest capture_fps
  std::optional<double> gravity_mps2;      // local gravity; default standard gravity
  // Its standard uncertainty [m/s^2]; default kGivenGravitySdMps2 when gravity_mps2 is set,
  // kStandardGravitySdMps2 otherwise (pipeline/uncertainty.h).
  std::optional<double> gravity_sd_mps2;
  // The camera clock's stated tolerance [ppm], a rectangular half-width (manifest
  // capture_fps_tolerance_ppm), >= 0.
  double capture_fps_tolerance_ppm = 50.0;
  // The hub marker's plane (pipeline/marker_offset.h): --marker-offset, manifest marker_offset_m.
  std::optional<double> marker_offset_option_m;
  std::optional<double> marker_offset_manifest_m;
  tracker::MarkerKind marker = tracker::MarkerKind::kAuto;
  std::optional<cv::Point2d> seed_px;  // marker position in the first frames [px]
  bool fit_laws = true;                // run the per-clip contact-law fits
  // The gravity ruler (analysis/gravity_ruler.h): estimate the marker plane's offset from the
  // flights, and apply it when none was given and the policy allows (`--no-gravity-ruler`: off).
  bool gravity_ruler = true;
};

// Mass, gravity and tread of a request, as one value.
analysis::DropConditions DropConditionsOf(const ClipRequest& request);
// The onset height from the geometry (free radius above a floor the rig knows), if known.
std::optional<double> GeometryOnsetHeight(const ClipRequest& request, const calib::Rig& rig);
// The kinematics and law-fit settings of a clip (shared by the per-clip and joint stages).
analysis::KinematicsOptions KinematicsOptionsFor(const ClipRequest& request, const calib::Rig& rig, double fps);
analysis::LawFitOptions LawFitOptionsFor(const ClipRequest& request);

// The start-up checks of a clip, the one place `track`, `analyze` and `run` make them: open the
// clip (media::FrameSource), find its capture rate (ResolveCaptureRate), compare its frame size
// with the rig's, and resolve the marker's plane (ResolveMarkerOffset; an offset the rig cannot
// map, calib::MarkerOffsetProblem, is a set-up problem). The clip is opened once; the caller
// passes the result on.
struct OpenedClip {
  std::unique_ptr<media::FrameSource> source;  // null when nothing can be read from the clip
  std::optional<CaptureRate> rate;             // set when the clip can be tracked
  MarkerOffset marker_offset;                  // the plane the track's pixels are mapped onto
  // Why the clip cannot be tracked, naming the clip and saying what to do; unset when it can.
  std::optional<std::string> problem;
  // The problem lies in the set-up, not in the clip's content (no capture rate known anywhere, a
  // rig made for another image size): the single-clip commands stop with exit status 2 and write
  // nothing; a folder run fails that clip only.
  bool setup_problem = false;
  bool ok() const { return !problem.has_value(); }
};
// Never throws for a problem of the clip; those come back in `problem`.
OpenedClip OpenClip(const ClipRequest& request, const calib::Rig& rig);

// The drop-plane time series of a track: t = frame / fps (mid-exposure), metres through the rig
// where the marker was found and the mapping is finite; other samples invalid. The pixels are
// mapped onto the marker's plane `marker_offset_m` in front of the calibrated plane
// (calib::MarkerPlaneFromImage; at offset 0 calib::PlaneFromImage: undistort, then the plane
// mapping). Throws std::invalid_argument when fps is not > 0 or the rig cannot map the offset.
analysis::TimeSeries TimeSeriesFromTrack(const tracker::Track& track, const calib::Rig& rig, double fps,
                                         double marker_offset_m = 0.0);

// The largest plausible move of the hub marker from one frame to the next [px]: the speed of a
// free fall from rest through the drop height + kFallMarginM, v = sqrt(2 g (h + 0.5 m)), over one
// frame interval, at the rig's scale at the image centre. TrackOpenedClip gives it to the
// tracker (tracker::TrackOptions::max_step_px) when the drop height is known.
inline constexpr double kFallMarginM = 0.5;  // a release above the nominal height, a throw
double MaxMarkerStepPx(double drop_height_m, double gravity_mps2, double fps, double metres_per_px);

// frames done, frames total (0 when unknown)
using ClipProgress = std::function<void(int, int)>;

struct TrackedClip {
  tracker::Track track;
  analysis::TimeSeries series;  // TimeSeriesFromTrack
};
// Tracks an opened clip (its source is read to the end). `opened` must be ok().
TrackedClip TrackOpenedClip(const ClipRequest& request, const calib::Rig& rig, OpenedClip& opened,
                            const ClipProgress& progress = {});

// A clip measured: everything the per-clip result and the joint stage need.
struct ClipMeasurement {
  analysis::TimeSeries series;
  analysis::DropConditions conditions;
  // The final kinematics (at the geometry's, the track's or the best law's onset height).
  analysis::KinematicsResult kinematics;
  // The fitter's input, cut from the first kinematics (geometry or track onset height); empty
  // windows when no bounce is complete. Unset when the kinematics failed.
  std::optional<analysis::FitClip> fit_clip;
  analysis::LawFitOptions fit_options;
  std::optional<analysis::LawComparison> laws;  // per-clip fits, when fitted
  std::vector<FitTrace> law_traces;             // one per laws->fits (empty for failed fits)
  bool onset_refitted = false;                  // figures read again at the best law's onset
  // The plane `series` is in: the offset given, the gravity ruler's when it was applied, or 0.
  MarkerOffset marker_offset;
  // The gravity ruler's estimate (at the final plane's flight windows), when it ran.
  std::optional<analysis::MarkerOffsetEstimate> gravity_offset;
  std::optional<double> camera_distance_m;    // from the rig's plane pose
  std::vector<std::string> gravity_warnings;  // the ruler's warnings, as sentences
  // The report's force-deflection loop from the filtered track (first complete bounce).
  std::optional<ForceDeflection> track_force;
  // The plausibility gate (pipeline/plausibility.h): set when the flights disagree with gravity
  // after the ruler; the laws were then not fitted and the clip fails with this error (no clip
  // name). `flags` holds the clip's flags of docs/formats.md ("Flags"), e.g. "rate_or_scale".
  std::optional<std::string> plausibility_problem;
  std::vector<std::string> flags;
  double fit_seconds = 0.0;  // wall time of the per-clip fits (0 when none ran)
  // The clip's scale inputs to the figures' uncertainty budgets (pipeline/uncertainty.h,
  // ScaleUncertaintyOf), and what could not be known, as sentences.
  analysis::ScaleUncertainty scale_uncertainty;
  std::vector<std::string> uncertainty_notes;
};

// How to measure: fit the laws (per-clip stage) or not (a clip rebuilt from its track.csv for the
// joint stage). Without fits, `onset_from_fit` (the saved result's fitted onset height and sd)
// makes the figures those the per-clip stage reported.
struct MeasureOptions {
  bool fit_laws = true;
  std::optional<std::pair<double, double>> onset_from_fit;  // (height [m], sd [m])
  // The plane `series` was mapped onto.
  MarkerOffset marker_offset;
  // The track the series came from (its pixels): lets the gravity ruler map it onto other planes.
  // Without it (a clip rebuilt from track.csv) the ruler does not run.
  const tracker::Track* track = nullptr;
  // Without a track: the ruler's estimate a saved result reports, kept as the measurement's
  // gravity_offset (the uncertainty budgets and the specimen's pooled offset use it).
  std::optional<analysis::MarkerOffsetEstimate> saved_gravity_offset;
};

// Measures a clip from its series. With options.track, a rig that knows its plane's pose and
// request.gravity_ruler, the gravity ruler runs on the kinematics' flights (analysis/gravity_ruler.h);
// when no offset was given and the policy allows, the series is mapped again at the estimate
// (source "gravity") and measured again, twice at most, before the law fits. Then the plausibility
// gate (pipeline/plausibility.h): flights that still disagree with gravity stop the clip before
// the law fits (plausibility_problem set, flag "rate_or_scale"). Throws
// std::invalid_argument for an invalid series or request; a clip that cannot be analysed comes
// back with kinematics.failure set.
ClipMeasurement MeasureClip(const ClipRequest& request, const calib::Rig& rig, analysis::TimeSeries series, double fps,
                            const MeasureOptions& options);

// The whole road of one clip. Stops early, leaving the later parts unset, when the clip cannot be
// opened, no frame was read, or the marker was never found (`stopped` says which).
struct ClipOutcome {
  OpenedClip opened;  // source released after tracking
  std::optional<TrackedClip> tracked;
  std::optional<ClipMeasurement> measurement;
  enum class Stop { kNone, kNotOpened, kNoFrames, kMarkerNeverFound } stopped = Stop::kNone;
};
// Never throws for a per-clip problem.
ClipOutcome AnalyzeClip(const ClipRequest& request, const calib::Rig& rig, OpenedClip opened,
                        const ClipProgress& progress = {});

}  // namespace dropfit::pipeline
