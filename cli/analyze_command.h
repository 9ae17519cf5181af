#pragma once
// `dropfit analyze`: one clip -> hub track, impacts with COR and their uncertainties, set-up
// self-checks (result.json, track.csv per docs/formats.md).
//
// Steps: read the rig (cli/rig_io.h); track the hub marker (tracker/track.h); pixels to
// drop-plane metres (calib::PlaneFromImage); the track-only analysis
// (analysis/kinematics.h: segmentation, impact figures, gravity / tilt / drop-height checks);
// [contact-law fits: see the marked place in analyze_command.cpp]; write the files.
//
// Onset height: with --free-radius and a rig whose y_origin is "floor", the hub height at
// which contact begins is the free radius (source "geometry"); otherwise it is estimated from
// the track ("track"), to be refined by a law fit ("fit").
//
// Exit status (contract): 0 done (warnings allowed); 1 the clip could not be analysed (no
// frames, no impact found...), the reason in result.json's errors and on stderr, both files
// still written; 2 bad options, an unreadable rig, no capture rate known or a rig made for
// another image size (pipeline/clip.h, OpenClip), nothing written. Frames that cannot be
// read (a truncated file, a missing or damaged image) are left empty with a warning naming them.

#include <iosfwd>
#include <optional>
#include <string>
#include <vector>

#include "analysis/kinematics.h"
#include "analysis/time_series.h"
#include "cli/results.h"

namespace dropfit::cli {

struct AnalyzeCommandOptions {
  std::string clip;                     // video file or folder of numbered images
  std::string rig_path;                 // rig.json from `dropfit calibrate`
  double mass_kg = 0.0;                 // dropped mass [kg]; 0.01..2000 (analysis/plausible_ranges.h)
  std::optional<double> fps;            // true capture rate [frames/s]; > 0; overrides rig and container
  std::optional<double> drop_height_m;  // nominal drop height [m]; 0.005..5; for the drop-height check
  std::optional<double> free_radius_m;  // unloaded radius, hub to tread [m]; 0.005..1.5
  // The tread for the volumetric law (analysis/geometry.h): a cylinder of this width, or a torus
  // of this section radius (wins) [m]; 0.005..1.5. Without either the volumetric law is not ranked.
  std::optional<double> tread_width_m;
  std::optional<double> section_radius_m;
  std::optional<double> gravity_mps2;  // local gravity [m/s^2]; (0, 100]; default standard
                                       // gravity 9.80665 (3rd CGPM, 1901)
  // Offset of the marker's plane from the calibrated plane, toward the camera positive [m];
  // |value| <= kMaxMarkerOffsetM (cli/manifest.h); needs a rig with a plane pose (calib/rig.h).
  std::optional<double> marker_offset_m;
  bool no_gravity_ruler = false;  // --no-gravity-ruler: no marker-plane estimate from the flights
  std::string marker = "auto";    // auto|quadrant|dot|template (tracker/marker_kind.h)
  std::string marker_at;          // --marker-at "U,V" [px]: the marker's centre in the first frames
  std::string out_dir;            // folder for result.json and track.csv
};
// A message naming the first bad option and its valid range, or nothing.
std::optional<std::string> ValidateAnalyzeOptions(const AnalyzeCommandOptions& options);

// Returns the contract's exit status. Messages go to `err`, the summary to `out`.
int RunAnalyze(const AnalyzeCommandOptions& options, std::ostream& out, std::ostream& err);
// Same, on std::cout and std::cerr.
int RunAnalyze(const AnalyzeCommandOptions& options);

}  // namespace dropfit::cli
