#pragma once
// Test planning by simulation (`dropfit plan`, docs/methods.md §22): which frame rate, image
// scale, exposure and repeats a drop test needs before the camera is booked.
//
// For every candidate setting (each frame rate offered, with the largest image size at that
// rate, at each image scale) and every drop height:
//   1. the drop is simulated by the forward model (analysis/forward_model.h) with the planned
//      contact law, from release to just before the second contact;
//   2. the hub track the camera would deliver is sampled at the frame rate with a random
//      sub-frame phase: heights at mid-exposure plus white noise of the tracker's measured centre
//      precision (plan/precision_table.h) at the marker's size in pixels, the motion blur of that
//      sample (|vertical speed| x exposure / scale) and the sensor noise, times the scale;
//      frames the tracker would lose (its found fraction) and frames where the marker is out of
//      view are left empty;
//   3. the real kinematics (analysis::AnalyzeKinematics) and the planned law's per-clip fit
//      (analysis::FitLaw), with the settings `dropfit run` uses (pipeline::KinematicsOptionsFor,
//      pipeline::LawFitOptionsFor; the rig knows the floor, so the onset height is the free
//      radius), measure it;
//   4. steps 2-3 are repeated on `realisations` noise realisations; the standard deviation of
//      each figure over them is the expected standard uncertainty of one clip; for r repeats the
//      mean's is that over sqrt(r) (independent clips; repeat-to-repeat variation of the specimen
//      itself is not modelled).
// Figures: the first bounce's COR (law-free, from the flight parabolas), contact duration and
// maximum deflection (from the law fit), the law's stiffness (its first parameter) and damping
// (its last parameter).
// The cheapest setting is the lowest frame rate, then the fewest repeats (then the coarser scale)
// whose every figure at every height meets its target.

#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "analysis/constants.h"
#include "analysis/contact_law.h"
#include "synth/camera.h"
#include "synth/render.h"

namespace dropfit::plan {

// One frame rate a camera offers, with the largest image at that rate.
struct RateOffer {
  double fps = 0.0;  // (0, 1e6] frames/s
  int width_px = 0;  // [16, 8192]
  int height_px = 0;
};
// "FPS:WIDTHxHEIGHT" (e.g. "2000:1280x800") or "FPS" (the sensor's full size). Throws
// std::invalid_argument naming the text.
RateOffer ParseRateOffer(const std::string& text, int sensor_width_px, int sensor_height_px);

// Every input of a plan: default, unit and valid range. SI units throughout.
struct PlanOptions {
  // Specimen.
  double mass_kg = 10.0;        // dropped mass; (0, 1e4]
  double free_radius_m = 0.25;  // unloaded radius, hub to tread; [0.02, 1]
  // Rough stiffness: a law with parameters ("name=value", contract names, damping may be left
  // out: then set by expected_cor), or, when `law` is empty, one static point read as Hertz
  // (n = 1.5): k = static_force_n / static_deflection_m^1.5.
  std::string law;                     // "" | kelvin-voigt | hunt-crossley | hertz | bilinear | volumetric
  std::vector<std::string> params;     // "name=value"
  double static_force_n = 500.0;       // (0, 1e7]
  double static_deflection_m = 0.004;  // (0, 0.5]
  // Expected COR at one impact speed: sets the damping when it is not given (the exact relation
  // of the fits' starting values, analysis/fit_initial_guess.h).
  double expected_cor = 0.6;                // (0, 1)
  double cor_speed_mps = 2.0;               // (0, 20]
  std::vector<double> heights_m{0.1, 0.3};  // drop heights (tread above the floor at release); each (0, 5]
  // Alternatively the impact speeds of interest [m/s], each (0, 10]: heights v^2 / (2 g).
  std::vector<double> impact_speeds_mps;
  // Camera.
  int sensor_width_px = 1280, sensor_height_px = 1024;  // [16, 8192]
  // Rates offered, "FPS:WIDTHxHEIGHT" or "FPS" (full sensor).
  std::vector<std::string> rates{"500:1280x1024", "1000:1280x1024", "2000:1280x512", "4000:1280x256", "8000:640x128"};
  // Image scale in the drop plane [m/px], one or more; empty: from fov_width_m.
  std::vector<double> scales_m_per_px;
  double fov_width_m = 1.28;          // scene width seen by the full sensor width [m]; (0, 100]
  double shortest_exposure_s = 1e-4;  // the exposure used (at most 1/fps); (0, 1]
  std::string marker = "quadrant";    // quadrant | dot
  double marker_diameter_m = 0.030;   // [0.004, 0.2]
  double read_noise_grey = 2.0;       // sensor noise s.d. [grey levels]; [0, 50]
  double contrast_grey = 208.0;       // marker white minus black [grey levels]; [5, 255]
  double floor_margin_px = 20.0;      // floor line above the image bottom [px]; [0, 1000]
  // Targets: standard uncertainty wanted for one height's mean over the repeats.
  double target_cor = 0.01;         // absolute; (0, 1]
  double target_duration = 0.02;    // relative to the contact duration; (0, 1]
  double target_deflection = 0.02;  // relative to the maximum deflection; (0, 1]
  double target_stiffness = 0.05;   // relative to the stiffness parameter; (0, 1]
  int max_repeats = 10;             // repeats proposed at most per height; [1, 100]
  // Simulation.
  int realisations = 24;  // noise realisations per setting and height; [4, 1000]
  int threads = 2;        // [1, 64]
  uint64_t seed = 1;
  double gravity_mps2 = analysis::kStandardGravityMps2;  // [9.7, 9.9]
};
// A message naming the first bad option (by its `dropfit plan` spelling), its value and range.
std::optional<std::string> ValidatePlanOptions(const PlanOptions& options);

// The specimen as simulated.
struct PlannedSpecimen {
  analysis::LawId law = analysis::LawId::kHertz;
  std::vector<double> params;  // ParameterNames(law) order
  std::string how;             // how the parameters were obtained (one sentence)
};
// Throws std::invalid_argument on a bad law, parameter or missing parameter.
PlannedSpecimen MakeSpecimen(const PlanOptions& options);
// The heights planned: heights_m, or the impact speeds' v^2 / (2 g).
std::vector<double> PlannedHeights(const PlanOptions& options);

// Hertz contact time (docs/methods.md §4): t_c = C_1.5 delta_max / v with
// delta_max = (5 m v^2 / (4 k))^(2/5), C_1.5 = 2.943275184 (no gravity, no damping).
double HertzContactTime(double mass_kg, double k_n_per_m15, double impact_speed_mps);
// Free fall from rest through h: impact speed sqrt(2 g h) and time sqrt(2 h / g).
double ImpactSpeed(double drop_height_m, double gravity_mps2);
double FallTime(double drop_height_m, double gravity_mps2);
// Motion blur in pixels: speed x exposure / scale.
double BlurPx(double speed_mps, double exposure_s, double scale_m_per_px);

// A figure's spread over the realisations.
struct Spread {
  double truth = 0.0;  // the simulated value
  double mean = 0.0;   // over the realisations measured
  double sd = 0.0;     // their standard deviation: one clip's standard uncertainty
};

// One candidate setting at one height.
struct HeightResult {
  double height_m = 0.0;
  double impact_speed_mps = 0.0;
  double frames_per_contact = 0.0;  // true contact duration x fps
  double blur_px = 0.0;             // at impact
  bool release_in_view = false;     // the marker is in view at release
  bool rebound_in_view = false;     // ... and at the rebound's apex
  double visible_fall_m = 0.0;      // fall of the hub seen before contact
  int measured = 0;                 // realisations measured (kinematics and fit converged)
  std::string failure;              // why some realisations failed (first reason), or ""
  Spread cor, duration_s, deflection_m, stiffness, damping;
  int repeats_needed = 0;         // fewest repeats meeting every target; 0: none up to max
  double track_noise_sd_m = 0.0;  // mean position noise the kinematics saw in the simulated tracks [m]
};

struct SettingResult {
  RateOffer rate;
  double scale_m_per_px = 0.0;
  double exposure_s = 0.0;
  double marker_px = 0.0;      // marker diameter in pixels
  double view_height_m = 0.0;  // above the floor line
  double view_width_m = 0.0;
  bool wheel_fits = false;  // the tyre fits across the image
  std::vector<HeightResult> heights;
  int repeats = 0;                   // fewest repeats meeting every target at every height; 0: none
  std::vector<std::string> missing;  // what keeps it from the targets (sentences)
};

struct PlanResult {
  PlannedSpecimen specimen;
  std::vector<double> heights_m;
  std::vector<SettingResult> settings;  // by rate, then scale
  std::optional<size_t> chosen;         // index into settings
  std::string verdict;                  // one sentence: the choice or what is missing
  double seconds = 0.0;
};

// done, total
using PlanProgress = std::function<void(int, int)>;

// Throws std::invalid_argument with ValidatePlanOptions' message or MakeSpecimen's.
PlanResult MakePlan(const PlanOptions& options, const PlanProgress& progress = {});

// The camera scale of a setting: scales_m_per_px, or fov_width_m / sensor width.
std::vector<double> PlannedScales(const PlanOptions& options);

// The planned track of one realisation (for the check against rendered clips and tests):
// times of frames 0..frames-1 are frame / fps; the release at release_time_s.
struct PlannedClip {
  double release_time_s = 0.0;
  int frames = 0;
};
// The clip span of a drop from `height_m` at a setting: the clip starts 10 ms before release or
// when the marker comes into view, and ends 2 frames before the second contact (at most 3 s).
// `phase` in [0, 1) shifts the release by that fraction of a frame.
PlannedClip PlanClipSpan(const PlanOptions& options, const PlannedSpecimen& specimen, const RateOffer& rate,
                         double scale_m_per_px, double height_m, double phase);

// The camera of a setting, as the renderer would set it up for a check (`--render`, the bench):
// no lens distortion, level mounting, scale at the drop plane scale_m_per_px (focal 1000 px), hub
// (x = 0) on the image's middle column, the floor line floor_margin_px above the bottom edge.
synth::CameraSetup SettingCamera(const PlanOptions& options, const RateOffer& rate, double scale_m_per_px);

// The figures of one measured clip, as the plan reads them.
struct ClipFigures {
  bool ok = false;
  std::string failure;
  double cor = 0, duration_s = 0, deflection_m = 0, stiffness = 0, damping = 0;
  double noise_sd_m = 0;  // the kinematics' position noise estimate (analysis/impacts.h)
};

// The mean and the sample standard deviation of one figure over the clips measured (ok); NaN
// where there are too few (no clip; one clip for the sd); no truth (NaN).
Spread SpreadOf(const std::vector<ClipFigures>& clips, double ClipFigures::*field);

// The terminal table.
std::string FormatPlanTable(const PlanOptions& options, const PlanResult& result);
// The self-contained HTML page (inline SVG, no external assets).
std::string PlanHtml(const PlanOptions& options, const PlanResult& result);

}  // namespace dropfit::plan
