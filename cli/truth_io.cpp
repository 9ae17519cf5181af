// JSON halves of cli/truth_io.h (nlohmann/json is slow to compile: kept in this file).
#include "cli/truth_io.h"

#include <nlohmann/json.hpp>

#include <cmath>
#include <fstream>
#include <sstream>
#include <stdexcept>

#include "cli/atomic_write.h"
#include "cli/json_numbers.h"

namespace dropfit::cli {

namespace {

using json = nlohmann::ordered_json;

json Number(double v) { return std::isfinite(v) ? json(v) : json(nullptr); }
// Rounded to `step` so that the file holds meaningful digits only.
json Rounded(double v, double step) { return std::isfinite(v) ? json(std::round(v / step) * step) : json(nullptr); }
json Vec3(const cv::Vec3d& v) { return json::array({v[0], v[1], v[2]}); }

double GetNumber(const json& j, const char* key, const std::string& where) {
  if (!j.contains(key)) throw std::runtime_error(where + ": field '" + key + "' is missing");
  const json& v = j.at(key);
  if (v.is_null()) return std::numeric_limits<double>::quiet_NaN();
  if (!v.is_number()) throw std::runtime_error(where + ": field '" + key + "' is not a number");
  return v.get<double>();
}

template <typename T>
T Get(const json& j, const char* key, const std::string& where) {
  if (!j.contains(key)) throw std::runtime_error(where + ": field '" + key + "' is missing");
  try {
    return j.at(key).get<T>();
  } catch (const json::exception&) {
    throw std::runtime_error(where + ": field '" + key + "' has the wrong type");
  }
}

// The field `key` of `j` (a reference into j, so no temporary is iterated).
const json& Field(const json& j, const char* key, const std::string& where) {
  if (!j.is_object() || !j.contains(key)) throw std::runtime_error(where + ": field '" + key + "' is missing");
  return j.at(key);
}

cv::Vec3d GetVec3(const json& j, const char* key, const std::string& where) {
  const auto v = Get<std::vector<double>>(j, key, where);
  if (v.size() != 3) throw std::runtime_error(where + ": field '" + key + "' must hold 3 numbers");
  return {v[0], v[1], v[2]};
}

json ImpactJson(const analysis::ImpactTruth& i) {
  json j;
  j["t_contact_s"] = Number(i.t_contact_s);
  j["t_separation_s"] = Number(i.t_separation_s);
  j["impact_speed_mps"] = Number(i.impact_speed_mps);
  j["rebound_speed_mps"] = Number(i.rebound_speed_mps);
  j["cor"] = Number(i.cor);
  j["contact_duration_s"] = Number(i.contact_duration_s);
  j["max_deflection_m"] = Number(i.max_deflection_m);
  j["peak_force_n"] = Number(i.peak_force_n);
  j["onset_height_m"] = Number(i.onset_height_m);
  j["complete"] = i.complete;
  j["separation_speed_mps"] = Number(i.separation_speed_mps);
  j["separation_deflection_m"] = Number(i.separation_deflection_m);
  j["t_lowest_s"] = Number(i.t_lowest_s);
  j["t_peak_force_s"] = Number(i.t_peak_force_s);
  j["t_level_s"] = Number(i.t_level_s);
  j["pressed_at_end"] = i.pressed_at_end;
  return j;
}

analysis::ImpactTruth ImpactFromJson(const json& j, const std::string& where) {
  analysis::ImpactTruth i;
  i.t_contact_s = GetNumber(j, "t_contact_s", where);
  i.t_separation_s = GetNumber(j, "t_separation_s", where);
  i.impact_speed_mps = GetNumber(j, "impact_speed_mps", where);
  i.rebound_speed_mps = GetNumber(j, "rebound_speed_mps", where);
  i.cor = GetNumber(j, "cor", where);
  i.contact_duration_s = GetNumber(j, "contact_duration_s", where);
  i.max_deflection_m = GetNumber(j, "max_deflection_m", where);
  i.peak_force_n = GetNumber(j, "peak_force_n", where);
  i.onset_height_m = GetNumber(j, "onset_height_m", where);
  i.complete = Get<bool>(j, "complete", where);
  i.separation_speed_mps = GetNumber(j, "separation_speed_mps", where);
  i.separation_deflection_m = GetNumber(j, "separation_deflection_m", where);
  i.t_lowest_s = GetNumber(j, "t_lowest_s", where);
  i.t_peak_force_s = GetNumber(j, "t_peak_force_s", where);
  i.t_level_s = GetNumber(j, "t_level_s", where);
  i.pressed_at_end = Get<bool>(j, "pressed_at_end", where);
  return i;
}

json ClipJson(const ClipTruth& c) {
  json j;
  j["clip"] = c.clip;
  j["clip_id"] = c.clip_id;
  j["drop_height_m"] = c.drop_height_m;
  j["release_drop_height_m"] = c.release_drop_height_m;
  j["release_time_s"] = c.release_time_s;
  j["capture_fps"] = c.capture_fps;
  j["container_fps"] = c.container_fps;
  j["frame_count"] = c.frames.size();
  j["noise_seed"] = c.noise_seed;
  j["onset_height_m"] = c.onset_height_m;
  j["start_x_m"] = c.start_x_m;
  j["start_spin_rad"] = c.start_spin_rad;
  j["drift_mps"] = c.drift_mps;
  j["spin_radps"] = c.spin_radps;
  json impacts = json::array();
  for (const auto& i : c.impacts) impacts.push_back(ImpactJson(i));
  j["impacts"] = impacts;
  json frame = json::array(), t = json::array(), u = json::array(), v = json::array(), x = json::array(),
       y = json::array(), spin = json::array(), vy = json::array(), force = json::array(), contact = json::array(),
       in_view = json::array(), covered = json::array();
  for (const synth::FrameTruth& f : c.frames) {
    covered.push_back(Rounded(f.marker_covered_fraction, 1e-9));
    frame.push_back(f.frame);
    t.push_back(f.t_s);
    u.push_back(Rounded(f.u_px, 1e-9));
    v.push_back(Rounded(f.v_px, 1e-9));
    x.push_back(Rounded(f.x_m, 1e-12));
    y.push_back(Rounded(f.y_m, 1e-12));
    spin.push_back(Rounded(f.spin_rad, 1e-9));
    vy.push_back(Rounded(f.vy_mps, 1e-9));
    force.push_back(Rounded(f.contact_force_n, 1e-6));
    contact.push_back(f.in_contact);
    in_view.push_back(f.marker_in_view);
  }
  j["frames"] = {{"frame", frame},
                 {"t_s", t},
                 {"u_px", u},
                 {"v_px", v},
                 {"x_m", x},
                 {"y_m", y},
                 {"spin_rad", spin},
                 {"vy_mps", vy},
                 {"contact_force_n", force},
                 {"in_contact", contact},
                 {"marker_in_view", in_view},
                 {"marker_covered_fraction", covered}};
  return j;
}

ClipTruth ClipFromJson(const json& j, const std::string& file) {
  ClipTruth c;
  c.clip = Get<std::string>(j, "clip", file);
  const std::string where = file + ": clip '" + c.clip + "'";
  c.clip_id = Get<std::string>(j, "clip_id", where);
  c.drop_height_m = GetNumber(j, "drop_height_m", where);
  c.release_drop_height_m = GetNumber(j, "release_drop_height_m", where);
  c.release_time_s = GetNumber(j, "release_time_s", where);
  c.capture_fps = GetNumber(j, "capture_fps", where);
  c.container_fps = GetNumber(j, "container_fps", where);
  c.noise_seed = Get<uint64_t>(j, "noise_seed", where);
  c.onset_height_m = GetNumber(j, "onset_height_m", where);
  c.start_x_m = GetNumber(j, "start_x_m", where);
  c.start_spin_rad = GetNumber(j, "start_spin_rad", where);
  c.drift_mps = GetNumber(j, "drift_mps", where);
  c.spin_radps = GetNumber(j, "spin_radps", where);
  for (const json& i : Field(j, "impacts", where)) c.impacts.push_back(ImpactFromJson(i, where + " impact"));
  const json& frames = Field(j, "frames", where);
  const auto frame = Get<std::vector<int>>(frames, "frame", where);
  const auto t = Get<std::vector<double>>(frames, "t_s", where);
  const auto u = Get<std::vector<double>>(frames, "u_px", where);
  const auto v = Get<std::vector<double>>(frames, "v_px", where);
  const auto x = Get<std::vector<double>>(frames, "x_m", where);
  const auto y = Get<std::vector<double>>(frames, "y_m", where);
  const auto spin = Get<std::vector<double>>(frames, "spin_rad", where);
  const auto vy = Get<std::vector<double>>(frames, "vy_mps", where);
  const auto force = Get<std::vector<double>>(frames, "contact_force_n", where);
  const auto contact = Get<std::vector<bool>>(frames, "in_contact", where);
  const auto in_view = Get<std::vector<bool>>(frames, "marker_in_view", where);
  // Files written before the occluder existed have no such column: nothing was covered.
  const auto covered = frames.contains("marker_covered_fraction")
                           ? Get<std::vector<double>>(frames, "marker_covered_fraction", where)
                           : std::vector<double>(frame.size(), 0.0);
  const size_t n = frame.size();
  for (size_t len : {covered.size(), t.size(), u.size(), v.size(), x.size(), y.size(), spin.size(), vy.size(),
                     force.size(), contact.size(), in_view.size()}) {
    if (len != n) throw std::runtime_error(where + ": the per-frame columns differ in length");
  }
  if (Get<size_t>(j, "frame_count", where) != n) {
    throw std::runtime_error(where + ": frame_count does not match the per-frame columns");
  }
  for (size_t i = 0; i < n; ++i) {
    synth::FrameTruth f;
    f.frame = frame[i];
    f.t_s = t[i];
    f.u_px = u[i];
    f.v_px = v[i];
    f.x_m = x[i];
    f.y_m = y[i];
    f.spin_rad = spin[i];
    f.vy_mps = vy[i];
    f.contact_force_n = force[i];
    f.in_contact = contact[i];
    f.marker_in_view = in_view[i];
    f.marker_covered_fraction = covered[i];
    c.frames.push_back(f);
  }
  return c;
}

}  // namespace

std::string TruthToJson(const RenderTruth& truth) {
  json j;
  j["tool_version"] = truth.tool_version;
  j["seed"] = truth.seed;
  j["specimen"] = truth.specimen;
  j["law"] = truth.law;
  json params = json::object();
  for (const auto& [name, value] : truth.params) params[name] = value;
  j["params"] = params;
  j["mass_kg"] = truth.mass_kg;
  j["gravity_mps2"] = truth.gravity_mps2;
  j["tread"] = {{"shape", analysis::ToString(truth.tread.shape)},
                {"free_radius_m", truth.tread.free_radius_m},
                {"tread_width_m", truth.tread.tread_width_m},
                {"section_radius_m", truth.tread.section_radius_m}};
  const synth::CameraIntrinsics& k = truth.camera.intrinsics;
  j["camera"] = {{"image_width_px", k.image_size.width},
                 {"image_height_px", k.image_size.height},
                 {"fx_px", k.fx_px},
                 {"fy_px", k.fy_px},
                 {"cx_px", k.cx_px},
                 {"cy_px", k.cy_px},
                 {"distortion", {{"k1", k.k1}, {"k2", k.k2}, {"p1", k.p1}, {"p2", k.p2}, {"k3", k.k3}}},
                 {"rvec_rad", Vec3(truth.camera.rvec_rad)},
                 {"tvec_m", Vec3(truth.camera.tvec_m)},
                 {"centre_in_world_m", Vec3(synth::CameraCentreInWorld(truth.camera))},
                 {"metres_per_px_centre", synth::MetresPerPixelAtCentre(truth.camera)}};
  j["wheel"] = {{"free_radius_m", truth.wheel.free_radius_m},    {"rim_radius_m", truth.wheel.rim_radius_m},
                {"marker", synth::ToString(truth.wheel.marker)}, {"marker_diameter_m", truth.wheel.marker_diameter_m},
                {"cap_radius_m", synth::CapRadius(truth.wheel)}, {"marker_offset_m", truth.wheel.marker_offset_m}};
  const synth::ExposureSettings& e = truth.exposure;
  j["exposure"] = {{"exposure_s", e.exposure_s},
                   {"subframes", e.subframes},
                   {"read_noise_grey", e.read_noise_grey},
                   {"electrons_per_grey", e.electrons_per_grey},
                   {"vignetting_fraction", e.vignetting_fraction},
                   {"flicker_fraction", e.flicker_fraction},
                   {"flicker_hz", e.flicker_hz},
                   {"flicker_phase_rad", e.flicker_phase_rad},
                   {"psf_sigma_px", e.psf_sigma_px}};
  if (truth.calibration) {
    const CalibrationTruth& c = *truth.calibration;
    json views = json::array();
    for (const CalibrationViewTruth& view : c.views) {
      json corners = json::array();
      for (const cv::Point2d& p : view.inner_corners_px) corners.push_back({Rounded(p.x, 1e-9), Rounded(p.y, 1e-9)});
      views.push_back({{"file", view.file},
                       {"drop_plane", view.drop_plane},
                       {"board_rvec_rad", Vec3(view.board_rvec_rad)},
                       {"board_tvec_m", Vec3(view.board_tvec_m)},
                       {"inner_corners_px", corners}});
    }
    j["calibration"] = {
        {"board", c.board}, {"square_m", c.square_m}, {"corner_height_m", c.corner_height_m}, {"views", views}};
  } else {
    j["calibration"] = nullptr;
  }
  json clips = json::array();
  for (const ClipTruth& c : truth.clips) clips.push_back(ClipJson(c));
  j["clips"] = clips;
  json options = json::object();
  for (const auto& [name, value] : truth.options) options[name] = value;
  j["options"] = options;
  WholeNumbersAsIntegers(j);
  return j.dump(2) + "\n";
}

void WriteTruthFile(const std::filesystem::path& path, const RenderTruth& truth) {
  WriteFileAtomically(path, TruthToJson(truth));
}

RenderTruth ParseTruthJson(const std::string& text, const std::string& file) {
  json j;
  try {
    j = json::parse(text);
  } catch (const json::parse_error& e) {
    throw std::runtime_error(file + ": not valid JSON: " + e.what());
  }
  RenderTruth t;
  t.tool_version = Get<std::string>(j, "tool_version", file);
  t.seed = Get<uint64_t>(j, "seed", file);
  t.specimen = Get<std::string>(j, "specimen", file);
  t.law = Get<std::string>(j, "law", file);
  for (const auto& [name, value] : Field(j, "params", file).items()) {
    if (!value.is_number()) throw std::runtime_error(file + ": parameter '" + name + "' is not a number");
    t.params.emplace_back(name, value.get<double>());
  }
  t.mass_kg = GetNumber(j, "mass_kg", file);
  t.gravity_mps2 = GetNumber(j, "gravity_mps2", file);
  const json& tread = Field(j, "tread", file);
  try {
    t.tread.shape = analysis::TreadShapeFromString(Get<std::string>(tread, "shape", file + ": tread"));
  } catch (const std::invalid_argument& e) {
    throw std::runtime_error(file + ": tread: " + e.what());
  }
  t.tread.free_radius_m = GetNumber(tread, "free_radius_m", file + ": tread");
  t.tread.tread_width_m = GetNumber(tread, "tread_width_m", file + ": tread");
  t.tread.section_radius_m = GetNumber(tread, "section_radius_m", file + ": tread");
  const json& cam = Field(j, "camera", file);
  const std::string cw = file + ": camera";
  synth::CameraIntrinsics& k = t.camera.intrinsics;
  k.image_size = {Get<int>(cam, "image_width_px", cw), Get<int>(cam, "image_height_px", cw)};
  k.fx_px = GetNumber(cam, "fx_px", cw);
  k.fy_px = GetNumber(cam, "fy_px", cw);
  k.cx_px = GetNumber(cam, "cx_px", cw);
  k.cy_px = GetNumber(cam, "cy_px", cw);
  const json& dist = Field(cam, "distortion", cw);
  k.k1 = GetNumber(dist, "k1", cw);
  k.k2 = GetNumber(dist, "k2", cw);
  k.p1 = GetNumber(dist, "p1", cw);
  k.p2 = GetNumber(dist, "p2", cw);
  k.k3 = GetNumber(dist, "k3", cw);
  t.camera.rvec_rad = GetVec3(cam, "rvec_rad", cw);
  t.camera.tvec_m = GetVec3(cam, "tvec_m", cw);
  const json& wheel = Field(j, "wheel", file);
  const std::string ww = file + ": wheel";
  t.wheel.free_radius_m = GetNumber(wheel, "free_radius_m", ww);
  t.wheel.rim_radius_m = GetNumber(wheel, "rim_radius_m", ww);
  try {
    t.wheel.marker = synth::MarkerShapeFromString(Get<std::string>(wheel, "marker", ww));
  } catch (const std::invalid_argument& e) {
    throw std::runtime_error(ww + ": " + e.what());
  }
  t.wheel.marker_diameter_m = GetNumber(wheel, "marker_diameter_m", ww);
  // Absent in sets rendered before the option existed: the wheel in the drop plane.
  if (wheel.contains("marker_offset_m")) t.wheel.marker_offset_m = GetNumber(wheel, "marker_offset_m", ww);
  const json& ex = Field(j, "exposure", file);
  const std::string ew = file + ": exposure";
  t.exposure.exposure_s = GetNumber(ex, "exposure_s", ew);
  t.exposure.subframes = Get<int>(ex, "subframes", ew);
  t.exposure.read_noise_grey = GetNumber(ex, "read_noise_grey", ew);
  t.exposure.electrons_per_grey = GetNumber(ex, "electrons_per_grey", ew);
  t.exposure.vignetting_fraction = GetNumber(ex, "vignetting_fraction", ew);
  t.exposure.flicker_fraction = GetNumber(ex, "flicker_fraction", ew);
  t.exposure.flicker_hz = GetNumber(ex, "flicker_hz", ew);
  t.exposure.flicker_phase_rad = GetNumber(ex, "flicker_phase_rad", ew);
  t.exposure.psf_sigma_px = GetNumber(ex, "psf_sigma_px", ew);
  if (!j.contains("calibration")) throw std::runtime_error(file + ": field 'calibration' is missing");
  if (!j.at("calibration").is_null()) {
    const json& c = j.at("calibration");
    const std::string where = file + ": calibration";
    CalibrationTruth ct;
    ct.board = Get<std::string>(c, "board", where);
    ct.square_m = GetNumber(c, "square_m", where);
    ct.corner_height_m = GetNumber(c, "corner_height_m", where);
    for (const json& view : Field(c, "views", where)) {
      CalibrationViewTruth vt;
      vt.file = Get<std::string>(view, "file", where);
      vt.drop_plane = Get<bool>(view, "drop_plane", where);
      vt.board_rvec_rad = GetVec3(view, "board_rvec_rad", where);
      vt.board_tvec_m = GetVec3(view, "board_tvec_m", where);
      for (const auto& p : Get<std::vector<std::vector<double>>>(view, "inner_corners_px", where)) {
        if (p.size() != 2) throw std::runtime_error(where + ": an inner corner must hold 2 numbers");
        vt.inner_corners_px.emplace_back(p[0], p[1]);
      }
      ct.views.push_back(vt);
    }
    t.calibration = ct;
  }
  for (const json& c : Field(j, "clips", file)) t.clips.push_back(ClipFromJson(c, file));
  for (const auto& [name, value] : Field(j, "options", file).items()) {
    t.options.emplace_back(name, value.is_string() ? value.get<std::string>() : value.dump());
  }
  return t;
}

RenderTruth ReadTruthFile(const std::filesystem::path& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw std::runtime_error(path.string() + ": cannot be read");
  std::ostringstream text;
  text << in.rdbuf();
  return ParseTruthJson(text.str(), path.string());
}

}  // namespace dropfit::cli
