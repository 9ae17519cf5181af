#pragma once
// Test support (built only for tests and benches): a fresh temporary folder per test, removed
// when the object goes out of scope (unless DROPFIT_KEEP_TEST_DIRS is set, to look at it), and
// reading a file the test wrote.

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

// The whole content of a file, as bytes (empty when it cannot be read).
std::string ReadFileBytes(const std::filesystem::path& path);

}  // namespace dropfit::test
