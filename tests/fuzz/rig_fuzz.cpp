// libFuzzer target: the rig-file reader (cli/rig_io.h, ParseRigJson) on arbitrary bytes.
//
// For any input the reader either throws std::runtime_error whose message starts with the
// file's name (rig_io.h), or returns a rig that calib::ValidateRig accepts. An accepted rig
// is then written back (RigToJson, what `dropfit calibrate` writes) and read again: the
// written text must be read without complaint and written again unchanged. Anything else is
// a finding: a crash, a sanitizer report (ASan, UBSan, LeakSanitizer), another exception
// escaping (std::bad_alloc, nlohmann's type_error, cv::Exception...), a hang (-timeout), or a
// broken property (abort() makes libFuzzer save the input).
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <stdexcept>
#include <string>
#include <string_view>

#include "calib/rig.h"
#include "cli/rig_io.h"

namespace {

const char kDisplayName[] = "fuzz/rig.json";

[[noreturn]] void Finding(const char* what, const std::string& detail) {
  std::fprintf(stderr, "rig_fuzz: %s: %s\n", what, detail.c_str());
  std::abort();
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  const std::string text(reinterpret_cast<const char*>(data), size);
  dropfit::calib::Rig rig;
  try {
    rig = dropfit::cli::ParseRigJson(text, kDisplayName);
  } catch (const std::runtime_error& e) {
    if (std::string_view(e.what()).substr(0, sizeof(kDisplayName) - 1) != kDisplayName) {
      Finding("error names no file", e.what());
    }
    return 0;
  }
  if (const auto problem = dropfit::calib::ValidateRig(rig)) Finding("accepted an invalid rig", *problem);
  const std::string written = dropfit::cli::RigToJson(rig);
  dropfit::calib::Rig again;
  try {
    again = dropfit::cli::ParseRigJson(written, "fuzz/rewritten.json");
  } catch (const std::runtime_error& e) {
    Finding("cannot read back what the writer wrote", std::string(e.what()) + "\n" + written);
  }
  const std::string rewritten = dropfit::cli::RigToJson(again);
  if (rewritten != written) Finding("write-read-write changes the file", written + "\n---\n" + rewritten);
  return 0;
}
