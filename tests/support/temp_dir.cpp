#include "tests/support/temp_dir.h"

#include <cstdlib>
#include <fstream>
#include <random>
#include <sstream>

namespace dropfit::test {

TempDir::TempDir(const std::string& name) {
  std::random_device rd;
  const unsigned long long tag = (static_cast<unsigned long long>(rd()) << 32) ^ rd();
  path_ = std::filesystem::temp_directory_path() / ("dropfit_" + name + "_" + std::to_string(tag));
  std::filesystem::create_directories(path_);
}

TempDir::~TempDir() {
  if (std::getenv("DROPFIT_KEEP_TEST_DIRS")) return;
  std::error_code ec;
  std::filesystem::remove_all(path_, ec);
}

std::string ReadFileBytes(const std::filesystem::path& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream s;
  s << in.rdbuf();
  return s.str();
}

}  // namespace dropfit::test
