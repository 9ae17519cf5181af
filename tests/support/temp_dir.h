#pragma once
// Test support (built only for tests and benches): a fresh temporary folder per test, removed
// when the object goes out of scope (unless DROPFIT_KEEP_TEST_DIRS is set, to look at it).

#include <filesystem>
#include <string>

namespace dropfit::test {

class TempDir {
 public:
  // Creates <system temp>/dropfit_<name>_<random>; the random part keeps parallel tests apart.
  explicit TempDir(const std::string& name);
  ~TempDir();
  TempDir(const TempDir&) = delete;
  TempDir& operator=(const TempDir&) = delete;
  const std::filesystem::path& path() const { return path_; }

 private:
  std::filesystem::path path_;
};

}  // namespace dropfit::test
