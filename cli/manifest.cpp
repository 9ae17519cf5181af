#include "cli/manifest.h"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <map>
#include <sstream>

namespace dropfit::cli {

namespace {

struct CsvRecord {
  int line = 0;  // line where the record starts
  std::vector<std::string> fields;
  bool comment_or_blank = false;
};

std::string Trim(std::string_view s) {
  size_t b = 0, e = s.size();
  while (b < e && (s[b] == ' ' || s[b] == '\t')) ++b;
  while (e > b && (s[e - 1] == ' ' || s[e - 1] == '\t')) --e;
  return std::string(s.substr(b, e - b));
}

// Splits CSV text into records (quoting of "Common Format and MIME Type for Comma-Separated Values
// (CSV) Files", RFC 4180; CR before LF dropped).
std::vector<CsvRecord> SplitRecords(std::string_view text, const std::string& display_name) {
  std::vector<CsvRecord> records;
  size_t i = 0;
  int line = 1;
  while (i < text.size()) {
    CsvRecord rec;
    rec.line = line;
    // Comment and blank lines are recognised before any field parsing.
    size_t j = i;
    while (j < text.size() && (text[j] == ' ' || text[j] == '\t')) ++j;
    if (j >= text.size() || text[j] == '\n' || text[j] == '\r' || text[j] == '#') {
      const size_t eol = text.find('\n', i);
      i = eol == std::string_view::npos ? text.size() : eol + 1;
      ++line;
      rec.comment_or_blank = true;
      records.push_back(std::move(rec));
      continue;
    }
    std::string field;
    bool in_quotes = false, field_was_quoted = false;
    bool field_blank = true;  // only blanks so far: a '"' here opens a quoted field
    bool done = false;
    while (!done) {
      if (i >= text.size()) {
        if (in_quotes) {
          throw ManifestStructureError(display_name + ":" + std::to_string(rec.line) +
                                       ": a quoted field is never closed; add the closing '\"'");
        }
        rec.fields.push_back(field_was_quoted ? field : Trim(field));
        done = true;
        break;
      }
      const char c = text[i];
      if (in_quotes) {
        if (c == '"') {
          if (i + 1 < text.size() && text[i + 1] == '"') {
            field += '"';
            i += 2;
          } else {
            in_quotes = false;
            ++i;
          }
        } else {
          if (c == '\n') ++line;
          field += c;
          ++i;
        }
        continue;
      }
      // A flag, not Trim(field).empty(): that copy per '"' made a long line of quotes quadratic
      // (a 1 MB line took 17 s; found while writing tests/fuzz).
      if (c == '"' && field_blank && !field_was_quoted) {
        in_quotes = true;
        field_was_quoted = true;
        field.clear();
        ++i;
      } else if (c == ',') {
        rec.fields.push_back(field_was_quoted ? field : Trim(field));
        field.clear();
        field_was_quoted = false;
        field_blank = true;
        ++i;
      } else if (c == '\r' && i + 1 < text.size() && text[i + 1] == '\n') {
        ++i;  // CRLF: the LF ends the record
      } else if (c == '\n') {
        rec.fields.push_back(field_was_quoted ? field : Trim(field));
        ++i;
        ++line;
        done = true;
      } else if (c == '\0') {
        throw ManifestStructureError(display_name + ":" + std::to_string(line) +
                                     ": holds a NUL byte: this is not a CSV text file");
      } else {
        if (!field_was_quoted) field += c;
        if (c != ' ' && c != '\t') field_blank = false;
        ++i;
      }
    }
    records.push_back(std::move(rec));
  }
  return records;
}

bool IsValidUtf8(std::string_view s) {
  size_t i = 0;
  while (i < s.size()) {
    const auto c = static_cast<unsigned char>(s[i]);
    const size_t extra = c < 0x80 ? 0 : (c >> 5) == 0x6 ? 1 : (c >> 4) == 0xE ? 2 : (c >> 3) == 0x1E ? 3 : 4;
    if (extra == 4 || i + extra >= s.size()) return false;
    for (size_t k = 1; k <= extra; ++k) {
      if ((static_cast<unsigned char>(s[i + k]) >> 6) != 0x2) return false;
    }
    i += extra + 1;
  }
  return true;
}

enum class Column {
  kClip,
  kDropHeight,
  kMass,
  kFps,
  kSpecimen,
  kFreeRadius,
  kFreeRadiusSd,
  kTreadWidth,
  kSectionRadius,
  kMarkerOffset,
  kGravity,
  kMarker,
  kMarkerU,
  kMarkerV,
  kFpsTolerance,
  kGravitySd
};

const std::vector<std::pair<std::string, Column>>& KnownColumns() {
  static const std::vector<std::pair<std::string, Column>> columns{
      {"clip", Column::kClip},
      {"drop_height_m", Column::kDropHeight},
      {"mass_kg", Column::kMass},
      {"capture_fps", Column::kFps},
      {"specimen", Column::kSpecimen},
      {"free_radius_m", Column::kFreeRadius},
      {"free_radius_sd_m", Column::kFreeRadiusSd},
      {"tread_width_m", Column::kTreadWidth},
      {"section_radius_m", Column::kSectionRadius},
      {"marker_offset_m", Column::kMarkerOffset},
      {"gravity_mps2", Column::kGravity},
      {"gravity_sd_mps2", Column::kGravitySd},
      {"capture_fps_tolerance_ppm", Column::kFpsTolerance},
      {"marker", Column::kMarker},
      {"marker_u_px", Column::kMarkerU},
      {"marker_v_px", Column::kMarkerV},
  };
  return columns;
}

struct NumberSpec {
  const char* what;  // what the number is, for "what to do"
  const char* unit;
};

// Parses a strictly positive finite number; returns an error text (empty when fine).
std::string ParsePositive(const std::string& text, const NumberSpec& spec, double& value) {
  if (text.empty()) return std::string("is empty; give the ") + spec.what + " in " + spec.unit;
  const char* begin = text.data();
  const char* end = begin + text.size();
  auto [ptr, ec] = std::from_chars(begin, end, value);
  if (ec != std::errc() || ptr != end || !std::isfinite(value)) {
    return "'" + text + "' is not a number; give the " + spec.what + " in " + spec.unit;
  }
  if (value <= 0) return "'" + text + "' is not positive; give the " + spec.what + " in " + spec.unit;
  return {};
}

// A plausible range of a quantity given in SI units; a value outside it is most often a value
// typed in millimetres or grams (the ranges: README "The clip folder", docs/formats.md).
struct PlausibleRange {
  double min = 0, max = 0;
  const char* unit_short;  // "m", "kg"
  const char* hint;        // what the typical slip is
};

// Parses like ParsePositive, then fails a value outside `range` with the hint.
std::string ParseInRange(const std::string& text, const NumberSpec& spec, const PlausibleRange& range, double& value) {
  std::string err = ParsePositive(text, spec, value);
  if (!err.empty()) return err;
  if (value < range.min || value > range.max) {
    char buf[160];
    std::snprintf(buf, sizeof buf, "'%s' is outside the plausible %g-%g %s; %s Give the ", text.c_str(), range.min,
                  range.max, range.unit_short, range.hint);
    return std::string(buf) + spec.what + " in " + spec.unit;
  }
  return {};
}

constexpr PlausibleRange kDropHeightRange{analysis::kMinDropHeightM, analysis::kMaxDropHeightM, "m",
                                          analysis::kMillimetresHint};
constexpr PlausibleRange kMassRange{analysis::kMinMassKg, analysis::kMaxMassKg, "kg",
                                    "did you give millimetres? (or grams?)"};
constexpr PlausibleRange kRadiusRange{analysis::kMinWheelLengthM, analysis::kMaxWheelLengthM, "m",
                                      analysis::kMillimetresHint};

// Parses a finite number of either sign whose magnitude is at most `max_abs`; returns an error
// text (empty when fine).
std::string ParseSigned(const std::string& text, const NumberSpec& spec, double max_abs, double& value) {
  const char* begin = text.data();
  const char* end = begin + text.size();
  auto [ptr, ec] = std::from_chars(begin, end, value);
  if (ec != std::errc() || ptr != end || !std::isfinite(value)) {
    return "'" + text + "' is not a number; give the " + spec.what + " in " + spec.unit;
  }
  if (std::abs(value) > max_abs) {
    char limit[32];
    std::snprintf(limit, sizeof limit, "%g", max_abs);
    return "'" + text + "' is outside [-" + limit + ", " + limit + "]; give the " + spec.what + " in " + spec.unit;
  }
  return {};
}

bool LeavesFolder(const std::filesystem::path& clip) {
  if (clip.is_absolute() || clip.has_root_name() || clip.has_root_directory()) return true;
  int depth = 0;
  for (const auto& part : clip.lexically_normal()) {
    if (part == "..") {
      if (--depth < 0) return true;
    } else if (part != "." && !part.empty()) {
      ++depth;
    }
  }
  return false;
}

}  // namespace

std::string ClipIdOf(const std::filesystem::path& clip) {
  std::filesystem::path p = clip.lexically_normal();
  if (!p.has_filename()) p = p.parent_path();  // "seq/" -> "seq"
  // The error_code form: a name the file system refuses (too long) is no folder, not an exception.
  std::error_code ec;
  if (std::filesystem::is_directory(p, ec)) return p.filename().string();
  return p.stem().string();
}

namespace {

// "<file>:<line>: ", the start of every row message.
std::string Where(const std::string& display_name, int line) {
  return display_name + ":" + std::to_string(line) + ": ";
}

// Records the first failure of a row (later ones are not reported).
void Fail(ManifestRow& row, const std::string& where, const std::string& column, const std::string& what) {
  if (row.error.empty()) row.error = where + "column '" + column + "': " + what;
}

// The header row: where it is among the records and where each known column is.
struct Header {
  size_t record = 0;  // index into the records
  std::vector<std::string> fields;
  int line = 0;
  std::map<Column, size_t> index;
};

// Finds the header (the first record that is not a comment or blank), maps its columns, warns
// about unknown ones and checks that the required ones are there. Throws ManifestStructureError.
Header ReadHeader(const std::vector<CsvRecord>& records, const std::string& display_name,
                  std::vector<std::string>& warnings) {
  auto header_it = std::find_if(records.begin(), records.end(), [](const CsvRecord& r) { return !r.comment_or_blank; });
  if (header_it == records.end()) {
    throw ManifestStructureError(display_name +
                                 ": has no header row; the first line must name the columns, e.g. "
                                 "clip,drop_height_m,mass_kg");
  }
  Header header;
  header.record = static_cast<size_t>(header_it - records.begin());
  header.fields = header_it->fields;
  header.line = header_it->line;
  std::map<std::string, int> seen;
  for (size_t c = 0; c < header.fields.size(); ++c) {
    const std::string& name = header.fields[c];
    if (seen[name]++ > 0) {
      throw ManifestStructureError(display_name + ":" + std::to_string(header.line) + ": column '" + name +
                                   "' is named twice; keep one");
    }
    bool known = false;
    for (const auto& [known_name, column] : KnownColumns()) {
      if (name == known_name) {
        header.index[column] = c;
        known = true;
      }
    }
    if (!known) {
      warnings.push_back(display_name + ":" + std::to_string(header.line) + ": column '" + name +
                         "' is not one dropfit reads; it is ignored");
    }
  }
  std::string found;
  for (const auto& f : header.fields) found += (found.empty() ? "" : ", ") + f;
  for (const char* required : {"clip", "drop_height_m", "mass_kg"}) {
    if (std::none_of(header.fields.begin(), header.fields.end(), [&](const std::string& f) { return f == required; })) {
      throw ManifestStructureError(display_name + ":" + std::to_string(header.line) + ": required column '" + required +
                                   "' is missing (found: " + found +
                                   "); the header needs clip, drop_height_m and mass_kg");
    }
  }
  return header;
}

// A row whose field count differs from the header's: failed, with its clip when that column
// is there, so that the failure can name the clip.
ManifestRow RowWithWrongFieldCount(const CsvRecord& record, const Header& header, const std::filesystem::path& folder,
                                   const std::string& display_name) {
  ManifestRow row;
  row.line = record.line;
  const auto& f = record.fields;
  row.error = Where(display_name, row.line) + "has " + std::to_string(f.size()) + " fields but the header has " +
              std::to_string(header.fields.size()) + "; check for a missing or extra comma";
  const auto clip = header.index.find(Column::kClip);
  if (!f.empty() && clip != header.index.end() && clip->second < f.size()) {
    row.clip = f[clip->second];
    row.clip_id = ClipIdOf(folder / row.clip);
  }
  return row;
}

// The clip column of a full row: not empty, inside the folder, and (check_files) there.
void ReadClipColumn(ManifestRow& row, const std::string& clip, const std::filesystem::path& folder, bool check_files,
                    const std::string& where) {
  row.clip = clip;
  if (row.clip.empty()) {
    Fail(row, where, "clip", "is empty; give the clip's file or folder name, relative to the manifest's folder");
  } else if (LeavesFolder(row.clip)) {
    Fail(row, where, "clip",
         "'" + row.clip + "' leaves the clip folder; put the clip inside " + folder.string() +
             " and give its path relative to it");
  } else {
    row.clip_id = ClipIdOf(folder / std::filesystem::path(row.clip).lexically_normal());
    // The error_code form: a name the file system refuses (ENAMETOOLONG; found while writing
    // tests/fuzz) fails this row instead of throwing out of the reader.
    std::error_code ec;
    if (check_files && !std::filesystem::exists(folder / std::filesystem::path(row.clip).lexically_normal(), ec)) {
      Fail(row, where, "clip",
           "'" + row.clip + "' does not exist in " + folder.string() +
               (ec ? " (" + ec.message() + ")" : std::string()) + "; check the file name");
    }
  }
}

// The number columns of a full row: drop height and mass (required), capture rate and the
// radii (optional, may be empty).
void ReadNumberColumns(ManifestRow& row, const std::vector<std::string>& f, const Header& header,
                       const std::string& where) {
  auto get = [&](Column c) -> const std::string& { return f[header.index.at(c)]; };
  double value = 0;
  std::string err = ParseInRange(get(Column::kDropHeight), {"nominal drop height", "metres"}, kDropHeightRange, value);
  if (err.empty())
    row.drop_height_m = value;
  else
    Fail(row, where, "drop_height_m", err);
  err = ParseInRange(get(Column::kMass), {"dropped mass", "kilograms"}, kMassRange, value);
  if (err.empty())
    row.mass_kg = value;
  else
    Fail(row, where, "mass_kg", err);
  // The lengths of the wheel share one plausible range (a hint for values given in millimetres).
  const std::tuple<Column, const char*, std::optional<double>*, NumberSpec, const PlausibleRange*> optional_numbers[] =
      {
          {Column::kFps, "capture_fps", &row.capture_fps, {"true capture rate", "frames per second"}, nullptr},
          {Column::kFreeRadius,
           "free_radius_m",
           &row.free_radius_m,
           {"unloaded radius (hub to tread)", "metres"},
           &kRadiusRange},
          {Column::kFreeRadiusSd,
           "free_radius_sd_m",
           &row.free_radius_sd_m,
           {"standard uncertainty of the unloaded radius", "metres"},
           nullptr},
          {Column::kTreadWidth, "tread_width_m", &row.tread_width_m, {"tread width", "metres"}, &kRadiusRange},
          {Column::kSectionRadius,
           "section_radius_m",
           &row.section_radius_m,
           {"tyre section radius", "metres"},
           &kRadiusRange},
          {Column::kGravity, "gravity_mps2", &row.gravity_mps2, {"local gravity", "m/s^2"}, nullptr},
          {Column::kGravitySd,
           "gravity_sd_mps2",
           &row.gravity_sd_mps2,
           {"standard uncertainty of the local gravity", "m/s^2"},
           nullptr},
          {Column::kFpsTolerance,
           "capture_fps_tolerance_ppm",
           &row.capture_fps_tolerance_ppm,
           {"tolerance of the camera's frame clock", "parts per million"},
           nullptr},
      };
  for (const auto& [column, name, target, spec, range] : optional_numbers) {
    if (!header.index.count(column) || get(column).empty()) continue;
    err = range ? ParseInRange(get(column), spec, *range, value) : ParsePositive(get(column), spec, value);
    if (err.empty())
      *target = value;
    else
      Fail(row, where, name, err + " (or leave it empty)");
  }
  // The marker's plane: signed, toward the camera positive (calib/rig.h, "The marker's plane").
  if (header.index.count(Column::kMarkerOffset) && !get(Column::kMarkerOffset).empty()) {
    err = ParseSigned(
        get(Column::kMarkerOffset),
        {"offset of the hub marker's plane from the calibrated plane (toward the camera positive)", "metres"},
        kMaxMarkerOffsetM, value);
    if (err.empty())
      row.marker_offset_m = value;
    else
      Fail(row, where, "marker_offset_m", err + " (or leave it empty)");
  }
}

// The marker columns: its kind (one of kManifestMarkerKinds) and its start point (both or none).
void ReadMarkerColumns(ManifestRow& row, const std::vector<std::string>& f, const Header& header,
                       const std::string& where) {
  const auto field = [&](Column c) -> std::string {
    const auto it = header.index.find(c);
    return it == header.index.end() ? std::string() : f[it->second];
  };
  const std::string kind = field(Column::kMarker);
  if (!kind.empty()) {
    std::string valid;
    bool known = false;
    for (const char* k : kManifestMarkerKinds) {
      valid += (valid.empty() ? "" : ", ") + std::string(k);
      known |= kind == k;
    }
    if (known) {
      row.marker = kind;
    } else {
      Fail(row, where, "marker", "'" + kind + "' is not a marker kind; valid: " + valid + " (or leave it empty)");
    }
  }
  const std::pair<Column, const char*> coords[] = {{Column::kMarkerU, "marker_u_px"},
                                                   {Column::kMarkerV, "marker_v_px"}};
  std::optional<double>* targets[] = {&row.marker_u_px, &row.marker_v_px};
  for (int i = 0; i < 2; ++i) {
    const std::string text = field(coords[i].first);
    if (text.empty()) continue;
    double value = 0;
    const char* end = text.data() + text.size();
    auto [ptr, ec] = std::from_chars(text.data(), end, value);
    if (ec != std::errc() || ptr != end || !std::isfinite(value) || value < 0) {
      Fail(row, where, coords[i].second,
           "'" + text +
               "' is not a pixel coordinate (a number >= 0); give the marker's centre in the first frames "
               "in pixels (or leave it empty)");
    } else {
      *targets[i] = value;
    }
  }
  if (row.marker_u_px.has_value() != row.marker_v_px.has_value()) {
    Fail(row, where, row.marker_u_px ? "marker_v_px" : "marker_u_px",
         "is empty but its partner is given; give both marker_u_px and marker_v_px, or neither");
  } else if (row.marker == "template" && !row.marker_u_px) {
    Fail(row, where, "marker",
         "'template' needs the patch to follow: give marker_u_px and marker_v_px (its centre in the first frames)");
  }
}

// A row with as many fields as the header.
ManifestRow ReadFullRow(const CsvRecord& record, const Header& header, const std::filesystem::path& folder,
                        const std::string& display_name, bool check_files) {
  ManifestRow row;
  row.line = record.line;
  const std::string where = Where(display_name, row.line);
  ReadClipColumn(row, record.fields[header.index.at(Column::kClip)], folder, check_files, where);
  ReadNumberColumns(row, record.fields, header, where);
  ReadMarkerColumns(row, record.fields, header, where);
  const auto specimen = header.index.find(Column::kSpecimen);
  if (specimen != header.index.end()) row.specimen = record.fields[specimen->second];
  return row;
}

// Fails a row whose clip id an earlier full row already used (this failure replaces any other).
void CheckClipIdUnique(ManifestRow& row, std::map<std::string, int>& first_line_of_id,
                       const std::string& display_name) {
  if (row.clip_id.empty()) return;
  auto [pos, inserted] = first_line_of_id.emplace(row.clip_id, row.line);
  if (!inserted) {
    row.error = Where(display_name, row.line) + "column 'clip': clip id '" + row.clip_id +
                "' is already used at line " + std::to_string(pos->second) +
                "; remove the duplicate row or rename the clip";
  }
}

}  // namespace

Manifest ParseManifest(std::string_view text, const std::filesystem::path& folder, const std::string& display_name,
                       bool check_files) {
  Manifest manifest;
  manifest.folder = folder;
  manifest.display_name = display_name;
  if (text.size() >= 3 && text.substr(0, 3) == "\xEF\xBB\xBF") text.remove_prefix(3);
  if (!IsValidUtf8(text)) {
    throw ManifestStructureError(display_name + ": is not UTF-8 text; save the manifest as UTF-8 CSV");
  }
  const std::vector<CsvRecord> records = SplitRecords(text, display_name);
  const Header header = ReadHeader(records, display_name, manifest.warnings);
  std::map<std::string, int> first_line_of_id;
  for (size_t r = header.record + 1; r < records.size(); ++r) {
    const CsvRecord& record = records[r];
    if (record.comment_or_blank) continue;
    if (record.fields.size() != header.fields.size()) {
      manifest.rows.push_back(RowWithWrongFieldCount(record, header, folder, display_name));
      continue;
    }
    ManifestRow row = ReadFullRow(record, header, folder, display_name, check_files);
    CheckClipIdUnique(row, first_line_of_id, display_name);
    manifest.rows.push_back(std::move(row));
  }
  if (manifest.rows.empty()) {
    manifest.warnings.push_back(display_name + ": lists no clips");
  }
  return manifest;
}

Manifest ReadManifest(const std::filesystem::path& folder) {
  const std::filesystem::path file = folder / "manifest.csv";
  const std::string display_name = file.string();
  if (!std::filesystem::is_directory(folder)) {
    throw ManifestStructureError(folder.string() + ": is not a folder; give the folder that holds manifest.csv");
  }
  std::ifstream in(file, std::ios::binary);
  if (!in) {
    throw ManifestStructureError(display_name + ": cannot be read; the clip folder needs a manifest.csv (see README)");
  }
  std::ostringstream ss;
  ss << in.rdbuf();
  return ParseManifest(ss.str(), folder, display_name, true);
}

}  // namespace dropfit::cli
