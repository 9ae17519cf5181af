#pragma once
// The clip folder's manifest.csv (docs/formats.md, "manifest.csv").
//
// Format: UTF-8 (a byte-order mark is skipped), comma-separated, one header row, LF or CRLF
// line ends, fields optionally in double quotes ("" inside quotes is one quote; quoted fields
// may hold commas and line breaks). A line whose first non-blank character is '#' is a
// comment; blank lines are skipped. Column order is free; unknown columns are kept out of the
// way with a warning.
//
// Two kinds of fault, as the contract's exit-status section says:
// - a broken structure (no header, a required column missing, a column named twice, not text)
//   throws ManifestStructureError: the command stops with exit status 2 and writes nothing;
// - a wrong row (non-numeric or out-of-range number, missing or duplicate clip, a path that
//   leaves the folder, a clip file that does not exist) fails that clip only: the row carries
//   the message in `error`, formatted "<file>:<line>: column '<name>': <what is wrong>; <what to do>".

#include <filesystem>
#include <optional>
#include <stdexcept>
#include <string>
#include <string_view>
#include <vector>

#include "analysis/plausible_ranges.h"

namespace dropfit::cli {

class ManifestStructureError : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

// Largest |marker_offset_m| a manifest row may give [m] (a hub face is centimetres off the
// tyre's mid-plane; a metre is a typing error).
inline constexpr double kMaxMarkerOffsetM = 1.0;

// Plausible ranges of the row's numbers: analysis/plausible_ranges.h; a value
// outside fails the row with the hint "did you give millimetres?".
// The values of the `marker` column (tracker::MarkerKindFromString's; "" is auto).
inline constexpr const char* kManifestMarkerKinds[] = {"auto", "quadrant", "dot", "template"};

struct ManifestRow {
  int line = 0;                            // 1-based line of the row in the file
  std::string clip;                        // as written: a video file or a folder of numbered images
  std::string clip_id;                     // file name without extension (folder name for a sequence)
  double drop_height_m = 0.0;              // nominal drop height: lowest point above the floor at release
  double mass_kg = 0.0;                    // dropped mass
  std::optional<double> capture_fps;       // true capture rate [frames/s]
  std::string specimen;                    // free text; rows are grouped by it
  std::optional<double> free_radius_m;     // unloaded radius, hub centre to tread
  std::optional<double> free_radius_sd_m;  // its standard uncertainty [m]; default 0.5 mm
  std::optional<double> tread_width_m;     // for the volumetric law's cylinder
  std::optional<double> section_radius_m;  // for the volumetric law's torus (wins)
  // Offset of the hub marker's plane from the calibrated plane, toward the camera positive [m];
  // finite, |value| <= kMaxMarkerOffsetM; may be 0 or negative (calib/rig.h, "The marker's plane").
  std::optional<double> marker_offset_m;
  // Local gravity [m/s^2]; positive; `--gravity` wins; default standard gravity 9.80665.
  std::optional<double> gravity_mps2;
  // Its standard uncertainty [m/s^2]; default 0.0005 with gravity_mps2 or --gravity, 0.015 with
  // standard gravity (docs/methods.md §23).
  std::optional<double> gravity_sd_mps2;
  // The camera clock's tolerance [ppm], a rectangular half-width; default 50 (docs/methods.md §23).
  std::optional<double> capture_fps_tolerance_ppm;
  // The hub marker (tracker/marker_kind.h, tracker/track.h): its kind, "" = auto; one of
  // kManifestMarkerKinds. Its centre in the first frames [px] (--marker-at of `analyze`): both
  // or neither, finite, >= 0; a template marker needs them.
  std::string marker;
  std::optional<double> marker_u_px, marker_v_px;
  std::string error;  // empty when the row is usable; else why this clip fails
  bool ok() const { return error.empty(); }
};

struct Manifest {
  std::filesystem::path folder;  // the clip folder; clip paths are relative to it
  std::string display_name;      // how messages name the file (e.g. "clips/manifest.csv")
  std::vector<ManifestRow> rows;
  std::vector<std::string> warnings;  // e.g. unknown columns
};

// Reads <folder>/manifest.csv. Throws ManifestStructureError (unreadable file, broken structure).
Manifest ReadManifest(const std::filesystem::path& folder);

// Parses manifest text. `check_files` also fails rows whose clip does not exist in `folder`.
Manifest ParseManifest(std::string_view text, const std::filesystem::path& folder, const std::string& display_name,
                       bool check_files = true);

// The clip id of a clip path: its file name without extension, or the folder's name.
std::string ClipIdOf(const std::filesystem::path& clip);

}  // namespace dropfit::cli
