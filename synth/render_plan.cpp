#include "synth/render_plan.h"

#include <cmath>
#include <exception>
#include <functional>
#include <iomanip>
#include <map>
#include <numbers>
#include <random>
#include <sstream>
#include <stdexcept>

#include "analysis/plausible_ranges.h"
#include "calib/rig.h"

namespace dropfit::synth {

namespace {

std::optional<std::pair<int, int>> ParsePair(const std::string& text) {
  const size_t x = text.find('x');
  if (x == std::string::npos) return std::nullopt;
  try {
    size_t used_a = 0, used_b = 0;
    const int a = std::stoi(text.substr(0, x), &used_a);
    const int b = std::stoi(text.substr(x + 1), &used_b);
    if (used_a != x || used_b != text.size() - x - 1) return std::nullopt;
    return std::pair{a, b};
  } catch (const std::exception&) {
    return std::nullopt;
  }
}

// "A:B" as two numbers; nothing when malformed.
std::optional<std::pair<double, double>> ParseColonPair(const std::string& text) {
  const size_t colon = text.find(':');
  if (colon == std::string::npos) return std::nullopt;
  try {
    size_t used_a = 0, used_b = 0;
    const double a = std::stod(text.substr(0, colon), &used_a);
    const double b = std::stod(text.substr(colon + 1), &used_b);
    if (used_a != colon || used_b != text.size() - colon - 1 || !std::isfinite(a) || !std::isfinite(b)) {
      return std::nullopt;
    }
    return std::pair{a, b};
  } catch (const std::exception&) {
    return std::nullopt;
  }
}

// The card of --occluder, --occluder-cover, --occluder-angle, --occluder-grey (inactive without
// --occluder). Throws std::invalid_argument naming the malformed option.
Occluder OccluderOf(const RenderOptions& o) {
  Occluder card;
  if (o.occluder.empty()) return card;
  const auto frames = ParseColonPair(o.occluder);
  if (!frames || frames->first != std::floor(frames->first) || frames->second != std::floor(frames->second) ||
      frames->first < 0 || frames->second < frames->first || frames->second > 1e7) {
    throw std::invalid_argument("--occluder '" + o.occluder +
                                "' is not FIRST:LAST, two frame numbers with 0 <= FIRST <= LAST <= 1e7");
  }
  const auto cover = ParseColonPair(o.occluder_cover);
  if (!cover || !(cover->first >= 0 && cover->first <= 1 && cover->second >= 0 && cover->second <= 1)) {
    throw std::invalid_argument("--occluder-cover '" + o.occluder_cover +
                                "' is not FROM:TO, two fractions of the marker in [0, 1]");
  }
  card.first_frame = static_cast<int>(frames->first);
  card.last_frame = static_cast<int>(frames->second);
  card.cover_from = cover->first;
  card.cover_to = cover->second;
  card.angle_deg = o.occluder_angle_deg;
  card.grey = o.occluder_grey;
  return card;
}

// The records' number format, short.
std::string Fmt(double v) { return FormatRecordNumber(v); }

std::string OutOfRange(const char* option, double value, const char* range, const char* unit) {
  return std::string("--") + option + " " + Fmt(value) + (unit[0] ? " " : "") + unit + " is outside " + range;
}

}  // namespace

std::string FormatRecordNumber(double v) {
  std::ostringstream s;
  s << std::setprecision(10) << v;
  return s.str();
}

std::vector<double> LawParameters(analysis::LawId law, const std::vector<std::string>& pairs) {
  const std::vector<std::string>& names = analysis::ParameterNames(law);
  std::map<std::string, double> values;
  for (const std::string& p : RenderLawDefaults(analysis::ToString(law))) {
    values[p.substr(0, p.find('='))] = std::stod(p.substr(p.find('=') + 1));
  }
  std::string valid;
  for (const std::string& n : names) {
    if (!valid.empty()) valid += ", ";
    valid += n;
  }
  for (const std::string& p : pairs) {
    const size_t eq = p.find('=');
    const std::string name = p.substr(0, eq);
    if (eq == std::string::npos || !values.count(name)) {
      throw std::invalid_argument("--param '" + p + "': expected name=value with a name of law " +
                                  analysis::ToString(law) + " (" + valid + ")");
    }
    try {
      size_t used = 0;
      const double v = std::stod(p.substr(eq + 1), &used);
      if (used != p.size() - eq - 1 || !std::isfinite(v)) throw std::invalid_argument("bad number");
      values[name] = v;
    } catch (const std::exception&) {
      throw std::invalid_argument("--param '" + p + "': the value is not a number");
    }
  }
  std::vector<double> out;
  for (const std::string& n : names) out.push_back(values.at(n));
  return out;
}

RenderPlan MakePlan(const RenderOptions& o) {
  RenderPlan plan;
  plan.law = analysis::LawIdFromString(o.law);
  plan.law_params = LawParameters(plan.law, o.params);
  plan.tread = analysis::MakeTreadGeometry(o.free_radius_m, o.tread_width_m, o.section_radius_m);
  const auto size = ParsePair(o.image_size);
  const auto board = ParsePair(o.board);
  CameraSetup& c = plan.camera_setup;
  c.intrinsics.image_size = {size->first, size->second};
  c.intrinsics.fx_px = c.intrinsics.fy_px = o.focal_px;
  c.intrinsics.cx_px = o.cx_px.value_or(size->first / 2.0 - 0.5 + 3.2);
  c.intrinsics.cy_px = o.cy_px.value_or(size->second / 2.0 - 0.5 - 2.1);
  c.intrinsics.k1 = o.k1;
  c.intrinsics.k2 = o.k2;
  c.intrinsics.p1 = o.p1;
  c.intrinsics.p2 = o.p2;
  c.intrinsics.k3 = o.k3;
  c.distance_m = o.camera_distance_m;
  c.pitch_deg = o.pitch_deg;
  c.roll_deg = o.roll_deg;
  c.yaw_deg = o.yaw_deg;
  plan.board = {board->first, board->second, o.square_m};
  // Aim at the middle of the plane view's board (x_m = 0 is its leftmost inner-corner column),
  // high enough that the floor line sits floor_margin_px above the bottom edge.
  c.aim_x_m = (plan.board.inner_cols - 1) * plan.board.square_m / 2;
  c.aim_y_m = (size->second / 2.0 - o.floor_margin_px) * o.camera_distance_m / o.focal_px;
  plan.wheel.free_radius_m = o.free_radius_m;
  plan.wheel.rim_radius_m = o.rim_radius_m > 0       ? o.rim_radius_m
                            : o.section_radius_m > 0 ? o.free_radius_m - 2 * o.section_radius_m
                                                     : 0.55 * o.free_radius_m;
  plan.wheel.marker = MarkerShapeFromString(o.marker);
  plan.wheel.marker_offset_m = o.marker_offset_m;
  plan.wheel.marker_diameter_m = o.marker_diameter_m > 0                  ? o.marker_diameter_m
                                 : plan.wheel.marker == MarkerShape::kDot ? 0.018
                                                                          : 0.030;
  ExposureSettings& e = plan.exposure;
  e.exposure_s = o.exposure_s;
  e.subframes = o.subframes;
  e.read_noise_grey = o.read_noise_grey;
  e.electrons_per_grey = o.electrons_per_grey;
  e.vignetting_fraction = o.vignetting;
  e.flicker_fraction = o.flicker;
  e.psf_sigma_px = o.psf_sigma_px;
  if (o.clean) {
    e = WithoutImperfections(e);
    plan.add_noise = false;
  }
  plan.format = o.format == "auto" ? (o.clean ? media::VideoFormat::kPngFrames : media::VideoFormat::kMjpgAvi)
                                   : media::VideoFormatFromString(o.format);
  plan.occluder = OccluderOf(o);
  return plan;
}

uint64_t CalibrationNoiseSeed(const RenderOptions& options) {
  return options.calibration_seed.value_or(options.seed ^ 0xCA11B8ull);
}

std::vector<std::pair<std::string, std::string>> EffectiveOptions(const RenderOptions& o, const RenderPlan& plan) {
  std::vector<std::pair<std::string, std::string>> out;
  auto add = [&out](const std::string& k, const std::string& v) { out.emplace_back(k, v); };
  add("law", o.law);
  for (size_t i = 0; i < plan.law_params.size(); ++i) {
    add("param." + analysis::ParameterNames(plan.law)[i], Fmt(plan.law_params[i]));
  }
  add("mass_kg", Fmt(o.mass_kg));
  std::string heights;
  for (double h : o.heights_m) {
    if (!heights.empty()) heights += ',';
    heights += Fmt(h);
  }
  add("heights_m", heights);
  add("repeats", std::to_string(o.repeats));
  add("seed", std::to_string(o.seed));
  add("height_jitter_m", Fmt(o.height_jitter_m));
  add("drift_mps", Fmt(o.drift_mps));
  add("spin_radps", Fmt(o.spin_radps));
  add("gravity_mps2", Fmt(o.gravity_mps2));
  add("specimen", o.specimen);
  add("free_radius_m", Fmt(o.free_radius_m));
  add("rim_radius_m", Fmt(plan.wheel.rim_radius_m));
  add("tread_width_m", Fmt(o.tread_width_m));
  add("section_radius_m", Fmt(o.section_radius_m));
  add("marker", o.marker);
  add("marker_diameter_m", Fmt(plan.wheel.marker_diameter_m));
  add("image_size", o.image_size);
  add("focal_px", Fmt(o.focal_px));
  add("camera_distance_m", Fmt(o.camera_distance_m));
  add("cx_px", Fmt(plan.camera_setup.intrinsics.cx_px));
  add("cy_px", Fmt(plan.camera_setup.intrinsics.cy_px));
  add("k1", Fmt(o.k1));
  add("k2", Fmt(o.k2));
  add("p1", Fmt(o.p1));
  add("p2", Fmt(o.p2));
  add("k3", Fmt(o.k3));
  add("pitch_deg", Fmt(o.pitch_deg));
  add("roll_deg", Fmt(o.roll_deg));
  add("yaw_deg", Fmt(o.yaw_deg));
  add("floor_margin_px", Fmt(o.floor_margin_px));
  add("fps", Fmt(o.fps));
  add("exposure_s", Fmt(plan.exposure.exposure_s));
  add("subframes", std::to_string(plan.exposure.subframes));
  add("read_noise_grey", Fmt(plan.exposure.read_noise_grey));
  add("electrons_per_grey", Fmt(plan.exposure.electrons_per_grey));
  add("vignetting", Fmt(plan.exposure.vignetting_fraction));
  add("flicker", Fmt(plan.exposure.flicker_fraction));
  add("psf_sigma_px", Fmt(plan.exposure.psf_sigma_px));
  add("clean", o.clean ? "true" : "false");
  add("format", media::ToString(plan.format));
  add("jpeg_quality", std::to_string(o.jpeg_quality));
  add("container_fps", Fmt(o.container_fps > 0 ? o.container_fps : o.fps));
  add("duration_s", Fmt(o.duration_s));
  add("pre_release_s", Fmt(o.pre_release_s));
  add("calibration", o.calibration ? "true" : "false");
  add("board", o.board);
  add("square_m", Fmt(o.square_m));
  add("lens_views", std::to_string(o.lens_views));
  // Only when given, so that the files of a set rendered without it stay as they were.
  if (o.calibration_seed) add("calibration_seed", std::to_string(*o.calibration_seed));
  add("first_frames", std::to_string(o.first_frames));
  if (plan.occluder.active()) {  // recorded only when a card is drawn
    add("occluder", o.occluder);
    add("occluder_cover", o.occluder_cover);
    add("occluder_angle_deg", Fmt(o.occluder_angle_deg));
    add("occluder_grey", Fmt(o.occluder_grey));
  }
  // Only when not 0, so that the files of a set rendered without it stay as they were.
  if (o.marker_offset_m != 0.0) add("marker_offset_m", Fmt(o.marker_offset_m));
  return out;
}

std::string ClipName(double height_m, int repeat) {
  std::ostringstream s;
  s << "drop_h" << std::setw(3) << std::setfill('0') << std::lround(height_m * 1000) << "mm_r" << repeat;
  return s.str();
}

namespace {

// Seconds after release at which the marker of the wheel falling freely (y = y0 - g t^2 / 2) is
// first wholly in view, searched in 0.5 ms steps until the fall would reach the floor; -1 when
// never.
double SecondsUntilMarkerInView(const analysis::DropScenario& s, double gravity_mps2, const SceneRenderer& renderer) {
  const double fall_s = std::sqrt(2 * s.start_height_m / gravity_mps2);
  for (double tau = 0; tau < fall_s; tau += 5e-4) {
    const WheelPose pose{s.start_x_m + s.drift_speed_mps * tau, s.start_height_m - 0.5 * gravity_mps2 * tau * tau,
                         s.start_spin_angle_rad + s.spin_rate_radps * tau};
    if (renderer.MarkerInView(pose)) return tau;
  }
  return -1;
}

// End of the clip on the clip clock [s]: duration_s, or through three complete bounces (see
// PlanClip), simulated on a copy of the scenario.
double ClipEndSeconds(analysis::DropScenario s, const RenderOptions& o) {
  if (o.duration_s > 0) return o.duration_s;
  s.end_time_s = s.start_time_s + 4.0;
  const analysis::Trajectory trial = analysis::SimulateDrop(s);
  std::vector<analysis::ImpactTruth> complete;
  for (const auto& i : trial.impacts()) {
    if (i.complete && std::isfinite(i.t_level_s)) complete.push_back(i);
  }
  double end_s;
  if (complete.size() >= 3) {
    end_s = complete[2].t_level_s + 0.02;
  } else if (!complete.empty()) {
    end_s = complete.back().t_level_s + 0.05;
  } else {
    end_s = s.start_time_s + 1.0;
  }
  return std::min(end_s, s.start_time_s + 3.0);
}

}  // namespace

ClipPlan PlanClip(const RenderOptions& o, const RenderPlan& plan, const SceneRenderer& renderer, double height_m,
                  int clip_index) {
  std::seed_seq seq{static_cast<uint32_t>(o.seed), static_cast<uint32_t>(o.seed >> 32),
                    static_cast<uint32_t>(clip_index), 0x5EEDu};
  std::mt19937_64 rng(seq);
  std::uniform_real_distribution<double> unit(-1.0, 1.0);
  ClipPlan clip;
  clip.release_drop_height_m = height_m + o.height_jitter_m * unit(rng);
  analysis::DropScenario& s = clip.scenario;
  s.setup.law = plan.law;
  s.setup.tread = plan.tread;
  s.setup.mass_kg = o.mass_kg;
  s.setup.gravity_mps2 = o.gravity_mps2;
  s.law_params = plan.law_params;
  s.onset_height_m = o.free_radius_m;
  s.start_height_m = clip.release_drop_height_m + o.free_radius_m;
  s.start_velocity_mps = 0;
  s.start_x_m = plan.camera_setup.aim_x_m + 0.003 * unit(rng);
  s.drift_speed_mps = o.drift_mps;
  s.start_spin_angle_rad = std::numbers::pi * (1 + unit(rng));
  s.spin_rate_radps = o.spin_radps;
  clip.noise_seed = rng();
  // Release time on the clip clock: pre_release_s after frame 0, or before frame 0 when the
  // marker only enters the view in flight.
  const double in_view_s = SecondsUntilMarkerInView(s, o.gravity_mps2, renderer);
  if (in_view_s < 0) {
    throw std::invalid_argument("the marker never comes into view during the fall from " + Fmt(height_m) +
                                " m; check --image-size, --camera-distance and --heights");
  }
  s.start_time_s = in_view_s == 0 ? o.pre_release_s : -(in_view_s + 0.002);
  const double end_s = ClipEndSeconds(s, o);
  clip.frames = static_cast<int>(std::floor(end_s * o.fps + 1e-9)) + 1;
  s.end_time_s = (clip.frames - 1) / o.fps + plan.exposure.exposure_s / 2;
  if (!(s.end_time_s > s.start_time_s)) s.end_time_s = s.start_time_s + 1e-3;
  return clip;
}

std::vector<std::string> RenderLawDefaults(const std::string& law) {
  switch (analysis::LawIdFromString(law)) {
    case analysis::LawId::kKelvinVoigt:
      return {"k_n_per_m=4e4", "c_ns_per_m=100"};
    case analysis::LawId::kHuntCrossley:
      return {"k=2.5e5", "n=1.5", "alpha_s_per_m=0.2"};
    case analysis::LawId::kHertz:
      return {"k=2.5e5", "n=1.5", "alpha_s_per_m=0.2"};
    case analysis::LawId::kBilinear:
      return {"k1_n_per_m=2.5e4", "k2_n_per_m=8e4", "knee_m=0.015", "c_ns_per_m=90"};
    case analysis::LawId::kVolumetric:
      return {"kv_n_per_m3=5.4e6", "a_s_per_m=0.2"};
    case analysis::LawId::kBottoming:
      return {"k_n_per_m=2.5e4", "k3_n_per_m3=5e9", "knee_m=0.015", "a_s_per_m=0.3"};
  }
  return {};
}

std::optional<std::string> ValidateRenderOptions(const RenderOptions& o) {
  if (o.out_dir.empty()) return "--output: an output folder is required";
  try {
    const analysis::LawId law = analysis::LawIdFromString(o.law);
    LawParameters(law, o.params);
  } catch (const std::invalid_argument& e) {
    return std::string(e.what());
  }
  if (!(o.mass_kg > 0 && o.mass_kg <= 1e4)) return OutOfRange("mass", o.mass_kg, "(0, 1e4]", "kg");
  if (o.heights_m.empty()) return "--heights: give at least one drop height";
  for (double h : o.heights_m) {
    if (!(h >= analysis::kMinDropHeightM && h <= analysis::kMaxDropHeightM)) {
      return OutOfRange("heights", h, "[0.005, 5]", "m") + "; " + analysis::kMillimetresHint;
    }
  }
  if (o.repeats < 1 || o.repeats > 100) return OutOfRange("repeats", o.repeats, "1..100", "");
  if (!(o.height_jitter_m >= 0 && o.height_jitter_m <= 0.05)) {
    return OutOfRange("height-jitter", o.height_jitter_m, "[0, 0.05]", "m");
  }
  if (!(std::abs(o.drift_mps) <= 1)) return OutOfRange("drift", o.drift_mps, "[-1, 1]", "m/s");
  if (!(std::abs(o.spin_radps) <= 100)) return OutOfRange("spin", o.spin_radps, "[-100, 100]", "rad/s");
  if (!(o.gravity_mps2 >= 9.7 && o.gravity_mps2 <= 9.9))
    return OutOfRange("gravity", o.gravity_mps2, "[9.7, 9.9]", "m/s^2");
  if (o.specimen.find_first_of(",\"\n\r") != std::string::npos) {
    return "--specimen '" + o.specimen + "' must not contain commas, quotes or line breaks";
  }
  if (!(o.free_radius_m >= 0.02 && o.free_radius_m <= 1))
    return OutOfRange("free-radius", o.free_radius_m, "[0.02, 1]", "m");
  if (!(o.tread_width_m >= 0 && o.tread_width_m <= 1)) return OutOfRange("tread-width", o.tread_width_m, "[0, 1]", "m");
  if (!(o.section_radius_m >= 0 && o.section_radius_m < o.free_radius_m / 2)) {
    return OutOfRange("section-radius", o.section_radius_m, "[0, free radius / 2)", "m");
  }
  try {
    MarkerShapeFromString(o.marker);
    if (o.format != "auto") media::VideoFormatFromString(o.format);
  } catch (const std::invalid_argument& e) {
    return std::string(e.what()) + (o.format != "auto" ? ", auto" : "");
  }
  const auto size = ParsePair(o.image_size);
  if (!size) return "--image-size '" + o.image_size + "' is not WIDTHxHEIGHT (e.g. 800x640)";
  const auto board = ParsePair(o.board);
  if (!board) return "--board '" + o.board + "' is not COLUMNSxROWS of inner corners (e.g. 9x6)";
  if (board->first < 3 || board->second < 3) {
    return "--board '" + o.board + "' is out of range (at least 3x3 inner corners)";
  }
  if (!(o.square_m >= calib::kMinSquareM && o.square_m <= calib::kMaxSquareM)) {
    return OutOfRange("square", o.square_m, "[0.002, 0.3]", "m") + "; " + calib::kRigMillimetresHint;
  }
  if (!(o.focal_px > 10 && o.focal_px < 1e5)) return OutOfRange("focal", o.focal_px, "(10, 1e5)", "px");
  if (!(o.fps > 0 && o.fps <= 1e6)) return OutOfRange("fps", o.fps, "(0, 1e6]", "frames/s");
  if (o.jpeg_quality < 1 || o.jpeg_quality > 100) return OutOfRange("jpeg-quality", o.jpeg_quality, "1..100", "");
  if (!(o.container_fps >= 0 && o.container_fps <= 1e6)) {
    return OutOfRange("container-fps", o.container_fps, "0 (the capture rate) or (0, 1e6]", "frames/s");
  }
  if (!(o.duration_s >= 0 && o.duration_s <= 60))
    return OutOfRange("duration", o.duration_s, "0 (auto) or (0, 60]", "s");
  if (!(o.pre_release_s >= 0 && o.pre_release_s <= 1)) return OutOfRange("pre-release", o.pre_release_s, "[0, 1]", "s");
  if (o.lens_views < 1 || o.lens_views > 12) return OutOfRange("lens-views", o.lens_views, "1..12", "");
  if (o.first_frames < 0) return OutOfRange("first-frames", o.first_frames, "0 (all) or more", "");
  if (o.threads < 1 || o.threads > 64) return OutOfRange("threads", o.threads, "1..64", "");
  if (!(o.floor_margin_px >= 0 && o.floor_margin_px < size->second / 2.0)) {
    return OutOfRange("floor-margin", o.floor_margin_px, "[0, image height / 2)", "px");
  }
  if (!(o.marker_offset_m >= -0.5 && o.marker_offset_m <= 0.5 && o.marker_offset_m < 0.9 * o.camera_distance_m)) {
    return OutOfRange("marker-offset", o.marker_offset_m, "[-0.5, 0.5] and below 0.9 x the camera distance", "m");
  }
  RenderPlan plan;
  try {
    plan = MakePlan(o);
  } catch (const std::invalid_argument& e) {
    return std::string(e.what());
  }
  if (auto msg = ValidateCameraSetup(plan.camera_setup)) return "camera: " + *msg;
  if (auto msg = ValidateWheelLook(plan.wheel)) return "wheel: " + *msg;
  if (auto msg = ValidateExposure(plan.exposure, o.fps)) return "sensor: " + *msg;
  if (auto msg = ValidateCheckerboard(plan.board)) return "--board/--square: " + *msg;
  if (!std::isfinite(o.occluder_angle_deg)) return "--occluder-angle must be a finite number of degrees";
  if (!(o.occluder_grey >= 0 && o.occluder_grey <= 300))
    return OutOfRange("occluder-grey", o.occluder_grey, "[0, 300]", "grey levels");
  if (auto msg = ValidateOccluder(plan.occluder)) return "--occluder: " + *msg;
  if (const auto tread = analysis::Validate(plan.tread)) return "tread: " + *tread;
  return std::nullopt;
}

namespace {

// A recorded number. Throws std::invalid_argument naming the option and the text.
double RecordedNumber(const std::string& name, const std::string& text) {
  try {
    size_t used = 0;
    const double v = std::stod(text, &used);
    if (used != text.size()) throw std::invalid_argument(text);
    return v;
  } catch (const std::exception&) {
    throw std::invalid_argument("recorded option " + name + " = '" + text + "' is not a number");
  }
}

int RecordedInteger(const std::string& name, const std::string& text) {
  return static_cast<int>(std::lround(RecordedNumber(name, text)));
}

bool RecordedFlag(const std::string& text) { return text == "true"; }

using RecordSetter = std::function<void(const std::string& name, const std::string& value)>;

// One setter per recorded option (EffectiveOptions' names, law parameters aside), writing into `o`.
std::map<std::string, RecordSetter> RecordSetters(RenderOptions& o) {
  return {
      {"law", [&o](auto&, auto& v) { o.law = v; }},
      {"mass_kg", [&o](auto& n, auto& v) { o.mass_kg = RecordedNumber(n, v); }},
      {"heights_m",
       [&o](auto& n, auto& v) {
         o.heights_m.clear();
         std::stringstream list(v);
         for (std::string item; std::getline(list, item, ',');) o.heights_m.push_back(RecordedNumber(n, item));
       }},
      {"repeats", [&o](auto& n, auto& v) { o.repeats = RecordedInteger(n, v); }},
      {"seed", [&o](auto&, auto& v) { o.seed = std::stoull(v); }},
      {"height_jitter_m", [&o](auto& n, auto& v) { o.height_jitter_m = RecordedNumber(n, v); }},
      {"drift_mps", [&o](auto& n, auto& v) { o.drift_mps = RecordedNumber(n, v); }},
      {"spin_radps", [&o](auto& n, auto& v) { o.spin_radps = RecordedNumber(n, v); }},
      {"gravity_mps2", [&o](auto& n, auto& v) { o.gravity_mps2 = RecordedNumber(n, v); }},
      {"specimen", [&o](auto&, auto& v) { o.specimen = v; }},
      {"free_radius_m", [&o](auto& n, auto& v) { o.free_radius_m = RecordedNumber(n, v); }},
      {"rim_radius_m", [&o](auto& n, auto& v) { o.rim_radius_m = RecordedNumber(n, v); }},
      {"tread_width_m", [&o](auto& n, auto& v) { o.tread_width_m = RecordedNumber(n, v); }},
      {"section_radius_m", [&o](auto& n, auto& v) { o.section_radius_m = RecordedNumber(n, v); }},
      {"marker", [&o](auto&, auto& v) { o.marker = v; }},
      {"marker_diameter_m", [&o](auto& n, auto& v) { o.marker_diameter_m = RecordedNumber(n, v); }},
      {"image_size", [&o](auto&, auto& v) { o.image_size = v; }},
      {"focal_px", [&o](auto& n, auto& v) { o.focal_px = RecordedNumber(n, v); }},
      {"camera_distance_m", [&o](auto& n, auto& v) { o.camera_distance_m = RecordedNumber(n, v); }},
      {"cx_px", [&o](auto& n, auto& v) { o.cx_px = RecordedNumber(n, v); }},
      {"cy_px", [&o](auto& n, auto& v) { o.cy_px = RecordedNumber(n, v); }},
      {"k1", [&o](auto& n, auto& v) { o.k1 = RecordedNumber(n, v); }},
      {"k2", [&o](auto& n, auto& v) { o.k2 = RecordedNumber(n, v); }},
      {"p1", [&o](auto& n, auto& v) { o.p1 = RecordedNumber(n, v); }},
      {"p2", [&o](auto& n, auto& v) { o.p2 = RecordedNumber(n, v); }},
      {"k3", [&o](auto& n, auto& v) { o.k3 = RecordedNumber(n, v); }},
      {"pitch_deg", [&o](auto& n, auto& v) { o.pitch_deg = RecordedNumber(n, v); }},
      {"roll_deg", [&o](auto& n, auto& v) { o.roll_deg = RecordedNumber(n, v); }},
      {"yaw_deg", [&o](auto& n, auto& v) { o.yaw_deg = RecordedNumber(n, v); }},
      {"floor_margin_px", [&o](auto& n, auto& v) { o.floor_margin_px = RecordedNumber(n, v); }},
      {"fps", [&o](auto& n, auto& v) { o.fps = RecordedNumber(n, v); }},
      {"exposure_s", [&o](auto& n, auto& v) { o.exposure_s = RecordedNumber(n, v); }},
      {"subframes", [&o](auto& n, auto& v) { o.subframes = RecordedInteger(n, v); }},
      {"read_noise_grey", [&o](auto& n, auto& v) { o.read_noise_grey = RecordedNumber(n, v); }},
      {"electrons_per_grey", [&o](auto& n, auto& v) { o.electrons_per_grey = RecordedNumber(n, v); }},
      {"vignetting", [&o](auto& n, auto& v) { o.vignetting = RecordedNumber(n, v); }},
      {"flicker", [&o](auto& n, auto& v) { o.flicker = RecordedNumber(n, v); }},
      {"psf_sigma_px", [&o](auto& n, auto& v) { o.psf_sigma_px = RecordedNumber(n, v); }},
      {"clean", [&o](auto&, auto& v) { o.clean = RecordedFlag(v); }},
      {"format", [&o](auto&, auto& v) { o.format = v; }},
      {"jpeg_quality", [&o](auto& n, auto& v) { o.jpeg_quality = RecordedInteger(n, v); }},
      {"container_fps", [&o](auto& n, auto& v) { o.container_fps = RecordedNumber(n, v); }},
      {"duration_s", [&o](auto& n, auto& v) { o.duration_s = RecordedNumber(n, v); }},
      {"pre_release_s", [&o](auto& n, auto& v) { o.pre_release_s = RecordedNumber(n, v); }},
      {"calibration", [&o](auto&, auto& v) { o.calibration = RecordedFlag(v); }},
      {"board", [&o](auto&, auto& v) { o.board = v; }},
      {"square_m", [&o](auto& n, auto& v) { o.square_m = RecordedNumber(n, v); }},
      {"lens_views", [&o](auto& n, auto& v) { o.lens_views = RecordedInteger(n, v); }},
      {"calibration_seed", [&o](auto&, auto& v) { o.calibration_seed = std::stoull(v); }},
      {"marker_offset_m", [&o](auto& n, auto& v) { o.marker_offset_m = RecordedNumber(n, v); }},
      {"first_frames", [&o](auto& n, auto& v) { o.first_frames = RecordedInteger(n, v); }},
      {"occluder", [&o](auto&, auto& v) { o.occluder = v; }},
      {"occluder_cover", [&o](auto&, auto& v) { o.occluder_cover = v; }},
      {"occluder_angle_deg", [&o](auto& n, auto& v) { o.occluder_angle_deg = RecordedNumber(n, v); }},
      {"occluder_grey", [&o](auto& n, auto& v) { o.occluder_grey = RecordedNumber(n, v); }},
  };
}

}  // namespace

RenderOptions RenderOptionsFromRecord(const std::vector<std::pair<std::string, std::string>>& record) {
  RenderOptions o;
  o.params.clear();
  const std::map<std::string, RecordSetter> setters = RecordSetters(o);
  for (const auto& [name, value] : record) {
    if (name.rfind("param.", 0) == 0) {
      o.params.push_back(name.substr(6) + "=" + value);
      continue;
    }
    const auto it = setters.find(name);
    if (it == setters.end()) throw std::invalid_argument("unknown recorded render option '" + name + "'");
    it->second(name, value);
  }
  return o;
}

}  // namespace dropfit::synth
