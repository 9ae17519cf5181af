#pragma once
// One clip's measured result (pipeline/clip.h) as the contract's records: result.json and
// track.csv (docs/formats.md, "What one run writes"). The one place a clip's results become
// output records, for `dropfit analyze` and `dropfit run` alike.

#include <filesystem>
#include <optional>
#include <string>
#include <vector>

#include "calib/rig.h"
#include "cli/manifest.h"
#include "cli/results.h"
#include "pipeline/clip.h"

namespace dropfit::cli {

// The request of a manifest row (clip path inside `folder`, mass, heights, geometry, rate).
pipeline::ClipRequest ClipRequestFor(const ManifestRow& row, const std::filesystem::path& folder);

struct ClipAnalysis {
  ClipResult result;            // the contract's result.json content
  std::vector<TrackRow> track;  // the contract's track.csv rows (empty when nothing was read)
  bool analysed = false;        // false: the clip failed; the reasons are in result.errors
  // The measurement, for the joint stage; unset when the clip stopped before it.
  std::optional<pipeline::ClipMeasurement> measurement;
};

// Runs pipeline::AnalyzeClip and maps its outcome to the records. Never throws for a per-clip
// problem (unreadable clip, marker not found, no impact): those come back as data with
// analysed = false and the reason in result.errors.
ClipAnalysis AnalyzeAndRecordClip(const pipeline::ClipRequest& request, const calib::Rig& rig,
                                  pipeline::OpenedClip opened, const pipeline::ClipProgress& progress = {});
ClipAnalysis AnalyzeAndRecordClip(const pipeline::ClipRequest& request, const calib::Rig& rig,
                                  const pipeline::ClipProgress& progress = {});

// The records of an outcome (what AnalyzeClip returns, without running anything).
ClipAnalysis RecordsOfOutcome(const pipeline::ClipRequest& request, const calib::Rig& rig,
                              pipeline::ClipOutcome outcome);

// A clip analysed earlier, rebuilt from its result.json and track.csv through the same
// measurement (pipeline::MeasureClip, no law fits; the figures at the onset height the result
// reports when it was fitted). Throws std::exception when the files do not fit together.
pipeline::ClipMeasurement RemeasureClip(const pipeline::ClipRequest& request, const calib::Rig& rig,
                                        const ClipResult& result, const std::vector<TrackRow>& track);

// track.csv rows of a track: t_s = frame / fps; metres from the drop-plane series
// (pipeline::TimeSeriesFromTrack) where valid; empty otherwise.
std::vector<TrackRow> TrackRowsFromTrack(const tracker::Track& track, const analysis::TimeSeries& series, double fps);

// The analysis library's time series from track.csv rows (frames consecutive from the first
// row's; a row without metres is a missing sample). Throws std::invalid_argument when the
// rows are not consecutive frames or fps is not > 0.
analysis::TimeSeries TimeSeriesFromTrackRows(const std::vector<TrackRow>& rows, double fps);

// Fills result.json's marker_offset_m (the offset the track's metres were mapped at) and
// marker_offset_source ("option", "manifest", "none").
void AddMarkerOffsetToResult(const pipeline::MarkerOffset& offset, ClipResult& result);

// Fills result.json's gravity-ruler fields (docs/formats.md, "Gravity ruler"): camera_distance_m,
// marker_offset_gravity_m and its sd, the flights and Birge ratio it used, and its warnings.
void AddGravityRulerToResult(const pipeline::ClipMeasurement& m, const std::string& clip, ClipResult& result);

// Fills result.json's tracking fields from a track: frames, tracked_frames, warnings, errors,
// frames_left_empty, and info entries marker_kind, marker_choice, marker_radius_px, lost_frames.
void AddTrackToResult(const tracker::Track& track, ClipResult& result);

// Flags of docs/formats.md ("Flags") for impact figures kept but implausible (issue 18): a COR
// above 1, a negative maximum deflection, a peak force above
// kPeakForceBound m (v_impact + v_rebound) / t_contact. By the impulse-momentum theorem the mean
// contact force is m (v_impact + v_rebound) / t_contact (plus m g); a half-sine pulse peaks at
// pi/2 of its mean (common practice, no source), so 5 x is beyond any plausible pulse (the bound
// of issue 18). Each flag goes on the impact with a warning naming the bounce, the value and the
// likely cause; the summary leaves flagged impacts out of its means.
inline constexpr double kPeakForceBound = 5.0;
inline constexpr const char* kFlagCorAbove1 = "cor_above_1";
inline constexpr const char* kFlagNegativeDeflection = "negative_deflection";
inline constexpr const char* kFlagPeakForceImplausible = "peak_force_implausible";
void FlagImplausibleImpacts(double mass_kg, const std::string& clip, ClipResult& result);

// Fills result.json's analysis fields from a track-only analysis: gravity_check, impacts
// (contract fields, source "track"; uncertainties and track-only figures beside them as
// <figure>_sd_<unit> and *_track_*), clip extras (noise_sd_m, onset height, tilt, checks),
// warnings, and an error when the analysis failed. `clip` prefixes the error.
void AddKinematicsToResult(const analysis::KinematicsResult& kinematics, const std::string& clip, ClipResult& result);

}  // namespace dropfit::cli
