#pragma once
// The plan of a rendered clip set (what `dropfit render` makes): every setting with its default,
// unit and valid range, its validator, the contact law's parameters, the camera, wheel and
// exposure they give, and per clip its drop scenario, frame count, seeds and name. The
// rendering itself is synth/render_set.h.
//
// Scene: a wheel whose tyre's lowest point is drop_height_m above the floor at release; clips
// start pre_release_s before release (or, when the hub is out of view at release, at the first
// frame the marker is wholly in view) and by default hold three complete bounces.
// Physics: analysis/forward_model.h (the renderer draws, it does not simulate).
//
// Messages name the settings by their `dropfit render` spelling ("--mass 0 kg is outside
// (0, 1e4]"), so that the command can pass them on unchanged.

#include <cstdint>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "analysis/constants.h"
#include "analysis/contact_law.h"
#include "analysis/forward_model.h"
#include "analysis/geometry.h"
#include "media/video_out.h"
#include "synth/camera.h"
#include "synth/render.h"
#include "synth/render_calibration.h"

namespace dropfit::synth {

// Every setting of a render run: default, meaning, unit, valid range.
struct RenderOptions {
  std::string out_dir;  // folder to write into (created; files in it are replaced)
  // Physics.
  std::string law = "kelvin-voigt";     // contact law id (contract)
  std::vector<std::string> params;      // "name=value" law parameters (contract names); unset ones
                                        // take the law's default (RenderLawDefaults)
  double mass_kg = 5.0;                 // dropped mass; (0, 1e4]
  std::vector<double> heights_m{0.30};  // drop heights (tyre's lowest point at release); each (0, 5]
  int repeats = 1;                      // clips per height; 1..100
  uint64_t seed = 1;                    // master seed: noise, texture, repeat-to-repeat variation
  double height_jitter_m = 0.001;       // repeat-to-repeat release height spread (uniform +-); [0, 0.05]
  double drift_mps = 0.01;              // horizontal hub speed (decoration); [-1, 1]
  double spin_radps = 1.5;              // wheel rotation rate, counter-clockwise on screen; [-100, 100]
  double gravity_mps2 = analysis::kStandardGravityMps2;  // local gravity; [9.7, 9.9]
  // Specimen.
  std::string specimen = "synthetic-wheel";  // manifest's specimen column
  double free_radius_m = 0.20;               // tyre outer radius; [0.02, 1]
  double rim_radius_m = 0.0;                 // 0 = free radius - 2 x section radius (or 0.55 x free)
  double tread_width_m = 0.0;                // cylinder tread width for the volumetric law; 0 = none
  double section_radius_m = 0.045;           // torus cross-section radius (wins); 0 = none
  std::string marker = "quadrant";           // "quadrant" or "dot"
  double marker_diameter_m = 0.0;            // 0 = 0.030 (quadrant) or 0.018 (dot)
  // Camera.
  std::string image_size = "800x640";  // width x height [px]
  double focal_px = 1200.0;            // focal length [px]; (10, 1e5)
  double camera_distance_m = 1.2;      // camera to drop plane along the axis [m]; sets the scale
  std::optional<double> cx_px, cy_px;  // principal point; default image centre + (3.2, -2.1) px
  double k1 = -0.07, k2 = 0.02, p1 = 4e-4, p2 = -3e-4, k3 = 0.0;  // lens distortion (OpenCV)
  double pitch_deg = 2.0, roll_deg = 1.5, yaw_deg = 0.8;          // mounting errors [deg]
  double floor_margin_px = 40.0;  // the floor line sits this far above the bottom edge [px]
  // Sensor.
  double fps = 2000.0;               // capture rate [frames/s]; (0, 1e6]
  double exposure_s = 2e-4;          // exposure time [s]; (0, 1/fps]
  int subframes = 4;                 // renderings averaged per frame (motion blur); 1..64
  double read_noise_grey = 2.0;      // read noise s.d. [grey levels]
  double electrons_per_grey = 16.0;  // shot-noise gain [e-/grey level]; 0 = none
  double vignetting = 0.2;           // brightness lost at the image corners; [0, 0.9]
  double flicker = 0.02;             // lighting flicker amplitude (100 Hz); [0, 0.5]
  double psf_sigma_px = 0.5;         // lens blur s.d. [px]; [0, 5]
  bool clean = false;                // no noise, no motion blur, no lens blur, no flicker,
                                     // no vignetting, lossless output
  // Output.
  std::string format = "auto";               // mjpg | ffv1 | h264 | png | auto (mjpg; png when clean)
  int jpeg_quality = 90;                     // MJPG quality; 1..100
  double container_fps = 0.0;                // rate stored in the container; 0 = the capture rate
  double duration_s = 0.0;                   // clip length [s]; 0 = through 3 complete bounces (<= 3 s)
  double pre_release_s = 0.01;               // clip start before release [s]; [0, 1]
  bool calibration = true;                   // write calib/ checkerboard images
  std::string board = "9x6";                 // checkerboard inner corners, columns x rows
  double square_m = 0.05;                    // checkerboard square [m]
  int lens_views = 10;                       // tilted checkerboard views; 1..12
  std::optional<uint64_t> calibration_seed;  // the checkerboard images' noise seed; unset = derived
                                             // from `seed` (CalibrationNoiseSeed)
  int threads = 2;                           // clips rendered at once; 1..64 (output is the same)
  int first_frames = 0;                      // render only the first N frames of each clip (quick
                                             // checks); 0 = all. Impacts in the truth stay those of
                                             // the full clip.
  // Occluder: a card crossing the marker (synth/render.h, Occluder), for known-answer partly
  // hidden frames.
  std::string occluder;                // "FIRST:LAST": frames of each clip the card is drawn on;
                                       // "" = no card
  std::string occluder_cover = "0:1";  // "FROM:TO": fraction of the marker covered at FIRST and
                                       // at LAST (linear in between), each [0, 1]
  double occluder_angle_deg = 0.0;     // direction the card's edge moves in the image [deg]:
                                       // 0 right (card from the left), 90 down
  double occluder_grey = 20.0;         // card radiance [grey levels]; [0, 300]
  // The marker's plane (issue 15). The wheel, whose hub face carries the marker, is drawn in the
  // plane z_m = marker_offset_m, parallel to the drop plane (toward the camera positive) [m];
  // [-0.5, 0.5] and below the camera distance. The calibration boards stay in the drop plane, so
  // a rig made from them maps the marker as if it were there. The truth keeps its meaning: the
  // hub's (x_m, y_m), heights above the floor. Recorded only when not 0.
  double marker_offset_m = 0.0;
};

// A message naming the first bad option, its value and its valid range, or nothing.
std::optional<std::string> ValidateRenderOptions(const RenderOptions& options);

// The default parameters of each law for the default wheel (5 kg, free radius 0.2 m): a
// pneumatic-tyre-like contact of ~25 mm deflection and COR ~0.7 from 0.3 m. "name=value" pairs.
// Throws std::invalid_argument on an unknown law id.
std::vector<std::string> RenderLawDefaults(const std::string& law);

// Law parameters in ParameterNames(law) order: the law's defaults (RenderLawDefaults)
// overridden by "name=value" pairs. Throws std::invalid_argument naming a bad pair and the
// valid names.
std::vector<double> LawParameters(analysis::LawId law, const std::vector<std::string>& pairs);

// Everything a run derives from its options.
struct RenderPlan {
  analysis::LawId law = analysis::LawId::kKelvinVoigt;
  std::vector<double> law_params;  // ParameterNames(law) order
  analysis::TreadGeometry tread;
  CameraSetup camera_setup;  // aimed at the middle of the plane view's board, the floor line
                             // floor_margin_px above the bottom edge
  WheelLook wheel;           // rim radius and marker diameter with their defaults resolved
  ExposureSettings exposure;
  CheckerboardSpec board;
  media::VideoFormat format = media::VideoFormat::kMjpgAvi;  // "auto" resolved
  bool add_noise = true;                                     // false when clean
  Occluder occluder;                                         // inactive without --occluder
};

// The checkerboard images' noise seed: calibration_seed, or by default seed ^ 0xCA11B8 (as before
// the option existed, so that earlier sets render the same), so that repeated rigs can be rendered
// with one scene and different noise.
uint64_t CalibrationNoiseSeed(const RenderOptions& options);

// The plan of valid options. Throws std::invalid_argument on a bad law, parameter, marker or
// format; the sizes are assumed valid (ValidateRenderOptions first).
RenderPlan MakePlan(const RenderOptions& options);

// One clip: its scenario and frame count.
struct ClipPlan {
  analysis::DropScenario scenario;   // start_time_s is the release on the clip clock; end_time_s
                                     // the last frame's end of exposure
  int frames = 0;                    // of the whole clip (before first_frames)
  double release_drop_height_m = 0;  // nominal height + jitter
  uint64_t noise_seed = 0;           // the clip's own generator
};

// Plans clip number `clip_index` (0-based over heights, then repeats) of nominal height
// `height_m`: the release height, start position and spin from the options' seed and the index;
// the release time (pre_release_s after frame 0, or before frame 0 when the marker only enters
// `renderer`'s view in flight; the fall is searched in 0.5 ms steps of free fall,
// y = y0 - g t^2 / 2); the length (duration_s, or 20 ms after the third complete bounce levels
// out, 50 ms after the last when fewer, 1 s after release when none; at most 3 s after
// release). Throws
// std::invalid_argument when the marker never comes into view during the fall.
ClipPlan PlanClip(const RenderOptions& options, const RenderPlan& plan, const SceneRenderer& renderer, double height_m,
                  int clip_index);

// "drop_h<height in mm, 3 digits at least>mm_r<repeat>", e.g. "drop_h150mm_r2".
std::string ClipName(double height_m, int repeat);

// A number as the records write it (10 significant digits, shortest form).
std::string FormatRecordNumber(double value);

// The effective options of a run, "name" (the field name) and value text, in a fixed order:
// law parameters with their defaults ("param.<name>"), resolved rim radius, marker diameter,
// principal point, exposure (after clean), format and container rate; calibration_seed only when
// set. out_dir and threads are not recorded (they do not change what is drawn).
std::vector<std::pair<std::string, std::string>> EffectiveOptions(const RenderOptions& options, const RenderPlan& plan);

// The options a run recorded (EffectiveOptions), back as a struct, so that a clip set can be
// re-rendered exactly. Throws std::invalid_argument naming an unknown option or a value that
// does not parse.
RenderOptions RenderOptionsFromRecord(const std::vector<std::pair<std::string, std::string>>& record);

}  // namespace dropfit::synth
