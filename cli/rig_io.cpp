// JSON halves of cli/rig_io.h. nlohmann/json is slow to compile: keep it in few files.
#include "cli/rig_io.h"

#include <nlohmann/json.hpp>

#include <cmath>
#include <cstdint>
#include <fstream>
#include <limits>
#include <sstream>
#include <stdexcept>

#include "cli/atomic_write.h"
#include "cli/json_numbers.h"

namespace dropfit::cli {

namespace {

using nlohmann::json;
using nlohmann::ordered_json;

// A finite number, a whole one as an integer; null otherwise (cli/json_numbers.h).
ordered_json Number(double v) { return JsonNumber<ordered_json>(v); }
template <typename T>
ordered_json Optional(const std::optional<T>& v) {
  return v ? Number(static_cast<double>(*v)) : ordered_json(nullptr);
}

ordered_json Matrix(const cv::Matx33d& m) {
  ordered_json rows = ordered_json::array();
  for (int r = 0; r < 3; ++r) rows.push_back({Number(m(r, 0)), Number(m(r, 1)), Number(m(r, 2))});
  return rows;
}
ordered_json Vector3(const std::optional<cv::Vec3d>& v) {
  if (!v) return nullptr;
  return {Number((*v)[0]), Number((*v)[1]), Number((*v)[2])};
}

// Reading: every accessor names the field path it failed on.
class Reader {
 public:
  explicit Reader(std::string display_name) : name_(std::move(display_name)) {}

  [[noreturn]] void Fail(const std::string& what) const { throw std::runtime_error(name_ + ": " + what); }

  const json& Field(const json& j, const std::string& path, const char* key) const {
    if (!j.is_object()) Fail("'" + path + "' is not an object");
    if (!j.contains(key)) Fail("field '" + Join(path, key) + "' is missing");
    return j.at(key);
  }
  double NumberAt(const json& j, const std::string& path) const {
    if (j.is_null()) Fail("field '" + path + "' is null; a number is needed (the file may hold NaN)");
    if (!j.is_number()) Fail("field '" + path + "' is not a number");
    return j.get<double>();
  }
  double Num(const json& j, const std::string& path, const char* key) const {
    return NumberAt(Field(j, path, key), Join(path, key));
  }
  // A whole number that fits an int (casting a larger double to int is undefined behaviour).
  int PixelCount(const json& j, const std::string& path, const char* key) const {
    const double v = Num(j, path, key);
    if (!(v == std::floor(v) && v >= std::numeric_limits<int>::min() && v <= std::numeric_limits<int>::max())) {
      Fail("field '" + Join(path, key) + "' is " + Field(j, path, key).dump() + "; a whole number of pixels is needed");
    }
    return static_cast<int>(v);
  }
  std::optional<double> OptNum(const json& j, const std::string& path, const char* key) const {
    if (!j.is_object() || !j.contains(key) || j.at(key).is_null()) return std::nullopt;
    return NumberAt(j.at(key), Join(path, key));
  }
  double NumOr(const json& j, const std::string& path, const char* key, double fallback) const {
    return OptNum(j, path, key).value_or(fallback);
  }
  std::string Text(const json& j, const std::string& path, const char* key) const {
    const json& v = Field(j, path, key);
    if (!v.is_string()) Fail("field '" + Join(path, key) + "' is not a string");
    return v.get<std::string>();
  }
  std::string TextOr(const json& j, const std::string& path, const char* key, const std::string& fallback) const {
    if (!j.is_object() || !j.contains(key) || j.at(key).is_null()) return fallback;
    return Text(j, path, key);
  }
  cv::Matx33d Matrix33(const json& j, const std::string& path) const {
    if (!j.is_array() || j.size() != 3) Fail("field '" + path + "' is not a 3x3 matrix (3 rows of 3 numbers)");
    cv::Matx33d m;
    for (int r = 0; r < 3; ++r) {
      const json& row = j.at(r);
      if (!row.is_array() || row.size() != 3) Fail("field '" + path + "' is not a 3x3 matrix (3 rows of 3 numbers)");
      for (int c = 0; c < 3; ++c) {
        m(r, c) = NumberAt(row.at(c), path + "[" + std::to_string(r) + "][" + std::to_string(c) + "]");
      }
    }
    return m;
  }
  std::optional<cv::Vec3d> OptVector3(const json& j, const std::string& path, const char* key) const {
    if (!j.contains(key) || j.at(key).is_null()) return std::nullopt;
    const json& v = j.at(key);
    const std::string p = Join(path, key);
    if (!v.is_array() || v.size() != 3) Fail("field '" + p + "' is not a list of 3 numbers");
    return cv::Vec3d(NumberAt(v.at(0), p + "[0]"), NumberAt(v.at(1), p + "[1]"), NumberAt(v.at(2), p + "[2]"));
  }
  std::vector<std::string> Texts(const json& j, const std::string& path, const char* key) const {
    std::vector<std::string> out;
    if (!j.contains(key) || j.at(key).is_null()) return out;
    const json& v = j.at(key);
    if (!v.is_array()) Fail("field '" + Join(path, key) + "' is not a list");
    for (const json& e : v) {
      if (!e.is_string()) Fail("field '" + Join(path, key) + "' holds a non-text entry");
      out.push_back(e.get<std::string>());
    }
    return out;
  }
  template <typename F>
  auto Enum(const std::string& text, const std::string& path, F from_string) const {
    try {
      return from_string(text);
    } catch (const std::invalid_argument& e) {
      Fail("field '" + path + "': " + e.what());
    }
  }

  static std::string Join(const std::string& path, const char* key) { return path.empty() ? key : path + "." + key; }

 private:
  std::string name_;
};

// The `uncertainty` object (added with issue 14; older rigs have none).
calib::RigUncertainty UncertaintyFromJson(const json& j, const Reader& in) {
  const json& u = j.at("uncertainty");
  const std::string path = "uncertainty";
  if (!u.is_object()) in.Fail("field 'uncertainty' is not an object");
  calib::RigUncertainty out;
  out.plane_corner_sd_px = in.Num(u, path, "plane_corner_sd_px");
  out.lens_corner_sd_px = in.NumOr(u, path, "lens_corner_sd_px", 0.0);
  out.corner_height_sd_m = in.Num(u, path, "corner_height_sd_m");
  out.height_sd_at_corner_row_m = in.Num(u, path, "height_sd_at_corner_row_m");
  out.height_sd_100mm_m = in.Num(u, path, "height_sd_100mm_m");
  out.height_sd_300mm_m = in.Num(u, path, "height_sd_300mm_m");
  out.floor_sd_m = in.OptNum(u, path, "floor_sd_m");
  out.scale_rel_sd_centre = in.Num(u, path, "scale_rel_sd_centre");
  out.parameters = in.Texts(u, path, "parameters");
  const json& rows = in.Field(u, path, "covariance");
  if (!rows.is_array() || rows.size() != out.parameters.size()) {
    in.Fail("field 'uncertainty.covariance' is not " + std::to_string(out.parameters.size()) +
            " rows (one per parameter)");
  }
  for (size_t r = 0; r < rows.size(); ++r) {
    const json& row = rows.at(r);
    const std::string p = "uncertainty.covariance[" + std::to_string(r) + "]";
    if (!row.is_array() || row.size() != out.parameters.size()) {
      in.Fail("field '" + p + "' is not a row of " + std::to_string(out.parameters.size()) + " numbers");
    }
    for (size_t c = 0; c < row.size(); ++c)
      out.covariance.push_back(in.NumberAt(row.at(c), p + "[" + std::to_string(c) + "]"));
  }
  return out;
}

calib::Rig RigFromJson(const json& j, const Reader& in) {
  if (!j.is_object()) in.Fail("the rig file is not a JSON object");
  calib::Rig rig;
  const json& version = in.Field(j, "", "schema_version");
  if (!version.is_number_integer()) in.Fail("field 'schema_version' is not an integer");
  // Compared as JSON, not after get<int>(): 4294967297 would wrap to 1 and be taken for version 1.
  if (version != calib::Rig::kSchemaVersion) {
    in.Fail("unknown rig schema version " + version.dump() + " (this dropfit reads version " +
            std::to_string(calib::Rig::kSchemaVersion) + "); remake the rig with this dropfit's `calibrate`");
  }
  rig.schema_version = calib::Rig::kSchemaVersion;
  rig.tool_version = in.TextOr(j, "", "tool_version", "");

  const json& size = in.Field(j, "", "image_size_px");
  rig.image_size =
      cv::Size(in.PixelCount(size, "image_size_px", "width"), in.PixelCount(size, "image_size_px", "height"));

  const json& lens = in.Field(j, "", "lens");
  if (!lens.is_null()) {
    calib::LensModel model;
    model.camera_matrix = in.Matrix33(in.Field(lens, "lens", "camera_matrix_px"), "lens.camera_matrix_px");
    const json& dist = in.Field(lens, "lens", "distortion");
    if (!dist.is_array()) in.Fail("field 'lens.distortion' is not a list of numbers");
    for (size_t i = 0; i < dist.size(); ++i) {
      model.distortion.push_back(in.NumberAt(dist.at(i), "lens.distortion[" + std::to_string(i) + "]"));
    }
    rig.quality.distortion_terms = in.TextOr(lens, "lens", "distortion_terms", "");
    rig.lens = model;
  }

  const json& plane = in.Field(j, "", "plane");
  rig.plane_from_undistorted =
      in.Matrix33(in.Field(plane, "plane", "plane_from_undistorted"), "plane.plane_from_undistorted");
  rig.plane_rvec_rad = in.OptVector3(plane, "plane", "rvec_rad");
  rig.plane_tvec_m = in.OptVector3(plane, "plane", "tvec_m");
  rig.plane_view = in.TextOr(plane, "plane", "view", "");

  const json& vertical = in.Field(j, "", "vertical");
  rig.up = in.Enum(in.Text(vertical, "vertical", "up"), "vertical.up", calib::UpSideFromString);

  const json& floor = in.Field(j, "", "floor");
  rig.y_origin = in.Enum(in.Text(floor, "floor", "y_origin"), "floor.y_origin", calib::YOriginFromString);
  rig.corner_height_m = in.OptNum(floor, "floor", "corner_height_m");
  if (rig.y_origin == calib::YOrigin::kFloor && !rig.corner_height_m) {
    in.Fail("field 'floor.corner_height_m' is missing but 'floor.y_origin' is \"floor\"");
  }

  if (j.contains("board") && !j.at("board").is_null()) {
    const json& board = j.at("board");
    try {
      rig.board =
          calib::BoardSizeFromString(in.Text(board, "board", "inner_corners"), in.Num(board, "board", "square_m"));
    } catch (const std::invalid_argument& e) {
      in.Fail(std::string("field 'board': ") + e.what());
    }
  }
  rig.capture_fps = in.OptNum(j, "", "capture_fps");

  if (j.contains("quality") && j.at("quality").is_object()) {
    const json& q = j.at("quality");
    calib::RigQuality& out = rig.quality;
    out.rms_reprojection_px = in.NumOr(q, "quality", "rms_reprojection_px", std::nan(""));
    out.plane_rms_px = in.NumOr(q, "quality", "plane_rms_px", std::nan(""));
    out.square_error_mean_mm = in.NumOr(q, "quality", "square_error_mean_mm", std::nan(""));
    out.square_error_max_mm = in.NumOr(q, "quality", "square_error_max_mm", std::nan(""));
    out.metres_per_px_centre = in.NumOr(q, "quality", "metres_per_px_centre", std::nan(""));
    out.board_coverage_fraction = in.NumOr(q, "quality", "board_coverage_fraction", std::nan(""));
    out.views_coverage_fraction = in.NumOr(q, "quality", "views_coverage_fraction", std::nan(""));
    out.tilt_spread_deg = in.NumOr(q, "quality", "tilt_spread_deg", std::nan(""));
    out.lowest_corner_row_px = in.NumOr(q, "quality", "lowest_corner_row_px", std::nan(""));
    if (q.contains("views") && q.at("views").is_array()) {
      for (const json& v : q.at("views")) {
        out.view_names.push_back(in.TextOr(v, "quality.views[]", "name", ""));
        out.view_rms_px.push_back(in.NumOr(v, "quality.views[]", "rms_px", std::nan("")));
      }
    }
    out.dropped_views = in.Texts(q, "quality", "dropped_views");
  }

  if (j.contains("inputs") && j.at("inputs").is_array()) {
    for (const json& e : j.at("inputs")) {
      rig.input_hashes.emplace_back(in.TextOr(e, "inputs[]", "file", ""), in.TextOr(e, "inputs[]", "fnv1a64", ""));
    }
  }
  rig.warnings = in.Texts(j, "", "warnings");
  if (j.contains("calibrate_options") && j.at("calibrate_options").is_object()) {
    for (auto it = j.at("calibrate_options").begin(); it != j.at("calibrate_options").end(); ++it) {
      rig.settings.emplace_back(it.key(), it.value().is_string() ? it.value().get<std::string>() : it.value().dump());
    }
  }

  if (j.contains("uncertainty") && !j.at("uncertainty").is_null()) rig.uncertainty = UncertaintyFromJson(j, in);

  if (const auto problem = calib::ValidateRig(rig)) in.Fail(*problem);
  return rig;
}

}  // namespace

std::string RigToJson(const calib::Rig& rig) {
  ordered_json j;
  j["schema_version"] = rig.schema_version;
  j["tool_version"] = rig.tool_version;
  j["image_size_px"] = {{"width", rig.image_size.width}, {"height", rig.image_size.height}};
  if (rig.lens) {
    ordered_json dist = ordered_json::array();
    for (double d : rig.lens->distortion) dist.push_back(Number(d));
    j["lens"] = {{"camera_matrix_px", Matrix(rig.lens->camera_matrix)},
                 {"distortion", dist},
                 {"distortion_terms", rig.quality.distortion_terms}};
  } else {
    j["lens"] = nullptr;
  }
  j["plane"] = {{"view", rig.plane_view},
                {"plane_from_undistorted", Matrix(rig.plane_from_undistorted)},
                {"rvec_rad", Vector3(rig.plane_rvec_rad)},
                {"tvec_m", Vector3(rig.plane_tvec_m)}};
  ordered_json up_at_centre = nullptr;
  if (!calib::ValidateRig(rig)) {
    const cv::Vec2d d =
        calib::ImageUpDirection(rig, {0.5 * (rig.image_size.width - 1), 0.5 * (rig.image_size.height - 1)});
    up_at_centre = {Number(d[0]), Number(d[1])};
  }
  j["vertical"] = {{"up", calib::ToString(rig.up)}, {"image_up_at_centre", up_at_centre}};
  j["floor"] = {{"y_origin", calib::ToString(rig.y_origin)}, {"corner_height_m", Optional(rig.corner_height_m)}};
  j["board"] = {{"inner_corners", calib::BoardSizeToString(rig.board)}, {"square_m", Number(rig.board.square_m)}};
  j["capture_fps"] = Optional(rig.capture_fps);

  const calib::RigQuality& q = rig.quality;
  ordered_json views = ordered_json::array();
  for (size_t i = 0; i < q.view_names.size(); ++i) {
    views.push_back({{"name", q.view_names[i]}, {"rms_px", Number(i < q.view_rms_px.size() ? q.view_rms_px[i] : NAN)}});
  }
  j["quality"] = {{"rms_reprojection_px", Number(q.rms_reprojection_px)},
                  {"plane_rms_px", Number(q.plane_rms_px)},
                  {"square_error_mean_mm", Number(q.square_error_mean_mm)},
                  {"square_error_max_mm", Number(q.square_error_max_mm)},
                  {"metres_per_px_centre", Number(q.metres_per_px_centre)},
                  {"board_coverage_fraction", Number(q.board_coverage_fraction)},
                  {"views_coverage_fraction", Number(q.views_coverage_fraction)},
                  {"tilt_spread_deg", Number(q.tilt_spread_deg)},
                  {"lowest_corner_row_px", Number(q.lowest_corner_row_px)},
                  {"views", views},
                  {"dropped_views", q.dropped_views}};
  ordered_json inputs = ordered_json::array();
  for (const auto& [file, hash] : rig.input_hashes) inputs.push_back({{"file", file}, {"fnv1a64", hash}});
  j["inputs"] = inputs;
  j["warnings"] = rig.warnings;
  ordered_json settings = ordered_json::object();
  for (const auto& [name, value] : rig.settings) settings[name] = value;
  j["calibrate_options"] = settings;
  if (rig.uncertainty) {
    const calib::RigUncertainty& u = *rig.uncertainty;
    ordered_json rows = ordered_json::array();
    const size_t n = u.parameters.size();
    for (size_t r = 0; r < n; ++r) {
      ordered_json row = ordered_json::array();
      for (size_t c = 0; c < n && r * n + c < u.covariance.size(); ++c) row.push_back(Number(u.covariance[r * n + c]));
      rows.push_back(row);
    }
    j["uncertainty"] = {{"plane_corner_sd_px", Number(u.plane_corner_sd_px)},
                        {"lens_corner_sd_px", Number(u.lens_corner_sd_px)},
                        {"corner_height_sd_m", Number(u.corner_height_sd_m)},
                        {"height_sd_at_corner_row_m", Number(u.height_sd_at_corner_row_m)},
                        {"height_sd_100mm_m", Number(u.height_sd_100mm_m)},
                        {"height_sd_300mm_m", Number(u.height_sd_300mm_m)},
                        {"floor_sd_m", Optional(u.floor_sd_m)},
                        {"scale_rel_sd_centre", Number(u.scale_rel_sd_centre)},
                        {"parameters", u.parameters},
                        {"covariance", rows}};
  }
  return j.dump(2) + "\n";
}

calib::Rig ParseRigJson(const std::string& text, const std::string& display_name) {
  const Reader in(display_name);
  // Deeper nesting than any rig file has (it nests 4 levels: plane.plane_from_undistorted[r][c])
  // is refused while parsing: nlohmann's parser is iterative but dump() recurses, and a
  // million '[' under calibrate_options overflowed the stack (found while writing tests/fuzz).
  constexpr int kMaxDepth = 32;
  const auto limit_depth = [&](int depth, json::parse_event_t event, json&) {
    if ((event == json::parse_event_t::object_start || event == json::parse_event_t::array_start) &&
        depth >= kMaxDepth) {
      in.Fail("malformed JSON: nested deeper than " + std::to_string(kMaxDepth) + " levels");
    }
    return true;
  };
  json j;
  try {
    j = json::parse(text, limit_depth);
  } catch (const json::exception& e) {
    // Not only parse_error: a number beyond double's range ("1e400") throws out_of_range (406).
    // nlohmann's messages read "[json.exception.<kind>.<id>] <text>", e.g. "[json.exception.
    // parse_error.101] parse error at line L, column C: ..."; keep the text.
    std::string what = e.what();
    const auto end = what.find("] ");
    in.Fail("malformed JSON: " +
            (what.rfind("[json.exception.", 0) == 0 && end != std::string::npos ? what.substr(end + 2) : what));
  }
  return RigFromJson(j, in);
}

calib::Rig ReadRigFile(const std::filesystem::path& path) {
  std::ifstream file(path, std::ios::binary);
  if (!file) {
    throw std::runtime_error(path.string() + ": cannot open the rig file (" +
                             (std::filesystem::exists(path) ? "not readable" : "no such file") +
                             "); make one with `dropfit calibrate`");
  }
  std::ostringstream text;
  text << file.rdbuf();
  try {
    return ParseRigJson(text.str(), path.string());
  } catch (const std::runtime_error& e) {
    // Say what to do where the reader's message does not (issue 9).
    std::string message = e.what();
    if (message.find("calibrate`") == std::string::npos) {
      message += "; correct the file or make it again with `dropfit calibrate`";
    }
    throw std::runtime_error(message);
  }
}

void WriteRigFile(const std::filesystem::path& path, const calib::Rig& rig) {
  if (const auto problem = calib::ValidateRig(rig)) {
    throw std::invalid_argument("refusing to write rig file " + path.string() + ": " + *problem);
  }
  WriteFileAtomically(path, RigToJson(rig));
}

}  // namespace dropfit::cli
