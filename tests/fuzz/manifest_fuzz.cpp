// libFuzzer target: the manifest reader (cli/manifest.h, ParseManifest) on arbitrary bytes.
//
// The contract (docs/formats.md, "Manifest faults" and "Exit status") allows two outcomes for any input: a
// ManifestStructureError naming the file, or a Manifest whose rows are each usable or carry a
// message naming the file and line. Anything else is a finding: a crash, a sanitizer report
// (ASan, UBSan, LeakSanitizer), another exception escaping, a hang (-timeout), or a broken
// invariant of a usable row (checked below; abort() makes libFuzzer save the input).
//
// The clip folder is a real, small temporary folder, so the row checks that touch the file
// system (does the clip exist, is it a folder of images) run as they do in `dropfit run`.
#include <unistd.h>

#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <optional>
#include <set>
#include <string>
#include <string_view>

#include "cli/manifest.h"

namespace {

namespace fs = std::filesystem;
using dropfit::cli::Manifest;
using dropfit::cli::ManifestRow;
using dropfit::cli::ManifestStructureError;

const char kDisplayName[] = "fuzz/manifest.csv";

fs::path g_folder;

void RemoveFolder() {
  std::error_code ec;
  fs::remove_all(g_folder, ec);
}

// A clip folder like a user's: two video files and one image-sequence folder, as in the
// corpus's manifests.
const fs::path& Folder() {
  if (g_folder.empty()) {
    g_folder = fs::temp_directory_path() / ("dropfit_manifest_fuzz_" + std::to_string(::getpid()));
    fs::create_directories(g_folder / "seq_01");
    for (const char* name : {"a.avi", "b.mp4", "drop_h150mm_r1.mp4", "seq_01/frame_0001.png"}) {
      std::ofstream(g_folder / name) << "x";
    }
    std::atexit(RemoveFolder);
  }
  return g_folder;
}

[[noreturn]] void Finding(const char* what, const std::string& detail) {
  std::fprintf(stderr, "manifest_fuzz: %s: %s\n", what, detail.c_str());
  std::abort();
}

bool StartsWith(std::string_view text, std::string_view prefix) { return text.substr(0, prefix.size()) == prefix; }

bool PositiveFinite(double v) { return std::isfinite(v) && v > 0; }
bool PositiveFiniteOrAbsent(const std::optional<double>& v) { return !v || PositiveFinite(*v); }

void CheckManifest(const Manifest& m) {
  std::set<std::string> usable_ids;
  int previous_line = 0;
  for (const ManifestRow& row : m.rows) {
    if (row.line <= previous_line) Finding("row lines do not increase", std::to_string(row.line));
    previous_line = row.line;
    if (!row.ok()) {
      if (!StartsWith(row.error, std::string(kDisplayName) + ":")) Finding("row error names no file", row.error);
      continue;
    }
    // A usable row is one `dropfit run` will analyse: every number it uses must be usable.
    if (row.clip.empty() || row.clip_id.empty()) Finding("usable row without a clip", row.clip);
    if (!PositiveFinite(row.drop_height_m) || !PositiveFinite(row.mass_kg)) {
      Finding("usable row with a bad height or mass", row.clip);
    }
    if (!PositiveFiniteOrAbsent(row.capture_fps) || !PositiveFiniteOrAbsent(row.free_radius_m) ||
        !PositiveFiniteOrAbsent(row.tread_width_m) || !PositiveFiniteOrAbsent(row.section_radius_m)) {
      Finding("usable row with a bad optional number", row.clip);
    }
    // The path the pipeline opens (cli/clip_records.cpp, ClipRequestFor): lexically normalised, so
    // "x/../a.avi" is a.avi even when no x/ exists.
    std::error_code ec;
    if (!fs::exists(m.folder / fs::path(row.clip).lexically_normal(), ec)) {
      Finding("usable row whose clip does not exist", row.clip);
    }
    if (!usable_ids.insert(row.clip_id).second) Finding("two usable rows share a clip id", row.clip_id);
  }
  for (const std::string& w : m.warnings) {
    if (!StartsWith(w, kDisplayName)) Finding("warning names no file", w);
  }
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  const std::string_view text(reinterpret_cast<const char*>(data), size);
  try {
    CheckManifest(dropfit::cli::ParseManifest(text, Folder(), kDisplayName, /*check_files=*/true));
  } catch (const ManifestStructureError& e) {
    if (!StartsWith(e.what(), kDisplayName)) Finding("structure error names no file", e.what());
  }
  return 0;
}
