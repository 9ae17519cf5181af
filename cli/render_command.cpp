#include "cli/render_command.h"

#include <opencv2/imgcodecs.hpp>

#include <chrono>
#include <cmath>
#include <exception>
#include <filesystem>
#include <functional>
#include <iomanip>
#include <iostream>
#include <map>
#include <mutex>
#include <numbers>
#include <random>
#include <sstream>

#include "analysis/contact_law.h"
#include "analysis/forward_model.h"
#include "analysis/geometry.h"
#include "cli/atomic_write.h"
#include "cli/exit_status.h"
#include "cli/parallel_for.h"
#include "cli/rig_io.h"
#include "cli/truth_io.h"
#include "dropfit/version.h"
#include "media/video_out.h"
#include "synth/camera.h"
#include "synth/render.h"
#include "synth/render_calibration.h"

namespace dropfit::cli {

namespace {

namespace fs = std::filesystem;

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

std::string Fmt(double v) {
  std::ostringstream s;
  s << std::setprecision(10) << v;
  return s.str();
}

std::string OutOfRange(const char* option, double value, const char* range, const char* unit) {
  return std::string("--") + option + " " + Fmt(value) + (unit[0] ? " " : "") + unit + " is outside " + range;
}

// Law parameters: the law's defaults overridden by "name=value" pairs. Throws
// std::invalid_argument naming a bad pair and the valid names.
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

// Everything a run derives from its options.
struct RenderPlan {
  analysis::LawId law;
  std::vector<double> law_params;
  analysis::TreadGeometry tread;
  synth::CameraSetup camera_setup;
  synth::WheelLook wheel;
  synth::ExposureSettings exposure;
  synth::CheckerboardSpec board;
  media::VideoFormat format;
  bool add_noise = true;
};

RenderPlan MakePlan(const RenderCommandOptions& o) {
  RenderPlan plan;
  plan.law = analysis::LawIdFromString(o.law);
  plan.law_params = LawParameters(plan.law, o.params);
  plan.tread = analysis::MakeTreadGeometry(o.free_radius_m, o.tread_width_m, o.section_radius_m);
  const auto size = ParsePair(o.image_size);
  const auto board = ParsePair(o.board);
  synth::CameraSetup& c = plan.camera_setup;
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
  plan.wheel.marker = synth::MarkerShapeFromString(o.marker);
  plan.wheel.marker_diameter_m = o.marker_diameter_m > 0                         ? o.marker_diameter_m
                                 : plan.wheel.marker == synth::MarkerShape::kDot ? 0.018
                                                                                 : 0.030;
  synth::ExposureSettings& e = plan.exposure;
  e.exposure_s = o.exposure_s;
  e.subframes = o.subframes;
  e.read_noise_grey = o.read_noise_grey;
  e.electrons_per_grey = o.electrons_per_grey;
  e.vignetting_fraction = o.vignetting;
  e.flicker_fraction = o.flicker;
  e.psf_sigma_px = o.psf_sigma_px;
  if (o.clean) {
    e = synth::WithoutImperfections(e);
    plan.add_noise = false;
  }
  plan.format = o.format == "auto" ? (o.clean ? media::VideoFormat::kPngFrames : media::VideoFormat::kMjpgAvi)
                                   : media::VideoFormatFromString(o.format);
  return plan;
}

std::vector<std::pair<std::string, std::string>> EffectiveOptions(const RenderCommandOptions& o,
                                                                  const RenderPlan& plan) {
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
  add("first_frames", std::to_string(o.first_frames));
  return out;
}

std::string ClipName(double height_m, int repeat) {
  std::ostringstream s;
  s << "drop_h" << std::setw(3) << std::setfill('0') << std::lround(height_m * 1000) << "mm_r" << repeat;
  return s.str();
}

// One clip: its scenario and frame count, chosen as render_command.h says.
struct ClipPlan {
  analysis::DropScenario scenario;
  int frames = 0;
  double release_drop_height_m = 0;
  uint64_t noise_seed = 0;
};

ClipPlan PlanClip(const RenderCommandOptions& o, const RenderPlan& plan, const synth::SceneRenderer& renderer,
                  double height_m, int clip_index) {
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
  const double fall_s = std::sqrt(2 * s.start_height_m / o.gravity_mps2);
  double in_view_s = -1;
  for (double tau = 0; tau < fall_s; tau += 5e-4) {
    const synth::WheelPose pose{s.start_x_m + s.drift_speed_mps * tau,
                                s.start_height_m - 0.5 * o.gravity_mps2 * tau * tau,
                                s.start_spin_angle_rad + s.spin_rate_radps * tau};
    if (renderer.MarkerInView(pose)) {
      in_view_s = tau;
      break;
    }
  }
  if (in_view_s < 0) {
    throw std::invalid_argument("the marker never comes into view during the fall from " + Fmt(height_m) +
                                " m; check --image-size, --camera-distance and --heights");
  }
  s.start_time_s = in_view_s == 0 ? o.pre_release_s : -(in_view_s + 0.002);
  double end_s;
  if (o.duration_s > 0) {
    end_s = o.duration_s;
  } else {
    s.end_time_s = s.start_time_s + 4.0;
    const analysis::Trajectory trial = analysis::SimulateDrop(s);
    std::vector<analysis::ImpactTruth> complete;
    for (const auto& i : trial.impacts()) {
      if (i.complete && std::isfinite(i.t_level_s)) complete.push_back(i);
    }
    if (complete.size() >= 3) {
      end_s = complete[2].t_level_s + 0.02;
    } else if (!complete.empty()) {
      end_s = complete.back().t_level_s + 0.05;
    } else {
      end_s = s.start_time_s + 1.0;
    }
    end_s = std::min(end_s, s.start_time_s + 3.0);
  }
  clip.frames = static_cast<int>(std::floor(end_s * o.fps + 1e-9)) + 1;
  s.end_time_s = (clip.frames - 1) / o.fps + plan.exposure.exposure_s / 2;
  if (!(s.end_time_s > s.start_time_s)) s.end_time_s = s.start_time_s + 1e-3;
  return clip;
}

void WriteManifest(const fs::path& path, const RenderCommandOptions& o, const std::vector<ClipTruth>& clips) {
  std::ostringstream csv;
  csv << "# Rendered by dropfit render; truth in truth.json\n";
  csv << "clip,drop_height_m,mass_kg,capture_fps,specimen,free_radius_m";
  if (o.section_radius_m > 0) {
    csv << ",section_radius_m";
  } else if (o.tread_width_m > 0) {
    csv << ",tread_width_m";
  }
  csv << "\n";
  for (const ClipTruth& c : clips) {
    csv << c.clip << "," << Fmt(c.drop_height_m) << "," << Fmt(o.mass_kg) << "," << Fmt(c.capture_fps) << ","
        << o.specimen << "," << Fmt(o.free_radius_m);
    if (o.section_radius_m > 0) {
      csv << "," << Fmt(o.section_radius_m);
    } else if (o.tread_width_m > 0) {
      csv << "," << Fmt(o.tread_width_m);
    }
    csv << "\n";
  }
  WriteFileAtomically(path, csv.str());
}

}  // namespace

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
  }
  return {};
}

std::optional<std::string> ValidateRenderOptions(const RenderCommandOptions& o) {
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
    if (!(h > 0 && h <= 5)) return OutOfRange("heights", h, "(0, 5]", "m");
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
    synth::MarkerShapeFromString(o.marker);
    if (o.format != "auto") media::VideoFormatFromString(o.format);
  } catch (const std::invalid_argument& e) {
    return std::string(e.what()) + (o.format != "auto" ? ", auto" : "");
  }
  const auto size = ParsePair(o.image_size);
  if (!size) return "--image-size '" + o.image_size + "' is not WIDTHxHEIGHT (e.g. 800x640)";
  const auto board = ParsePair(o.board);
  if (!board) return "--board '" + o.board + "' is not COLUMNSxROWS of inner corners (e.g. 9x6)";
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
  RenderPlan plan;
  try {
    plan = MakePlan(o);
  } catch (const std::invalid_argument& e) {
    return std::string(e.what());
  }
  if (auto msg = synth::ValidateCameraSetup(plan.camera_setup)) return "camera: " + *msg;
  if (auto msg = synth::ValidateWheelLook(plan.wheel)) return "wheel: " + *msg;
  if (auto msg = synth::ValidateExposure(plan.exposure, o.fps)) return "sensor: " + *msg;
  if (auto msg = synth::ValidateCheckerboard(plan.board)) return "--board/--square: " + *msg;
  const std::string tread = analysis::Validate(plan.tread);
  if (!tread.empty()) return "tread: " + tread;
  return std::nullopt;
}

RenderCommandOptions RenderOptionsFromRecord(const std::vector<std::pair<std::string, std::string>>& record) {
  RenderCommandOptions o;
  o.params.clear();
  auto number = [](const std::string& name, const std::string& text) {
    try {
      size_t used = 0;
      const double v = std::stod(text, &used);
      if (used != text.size()) throw std::invalid_argument(text);
      return v;
    } catch (const std::exception&) {
      throw std::invalid_argument("recorded option " + name + " = '" + text + "' is not a number");
    }
  };
  auto integer = [&number](const std::string& name, const std::string& text) {
    return static_cast<int>(std::lround(number(name, text)));
  };
  auto flag = [](const std::string& text) { return text == "true"; };
  const std::map<std::string, std::function<void(const std::string&, const std::string&)>> setters = {
      {"law", [&](auto&, auto& v) { o.law = v; }},
      {"mass_kg", [&](auto& n, auto& v) { o.mass_kg = number(n, v); }},
      {"heights_m",
       [&](auto& n, auto& v) {
         o.heights_m.clear();
         std::stringstream list(v);
         for (std::string item; std::getline(list, item, ',');) o.heights_m.push_back(number(n, item));
       }},
      {"repeats", [&](auto& n, auto& v) { o.repeats = integer(n, v); }},
      {"seed", [&](auto&, auto& v) { o.seed = std::stoull(v); }},
      {"height_jitter_m", [&](auto& n, auto& v) { o.height_jitter_m = number(n, v); }},
      {"drift_mps", [&](auto& n, auto& v) { o.drift_mps = number(n, v); }},
      {"spin_radps", [&](auto& n, auto& v) { o.spin_radps = number(n, v); }},
      {"gravity_mps2", [&](auto& n, auto& v) { o.gravity_mps2 = number(n, v); }},
      {"specimen", [&](auto&, auto& v) { o.specimen = v; }},
      {"free_radius_m", [&](auto& n, auto& v) { o.free_radius_m = number(n, v); }},
      {"rim_radius_m", [&](auto& n, auto& v) { o.rim_radius_m = number(n, v); }},
      {"tread_width_m", [&](auto& n, auto& v) { o.tread_width_m = number(n, v); }},
      {"section_radius_m", [&](auto& n, auto& v) { o.section_radius_m = number(n, v); }},
      {"marker", [&](auto&, auto& v) { o.marker = v; }},
      {"marker_diameter_m", [&](auto& n, auto& v) { o.marker_diameter_m = number(n, v); }},
      {"image_size", [&](auto&, auto& v) { o.image_size = v; }},
      {"focal_px", [&](auto& n, auto& v) { o.focal_px = number(n, v); }},
      {"camera_distance_m", [&](auto& n, auto& v) { o.camera_distance_m = number(n, v); }},
      {"cx_px", [&](auto& n, auto& v) { o.cx_px = number(n, v); }},
      {"cy_px", [&](auto& n, auto& v) { o.cy_px = number(n, v); }},
      {"k1", [&](auto& n, auto& v) { o.k1 = number(n, v); }},
      {"k2", [&](auto& n, auto& v) { o.k2 = number(n, v); }},
      {"p1", [&](auto& n, auto& v) { o.p1 = number(n, v); }},
      {"p2", [&](auto& n, auto& v) { o.p2 = number(n, v); }},
      {"k3", [&](auto& n, auto& v) { o.k3 = number(n, v); }},
      {"pitch_deg", [&](auto& n, auto& v) { o.pitch_deg = number(n, v); }},
      {"roll_deg", [&](auto& n, auto& v) { o.roll_deg = number(n, v); }},
      {"yaw_deg", [&](auto& n, auto& v) { o.yaw_deg = number(n, v); }},
      {"floor_margin_px", [&](auto& n, auto& v) { o.floor_margin_px = number(n, v); }},
      {"fps", [&](auto& n, auto& v) { o.fps = number(n, v); }},
      {"exposure_s", [&](auto& n, auto& v) { o.exposure_s = number(n, v); }},
      {"subframes", [&](auto& n, auto& v) { o.subframes = integer(n, v); }},
      {"read_noise_grey", [&](auto& n, auto& v) { o.read_noise_grey = number(n, v); }},
      {"electrons_per_grey", [&](auto& n, auto& v) { o.electrons_per_grey = number(n, v); }},
      {"vignetting", [&](auto& n, auto& v) { o.vignetting = number(n, v); }},
      {"flicker", [&](auto& n, auto& v) { o.flicker = number(n, v); }},
      {"psf_sigma_px", [&](auto& n, auto& v) { o.psf_sigma_px = number(n, v); }},
      {"clean", [&](auto&, auto& v) { o.clean = flag(v); }},
      {"format", [&](auto&, auto& v) { o.format = v; }},
      {"jpeg_quality", [&](auto& n, auto& v) { o.jpeg_quality = integer(n, v); }},
      {"container_fps", [&](auto& n, auto& v) { o.container_fps = number(n, v); }},
      {"duration_s", [&](auto& n, auto& v) { o.duration_s = number(n, v); }},
      {"pre_release_s", [&](auto& n, auto& v) { o.pre_release_s = number(n, v); }},
      {"calibration", [&](auto&, auto& v) { o.calibration = flag(v); }},
      {"board", [&](auto&, auto& v) { o.board = v; }},
      {"square_m", [&](auto& n, auto& v) { o.square_m = number(n, v); }},
      {"lens_views", [&](auto& n, auto& v) { o.lens_views = integer(n, v); }},
      {"first_frames", [&](auto& n, auto& v) { o.first_frames = integer(n, v); }},
  };
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

int RunRender(const RenderCommandOptions& options) {
  if (auto msg = ValidateRenderOptions(options)) {
    std::cerr << "dropfit render: " << *msg << "; nothing was written\n";
    return kExitBadUsage;
  }
  const auto started = std::chrono::steady_clock::now();
  const RenderPlan plan = MakePlan(options);
  const synth::PinholeCamera camera = synth::MakeCamera(plan.camera_setup);
  synth::SceneLook scene;
  scene.texture_seed = options.seed * 0x9E3779B97F4A7C15ull + 17;
  const synth::SceneRenderer renderer(camera, plan.wheel, scene);

  // Plan every clip before writing anything, so that a clip that cannot be made writes nothing.
  struct Job {
    ClipTruth truth;
    ClipPlan plan;
  };
  std::vector<Job> jobs;
  try {
    int index = 0;
    for (double height : options.heights_m) {
      for (int r = 1; r <= options.repeats; ++r, ++index) {
        Job job;
        job.plan = PlanClip(options, plan, renderer, height, index);
        job.truth.clip_id = ClipName(height, r);
        job.truth.clip = job.truth.clip_id + media::FileExtension(plan.format);
        job.truth.drop_height_m = height;
        jobs.push_back(std::move(job));
      }
    }
  } catch (const std::invalid_argument& e) {
    std::cerr << "dropfit render: " << e.what() << "; nothing was written\n";
    return kExitBadUsage;
  }

  const fs::path out(options.out_dir);
  fs::create_directories(out);
  RenderTruth truth;
  truth.tool_version = kVersion;
  truth.seed = options.seed;
  truth.specimen = options.specimen;
  truth.law = options.law;
  for (size_t i = 0; i < plan.law_params.size(); ++i) {
    truth.params.emplace_back(analysis::ParameterNames(plan.law)[i], plan.law_params[i]);
  }
  truth.mass_kg = options.mass_kg;
  truth.gravity_mps2 = options.gravity_mps2;
  truth.tread = plan.tread;
  truth.camera = camera;
  truth.wheel = plan.wheel;
  truth.exposure = plan.exposure;
  truth.options = EffectiveOptions(options, plan);

  if (options.calibration) {
    const fs::path calib_dir = out / "calib";
    fs::create_directories(calib_dir);
    CalibrationTruth ct;
    ct.board = options.board;
    ct.square_m = options.square_m;
    ct.corner_height_m = synth::PlaneBoardCornerHeight(plan.board);
    for (const synth::CalibrationImage& image : synth::RenderCalibrationImages(
             renderer, plan.board, options.lens_views, plan.exposure, plan.add_noise, options.seed ^ 0xCA11B8ull)) {
      const std::string file = "calib/" + image.name + ".png";
      if (!cv::imwrite((out / file).string(), image.image)) {
        throw std::runtime_error("cannot write '" + (out / file).string() + "'");
      }
      ct.views.push_back({file, image.drop_plane, image.board_rvec_rad, image.board_tvec_m, image.inner_corners_px});
    }
    truth.calibration = ct;
  }

  const double container_fps = options.container_fps > 0 ? options.container_fps : options.fps;
  // Clips are independent (own generator, own file): render them on `threads` workers.
  std::mutex log_mutex;
  auto render_job = [&](Job& job) {
    const auto clip_started = std::chrono::steady_clock::now();
    const analysis::Trajectory trajectory = analysis::SimulateDrop(job.plan.scenario);
    const fs::path clip_path = out / job.truth.clip;
    if (plan.format == media::VideoFormat::kPngFrames) fs::remove_all(clip_path);
    auto sink =
        media::OpenFrameSink(clip_path, plan.format, camera.intrinsics.image_size, container_fps, options.jpeg_quality);
    synth::ExposureSettings exposure = plan.exposure;
    std::mt19937_64 phase_rng(job.plan.noise_seed ^ 0xF11C4E5ull);
    exposure.flicker_phase_rad = std::uniform_real_distribution<double>(0, 2 * std::numbers::pi)(phase_rng);
    const int frames = options.first_frames > 0 ? std::min(options.first_frames, job.plan.frames) : job.plan.frames;
    job.truth.frames = synth::RenderClip(renderer, trajectory, frames, options.fps, exposure, plan.add_noise,
                                         job.plan.noise_seed, *sink);
    sink->Close();
    const analysis::DropScenario& s = job.plan.scenario;
    job.truth.release_drop_height_m = job.plan.release_drop_height_m;
    job.truth.release_time_s = s.start_time_s;
    job.truth.capture_fps = options.fps;
    job.truth.container_fps = plan.format == media::VideoFormat::kPngFrames ? 0.0 : container_fps;
    job.truth.noise_seed = job.plan.noise_seed;
    job.truth.onset_height_m = s.onset_height_m;
    job.truth.start_x_m = s.start_x_m;
    job.truth.start_spin_rad = s.start_spin_angle_rad;
    job.truth.drift_mps = s.drift_speed_mps;
    job.truth.spin_radps = s.spin_rate_radps;
    job.truth.impacts = trajectory.impacts();
    int out_of_view = 0;
    for (const auto& f : job.truth.frames) out_of_view += f.marker_in_view ? 0 : 1;
    const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - clip_started).count();
    std::lock_guard<std::mutex> lock(log_mutex);
    if (out_of_view > 0) {
      std::cerr << "dropfit render: warning: " << job.truth.clip << ": the marker is not wholly in view in "
                << out_of_view << " frames (marker_in_view = false in truth.json)\n";
    }
    std::cerr << "dropfit render: " << job.truth.clip << ": " << job.truth.frames.size() << " frames, "
              << trajectory.impacts().size() << " impacts, " << std::fixed << std::setprecision(1) << seconds << " s\n";
  };
  ParallelFor(jobs.size(), options.threads, [&](size_t i) { render_job(jobs[i]); });
  long total_frames = 0;
  for (Job& job : jobs) {
    total_frames += static_cast<long>(job.truth.frames.size());
    truth.clips.push_back(job.truth);
  }
  WriteManifest(out / "manifest.csv", options, truth.clips);
  WriteTruthFile(out / "truth.json", truth);
  WriteRigFile(out / "rig_exact.json",
               synth::RigFromCamera(camera, synth::PlaneBoardCornerHeight(plan.board), options.fps));
  std::ostringstream text;
  for (const auto& [name, value] : truth.options) text << name << " = " << value << "\n";
  WriteFileAtomically(out / "render_options.txt", text.str());
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
  std::cerr << "dropfit render: wrote " << truth.clips.size() << " clips (" << total_frames << " frames) to "
            << out.string() << " in " << std::fixed << std::setprecision(1) << seconds << " s\n";
  return kExitDone;
}

}  // namespace dropfit::cli
