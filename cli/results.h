#pragma once
// The result files of docs/formats.md ("What one run writes"), as plain data, with their
// writers and readers. Field names here are the contract's names; `extra` lists hold the
// additional figures a result carries beside them (the contract allows adding fields), written
// in the order given.
//
// Every writer goes through WriteFileAtomically. Numbers are written with enough digits to
// round-trip metres to the nanometre; a non-finite number is written as JSON null / empty CSV.

#include <filesystem>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "analysis/constants.h"
#include "analysis/uncertainty_budget.h"

namespace dropfit::cli {

using NamedValues = std::vector<std::pair<std::string, double>>;
using NamedTexts = std::vector<std::pair<std::string, std::string>>;

// One row of track.csv. Coordinates are empty where the marker was not found (never invented).
struct TrackRow {
  int frame = 0;                     // counts from 0 in the clip
  double t_s = 0.0;                  // frame / capture rate: mid-exposure time
  std::optional<double> u_px, v_px;  // image position, OpenCV pixel convention
  std::optional<double> x_m, y_m;    // drop-plane position, y up
  double quality = 0.0;              // [0, 1]
};

// What a curve kept for the report shows; it fixes the axes. Written as its text
// (docs/formats.md, "Curves"):
//   kTrajectory            "trajectory"             t_s -> y_m of a law's simulated hub height (name = law id)
//   kResidual              "residual"               t_s -> measured minus simulated y_m (name = law id)
//   kForceDeflection       "force_deflection"       delta_m -> force_n from a law (name = law id)
//   kForceDeflectionTrack  "force_deflection_track" delta_m -> force_n from the filtered track (m (a + g))
//   kCorVsSpeed            "cor_vs_speed"           impact_speed_mps -> cor predicted by a law (name = law id)
//   kCorMeasured           "cor_measured"           impact_speed_mps -> cor measured (one point per impact)
enum class CurveKind { kTrajectory, kResidual, kForceDeflection, kForceDeflectionTrack, kCorVsSpeed, kCorMeasured };
std::string ToString(CurveKind kind);
// Throws std::invalid_argument naming the text and listing the valid ones.
CurveKind CurveKindFromString(const std::string& text);

// A sampled curve kept for the report, so `dropfit report` can redraw without re-running.
struct Curve {
  std::string name;
  CurveKind kind = CurveKind::kTrajectory;
  std::vector<double> x, y;
};

struct GravityCheck {
  std::optional<double> flight_accel_mps2;                // measured in free flight (downward positive)
  double expected_mps2 = analysis::kStandardGravityMps2;  // standard gravity or the user's local g
};

// A figure's uncertainty budget (docs/formats.md, "Uncertainty budgets"; docs/methods.md §23):
// its combined standard uncertainty, the part that contributes most, and each part's
// contribution in the figure's unit (fit, onset_height, rig_scale, marker_plane, capture_rate,
// gravity).
struct BudgetRecord {
  std::string figure;  // the figure's name in the record, e.g. "impact_speed_mps", "k"
  double sd = 0.0;
  std::string dominant;
  NamedValues parts;
};

// A budget as a record, and back (nothing when a part's name is unknown to this version).
BudgetRecord ToBudgetRecord(const std::string& figure, const analysis::FigureBudget& budget);
std::optional<analysis::FigureBudget> ToFigureBudget(const BudgetRecord& record);

struct ImpactRecord {
  double t_contact_s = 0.0;
  double t_separation_s = 0.0;
  double impact_speed_mps = 0.0;
  double rebound_speed_mps = 0.0;
  double cor = 0.0;
  double contact_duration_s = 0.0;
  double max_deflection_m = 0.0;
  double peak_force_n = 0.0;
  double onset_height_m = 0.0;
  std::string onset_height_source = "track";  // "geometry" | "fit" | "track"
  std::string source = "track";               // "track" or a law id
  bool complete = true;
  NamedValues extra;  // uncertainties, track-only estimates, energy lost, ...
  // Flags of docs/formats.md ("Flags"): a figure kept but implausible (cor_above_1,
  // negative_deflection, peak_force_implausible); the impact is then left out of the means.
  std::vector<std::string> flags;
  std::vector<BudgetRecord> budget;  // one per figure with an uncertainty
};

struct FitRecord {
  std::string law;       // a law id of analysis/contact_law.h
  NamedValues params;    // contract names, in the law's order
  NamedValues param_sd;  // standard deviations, same names
  double onset_height_m = 0.0;
  std::string onset_height_source = "fit";  // "geometry" or "fit"
  std::vector<int> bounces;                 // indices into `impacts`
  double rms_residual_m = 0.0;
  double bic = 0.0;
  bool converged = false;
  NamedValues extra;                 // e.g. iterations, cost
  NamedTexts notes;                  // e.g. formula, geometry assumed
  std::vector<BudgetRecord> budget;  // one per parameter (param_sd holds their combined sds)
};

// A frame where the marker was located but not trusted (tracker::EmptyFrame), left empty in
// track.csv.
struct FrameLeftEmpty {
  int frame = 0;
  std::string reason;
};

struct ClipResult {
  std::string clip;
  double capture_fps = 0.0;
  std::string capture_fps_source;  // "option" | "manifest" | "rig" | "container"
  int frames = 0;
  int tracked_frames = 0;
  std::string y_origin = "board";  // "floor" | "board"
  GravityCheck gravity_check;
  std::vector<ImpactRecord> impacts;
  std::vector<FitRecord> fits;
  std::optional<std::string> best_law;
  std::vector<std::string> equivalent_laws;  // laws the data cannot tell from best_law
  std::optional<std::string> no_law_fits;    // the verdict when even the best law misfits
  std::vector<std::string> warnings;
  std::vector<std::string> errors;
  std::vector<FrameLeftEmpty> frames_left_empty;  // in frame order
  NamedValues extra;                              // e.g. noise estimate, tilt
  NamedTexts info;                                // e.g. marker kind chosen and why
  std::vector<Curve> curves;                      // for the report
  // Flags of docs/formats.md ("Flags"), e.g. "rate_or_scale" (the plausibility gate).
  std::vector<std::string> flags;
};

// Group flags of summary.csv (docs/formats.md, "Flags"); the clip and impact flags are declared
// where they are raised (pipeline/plausibility.h, cli/clip_records.h).
inline constexpr const char* kFlagFailed = "failed";          // a clip of the group failed
inline constexpr const char* kFlagIncomplete = "incomplete";  // a clip has no complete impact

// Adds `flag` to a flag list unless it is there already.
void AddFlag(std::vector<std::string>& flags, const std::string& flag);
inline void AddFlag(ClipResult& result, const std::string& flag) { AddFlag(result.flags, flag); }

// One row of summary.csv: a (specimen, nominal height) group. `*_sd` empty for one clip.
struct SummaryGroup {
  std::string specimen;
  double drop_height_m = 0.0;
  int clips = 0;
  double impact_speed_mps_mean = 0.0;
  std::optional<double> impact_speed_mps_sd;
  double cor_mean = 0.0;
  std::optional<double> cor_sd;
  double contact_duration_s_mean = 0.0;
  std::optional<double> contact_duration_s_sd;
  double max_deflection_m_mean = 0.0;
  std::optional<double> max_deflection_m_sd;
  double peak_force_n_mean = 0.0;
  std::optional<double> peak_force_n_sd;
  double rebound_speed_mps_mean = 0.0;
  std::optional<double> rebound_speed_mps_sd;
  double energy_lost_j_mean = 0.0;
  std::optional<double> energy_lost_j_sd;
  // The standard uncertainty of each mean (docs/methods.md §23, "Per-height means"): the spread
  // over repeats combined with the parts the clips share, by figure name (impact_speed_mps, cor,
  // contact_duration_s, max_deflection_m, peak_force_n, rebound_speed_mps, energy_lost_j); a
  // figure is absent when a clip's result carries no budget for it.
  std::vector<BudgetRecord> mean_budget;
  // The mean's standard uncertainty of `figure`, if known.
  std::optional<double> MeanU(const std::string& figure) const {
    for (const BudgetRecord& b : mean_budget)
      if (b.figure == figure) return b.sd;
    return std::nullopt;
  }
  // Flags of docs/formats.md ("Flags"): why the group's figures are fewer or suspect.
  std::vector<std::string> flags;
};

struct HoldoutRecord {
  double drop_height_m = 0.0;
  double cor_error = 0.0;
  double contact_duration_error_s = 0.0;
  double max_deflection_error_m = 0.0;
};

struct JointFitRecord {
  FitRecord fit;
  std::vector<HoldoutRecord> holdout;
};

struct SpecimenSummary {
  std::string specimen;
  std::optional<std::string> best_law;
  std::vector<std::string> equivalent_laws;
  std::optional<std::string> no_law_fits;
  std::vector<JointFitRecord> joint_fits;
  std::vector<Curve> curves;  // for the report (COR against impact speed)
  NamedValues extra;          // e.g. the gravity ruler pooled over the specimen's clips
};

struct ClipMessage {
  std::string clip;
  std::string message;
};

struct Summary {
  std::vector<SummaryGroup> groups;
  std::vector<SpecimenSummary> specimens;
  std::vector<ClipMessage> errors;
  std::vector<ClipMessage> warnings;
  NamedValues rig_quality;  // the rig's quality figures, for the report
  NamedTexts run;           // effective options and versions of the run
  // The clip ids of the run's manifest (summary.json "clips"): `dropfit report` shows only these
  // (a result left in clips/ by a row since removed is not the run's). Empty in a summary.json
  // written before issue 18: then every result in clips/ is shown.
  std::vector<std::string> clips;
};

// track.csv
void WriteTrackCsv(const std::filesystem::path& path, const std::vector<TrackRow>& rows);
// Throws std::runtime_error naming the file and line on a malformed file.
std::vector<TrackRow> ReadTrackCsv(const std::filesystem::path& path);

// result.json
void WriteClipResult(const std::filesystem::path& path, const ClipResult& result);
ClipResult ReadClipResult(const std::filesystem::path& path);

// summary.csv and summary.json
void WriteSummaryCsv(const std::filesystem::path& path, const std::vector<SummaryGroup>& groups);
void WriteSummaryJson(const std::filesystem::path& path, const Summary& summary);
// laws.csv (docs/formats.md, "laws.csv"): one row per specimen, joint law and parameter, with the
// law's BIC, its difference from the best law's, whether it is the best law, and the largest
// holdout errors of COR and contact duration (absolute values).
void WriteLawsCsv(const std::filesystem::path& path, const std::vector<SpecimenSummary>& specimens);
Summary ReadSummaryJson(const std::filesystem::path& path);

// Formats a number for CSV: shortest text that round-trips a double (%.17g trimmed), empty for
// a non-finite value.
std::string FormatNumber(double value);

// A result's entry by name: the text of `info` (empty when absent), the number of `extra` (NaN
// when absent).
std::string InfoValue(const ClipResult& result, const std::string& key);
double ExtraValue(const ClipResult& result, const std::string& key);

}  // namespace dropfit::cli
