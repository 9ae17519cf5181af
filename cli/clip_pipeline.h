#pragma once
// One clip, end to end: track the hub marker, convert to metres through the rig, find the
// impacts, fit the contact laws. Shared by `dropfit analyze` (one clip) and `dropfit run`
// (a folder, several clips in parallel: no global state here).

#include <filesystem>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "analysis/kinematics.h"
#include "analysis/law_fit.h"
#include "calib/rig.h"
#include "cli/manifest.h"
#include "cli/results.h"
#include "cli/track_command.h"
#include "media/frame_source.h"

namespace dropfit::cli {

struct ClipRequest {
  std::filesystem::path clip_path;         // video file or folder of numbered images
  std::string clip_id;                     // for messages and result.json's "clip"
  double mass_kg = 0.0;                    // dropped mass [kg], > 0
  std::optional<double> drop_height_m;     // nominal drop height [m]
  std::optional<double> free_radius_m;     // unloaded radius, hub to tread [m]
  std::optional<double> tread_width_m;     // volumetric law: cylinder width [m]
  std::optional<double> section_radius_m;  // volumetric law: torus section radius [m] (wins)
  std::optional<double> fps_option;        // --fps (wins over everything)
  std::optional<double> fps_manifest;      // manifest capture_fps
  std::optional<double> gravity_mps2;      // local gravity; default standard gravity
  std::string marker = "auto";             // tracker::MarkerKind text
  std::string seed;                        // "U,V" [px]: marker position in the first frames
  bool fit_laws = true;                    // run the per-clip contact-law fits
};

// The request of a manifest row (clip path inside `folder`, mass, heights, geometry, rate).
ClipRequest ClipRequestFor(const ManifestRow& row, const std::filesystem::path& folder);

// frames done, frames total (0 when unknown)
using ClipProgress = std::function<void(int, int)>;

struct ClipAnalysis {
  ClipResult result;            // the contract's result.json content
  std::vector<TrackRow> track;  // the contract's track.csv rows (empty when nothing was read)
  bool analysed = false;        // false: the clip failed; the reasons are in result.errors
};

// The onset height from the geometry (free radius above a floor the rig knows), if known.
std::optional<double> GeometryOnsetHeight(const ClipRequest& request, const calib::Rig& rig);
// The kinematics and law-fit settings of a clip (shared by the per-clip and joint stages).
analysis::KinematicsOptions KinematicsOptionsFor(const ClipRequest& request, const calib::Rig& rig, double fps);
analysis::LawFitOptions LawFitOptionsFor(const ClipRequest& request);

// The start-up checks of a clip, the one place `track`, `analyze` and `run` make them: open the
// clip (media::FrameSource), find its capture rate (ResolveCaptureRate: option, manifest, rig,
// container) and compare its frame size with the rig's. The clip is opened once; the caller
// passes the result on to AnalyzeClip (or tracks it itself).
struct OpenedClip {
  std::unique_ptr<media::FrameSource> source;  // null when nothing can be read from the clip
  std::optional<CaptureRate> rate;             // set when the clip can be tracked
  // Why the clip cannot be tracked, naming the clip and saying what to do; empty when it can.
  std::string problem;
  // The problem lies in the set-up, not in the clip's content (no capture rate known anywhere, a
  // rig made for another image size): the single-clip commands stop with exit status 2 and write
  // nothing; a folder run fails that clip only.
  bool setup_problem = false;
  bool ok() const { return problem.empty(); }
};
// Never throws for a problem of the clip; those come back in `problem`.
OpenedClip OpenClip(const ClipRequest& request, const calib::Rig& rig);

// Never throws for a per-clip problem (unreadable clip, marker not found, no impact): those
// come back as data with analysed = false and the reason in result.errors.
ClipAnalysis AnalyzeClip(const ClipRequest& request, const calib::Rig& rig, const ClipProgress& progress = {});
// The same on a clip OpenClip has opened (its source is read to the end).
ClipAnalysis AnalyzeClip(const ClipRequest& request, const calib::Rig& rig, OpenedClip& opened,
                         const ClipProgress& progress = {});

}  // namespace dropfit::cli
