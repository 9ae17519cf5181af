// Atomic output (write to a temporary file in the same folder, then rename: POSIX rename(2)
// replaces the target atomically; common practice, no source beyond POSIX.1-2017 rename()).
#include "cli/atomic_write.h"

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <sstream>

#include "tests/support/temp_dir.h"

namespace dropfit::cli {
namespace {

class AtomicWriteTest : public ::testing::Test {
 protected:
  size_t FilesInFolder() const {
    return static_cast<size_t>(std::distance(std::filesystem::directory_iterator(dir_), {}));
  }
  const test::TempDir tmp_{"atomic"};
  const std::filesystem::path dir_ = tmp_.path();
};

TEST_F(AtomicWriteTest, WritesAndReplacesAFile) {
  const auto path = dir_ / "result.json";
  WriteFileAtomically(path, std::string("first"));
  EXPECT_EQ(test::ReadFileBytes(path), "first");
  WriteFileAtomically(path, std::string("second"));
  EXPECT_EQ(test::ReadFileBytes(path), "second");
  EXPECT_EQ(FilesInFolder(), 1u);  // no temporary file left behind
}

TEST_F(AtomicWriteTest, AWriteThatFailsMidwayLeavesThePreviousFileIntact) {
  const auto path = dir_ / "summary.csv";
  WriteFileAtomically(path, std::string("good,old,data\n"));
  EXPECT_THROW(WriteFileAtomically(path,
                                   [](std::ostream& out) {
                                     out << "half,writ";
                                     throw std::runtime_error("disk gone");
                                   }),
               std::runtime_error);
  EXPECT_EQ(test::ReadFileBytes(path), "good,old,data\n");
  EXPECT_EQ(FilesInFolder(), 1u);  // the temporary file was removed
}

TEST_F(AtomicWriteTest, AnUnwritableFolderIsNamedInTheMessage) {
  const auto path = dir_ / "no_such_folder" / "x.json";
  try {
    WriteFileAtomically(path, std::string("x"));
    FAIL() << "no exception";
  } catch (const std::runtime_error& e) {
    EXPECT_EQ(std::string(e.what()), "cannot write " + path.string() + ": No such file or directory");
  }
}

}  // namespace
}  // namespace dropfit::cli
