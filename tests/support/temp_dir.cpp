#include "tests/support/temp_dir.h"

#include <cstdlib>
#include <random>

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

}  // namespace dropfit::test
