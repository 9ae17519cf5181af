// The manifest reader against docs/formats.md ("manifest.csv", "Manifest faults", "Exit status"):
// required columns, comment lines, UTF-8 BOM, CRLF, quoted fields (RFC 4180, Shafranovich
// 2005: "" inside quotes is one quote), structure errors that stop the command, row errors
// that fail one clip only.
#include "cli/manifest.h"

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>

#include "tests/support/temp_dir.h"

namespace dropfit::cli {
namespace {

class ManifestTest : public ::testing::Test {
 protected:
  void SetUp() override {
    for (const char* name : {"a.avi", "b.avi", "c.mov"}) std::ofstream(dir_ / name) << "x";
    std::filesystem::create_directories(dir_ / "seq_01");
  }
  Manifest Parse(const std::string& text) { return ParseManifest(text, dir_, "m.csv"); }
  std::string StructureError(const std::string& text) {
    try {
      Parse(text);
    } catch (const ManifestStructureError& e) {
      return e.what();
    }
    return "(no error)";
  }
  const test::TempDir tmp_{"manifest"};
  const std::filesystem::path dir_ = tmp_.path();
};

TEST_F(ManifestTest, ReadsEveryColumnOfAGoodManifest) {
  const Manifest m = Parse(
      "clip,drop_height_m,mass_kg,capture_fps,specimen,free_radius_m,tread_width_m,section_radius_m\n"
      "a.avi,0.3,12.5,2000,wheel A,0.2,0.05,\n"
      "seq_01,0.4,12.5,,wheel A,0.2,,0.04\n");
  ASSERT_EQ(m.rows.size(), 2u);
  const ManifestRow& a = m.rows[0];
  EXPECT_TRUE(a.ok()) << a.error;
  EXPECT_EQ(a.line, 2);
  EXPECT_EQ(a.clip_id, "a");
  EXPECT_DOUBLE_EQ(a.drop_height_m, 0.3);
  EXPECT_DOUBLE_EQ(a.mass_kg, 12.5);
  EXPECT_DOUBLE_EQ(a.capture_fps.value(), 2000.0);
  EXPECT_EQ(a.specimen, "wheel A");
  EXPECT_DOUBLE_EQ(a.free_radius_m.value(), 0.2);
  EXPECT_DOUBLE_EQ(a.tread_width_m.value(), 0.05);
  EXPECT_FALSE(a.section_radius_m.has_value());
  const ManifestRow& seq = m.rows[1];
  EXPECT_TRUE(seq.ok()) << seq.error;
  EXPECT_EQ(seq.clip_id, "seq_01");  // an image-sequence folder's id is its name
  EXPECT_FALSE(seq.capture_fps.has_value());
  EXPECT_DOUBLE_EQ(seq.section_radius_m.value(), 0.04);
}

TEST_F(ManifestTest, SkipsCommentsAndBlankLinesAndKeepsLineNumbers) {
  const Manifest m = Parse("# test day 3\nclip,mass_kg,drop_height_m\n\n  # repeat\nb.avi,10,0.5\n");
  ASSERT_EQ(m.rows.size(), 1u);
  EXPECT_EQ(m.rows[0].line, 5);
  EXPECT_TRUE(m.rows[0].ok());
  EXPECT_DOUBLE_EQ(m.rows[0].mass_kg, 10.0);
}

TEST_F(ManifestTest, AcceptsAByteOrderMarkAndCrlfLineEnds) {
  const Manifest m = Parse(
      "\xEF\xBB\xBF"
      "clip,drop_height_m,mass_kg\r\na.avi,0.3,12\r\nb.avi,0.4,12\r\n");
  ASSERT_EQ(m.rows.size(), 2u);
  EXPECT_TRUE(m.rows[0].ok()) << m.rows[0].error;
  EXPECT_TRUE(m.rows[1].ok()) << m.rows[1].error;
  EXPECT_DOUBLE_EQ(m.rows[1].mass_kg, 12.0);
}

TEST_F(ManifestTest, ReadsQuotedFieldsWithCommasAndQuotes) {
  const Manifest m = Parse("clip,drop_height_m,mass_kg,specimen\n\"a.avi\",0.3,12,\"wheel \"\"B\"\", 2 bar\"\n");
  ASSERT_EQ(m.rows.size(), 1u);
  EXPECT_TRUE(m.rows[0].ok()) << m.rows[0].error;
  EXPECT_EQ(m.rows[0].specimen, "wheel \"B\", 2 bar");
}

TEST_F(ManifestTest, AMissingRequiredColumnStopsTheCommand) {
  EXPECT_EQ(StructureError("clip,drop_height_m\na.avi,0.3\n"),
            "m.csv:1: required column 'mass_kg' is missing (found: clip, drop_height_m); the header needs "
            "clip, drop_height_m and mass_kg");
}

TEST_F(ManifestTest, AnEmptyFileStopsTheCommand) {
  EXPECT_EQ(StructureError("# only a comment\n"),
            "m.csv: has no header row; the first line must name the columns, e.g. clip,drop_height_m,mass_kg");
}

TEST_F(ManifestTest, BinaryDataStopsTheCommand) {
  EXPECT_EQ(StructureError(std::string("clip,drop\xff\xfe", 11)),
            "m.csv: is not UTF-8 text; save the manifest as UTF-8 CSV");
  EXPECT_EQ(StructureError(std::string("clip,drop_height_m,mass_kg\na\0b,1,1\n", 36)),
            "m.csv:2: holds a NUL byte: this is not a CSV text file");
}

TEST_F(ManifestTest, AColumnNamedTwiceStopsTheCommand) {
  EXPECT_EQ(StructureError("clip,mass_kg,drop_height_m,mass_kg\n"),
            "m.csv:1: column 'mass_kg' is named twice; keep one");
}

TEST_F(ManifestTest, AnUnclosedQuoteStopsTheCommand) {
  EXPECT_EQ(StructureError("clip,drop_height_m,mass_kg\n\"a.avi,0.3,12\n"),
            "m.csv:2: a quoted field is never closed; add the closing '\"'");
}

TEST_F(ManifestTest, ANonNumericMassFailsOnlyItsRow) {
  const Manifest m = Parse("clip,drop_height_m,mass_kg\na.avi,0.3,twelve\nb.avi,0.3,12\n");
  ASSERT_EQ(m.rows.size(), 2u);
  EXPECT_EQ(m.rows[0].error, "m.csv:2: column 'mass_kg': 'twelve' is not a number; give the dropped mass in kilograms");
  EXPECT_TRUE(m.rows[1].ok());
}

TEST_F(ManifestTest, ANegativeMassFailsOnlyItsRow) {
  const Manifest m = Parse("clip,drop_height_m,mass_kg\na.avi,0.3,-12\nb.avi,0.3,12\n");
  EXPECT_EQ(m.rows[0].error, "m.csv:2: column 'mass_kg': '-12' is not positive; give the dropped mass in kilograms");
  EXPECT_TRUE(m.rows[1].ok());
}

TEST_F(ManifestTest, ABadOptionalNumberSaysItMayBeLeftEmpty) {
  const Manifest m = Parse("clip,drop_height_m,mass_kg,capture_fps\na.avi,0.3,12,fast\n");
  EXPECT_EQ(m.rows[0].error,
            "m.csv:2: column 'capture_fps': 'fast' is not a number; give the true capture rate in frames per second "
            "(or leave it empty)");
}

TEST_F(ManifestTest, TheMarkerOffsetIsSignedMayBeZeroOrEmptyAndIsBounded) {
  // docs/formats.md, "manifest.csv" and "Marker plane": toward the camera positive.
  const Manifest m = Parse(
      "clip,drop_height_m,mass_kg,marker_offset_m\na.avi,0.3,12,0.03\nb.avi,0.3,12,-0.02\nc.mov,0.3,12,\n"
      "seq_01,0.3,12,1.5\n");
  ASSERT_EQ(m.rows.size(), 4u);
  EXPECT_DOUBLE_EQ(m.rows[0].marker_offset_m.value(), 0.03);
  EXPECT_DOUBLE_EQ(m.rows[1].marker_offset_m.value(), -0.02);
  EXPECT_FALSE(m.rows[2].marker_offset_m.has_value());
  EXPECT_TRUE(m.rows[2].ok());
  EXPECT_EQ(m.rows[3].error,
            "m.csv:5: column 'marker_offset_m': '1.5' is outside [-1, 1]; give the offset of the hub marker's plane "
            "from the calibrated plane (toward the camera positive) in metres (or leave it empty)");
}

TEST_F(ManifestTest, ADuplicateClipFailsTheLaterRow) {
  const Manifest m = Parse("clip,drop_height_m,mass_kg\na.avi,0.3,12\nb.avi,0.3,12\na.avi,0.4,12\n");
  ASSERT_EQ(m.rows.size(), 3u);
  EXPECT_TRUE(m.rows[0].ok());
  EXPECT_TRUE(m.rows[1].ok());
  EXPECT_EQ(
      m.rows[2].error,
      "m.csv:4: column 'clip': clip id 'a' is already used at line 2; remove the duplicate row or rename the clip");
}

TEST_F(ManifestTest, APathThatLeavesTheFolderFailsItsRow) {
  const Manifest m =
      Parse("clip,drop_height_m,mass_kg\n../outside.avi,0.3,12\n/etc/passwd,0.3,12\nx/../a.avi,0.3,12\n");
  ASSERT_EQ(m.rows.size(), 3u);
  const std::string folder = dir_.string();
  EXPECT_EQ(m.rows[0].error, "m.csv:2: column 'clip': '../outside.avi' leaves the clip folder; put the clip inside " +
                                 folder + " and give its path relative to it");
  EXPECT_EQ(m.rows[1].error, "m.csv:3: column 'clip': '/etc/passwd' leaves the clip folder; put the clip inside " +
                                 folder + " and give its path relative to it");
  EXPECT_TRUE(m.rows[2].ok()) << m.rows[2].error;  // stays inside
}

TEST_F(ManifestTest, AMissingClipFileFailsItsRow) {
  const Manifest m = Parse("clip,drop_height_m,mass_kg\nnope.avi,0.3,12\n");
  EXPECT_EQ(m.rows[0].error,
            "m.csv:2: column 'clip': 'nope.avi' does not exist in " + dir_.string() + "; check the file name");
}

TEST_F(ManifestTest, ARowWithTooFewFieldsFailsItsRow) {
  const Manifest m = Parse("clip,drop_height_m,mass_kg\na.avi,0.3\n");
  EXPECT_EQ(m.rows[0].error, "m.csv:2: has 2 fields but the header has 3; check for a missing or extra comma");
  EXPECT_EQ(m.rows[0].clip_id, "a");
}

TEST_F(ManifestTest, UnknownColumnsAreIgnoredWithAWarning) {
  const Manifest m = Parse("clip,drop_height_m,mass_kg,operator\na.avi,0.3,12,kim\n");
  ASSERT_EQ(m.warnings.size(), 1u);
  EXPECT_EQ(m.warnings[0], "m.csv:1: column 'operator' is not one dropfit reads; it is ignored");
  EXPECT_TRUE(m.rows[0].ok());
}

// Regression (found while writing tests/fuzz): a clip name longer than a file name may
// be (255 bytes on Linux file systems, NAME_MAX in POSIX <limits.h>) made std::filesystem throw
// ENAMETOOLONG out of the reader, stopping the whole run instead of failing the one row.
TEST_F(ManifestTest, AClipNameTooLongForTheFileSystemFailsOnlyItsRow) {
  const std::string name = std::string(300, 'x') + ".avi";
  const Manifest m = Parse("clip,drop_height_m,mass_kg\n" + name + ",0.3,12\na.avi,0.3,12\n");
  ASSERT_EQ(m.rows.size(), 2u);
  EXPECT_EQ(m.rows[0].error.rfind("m.csv:2: column 'clip': '" + name + "' does not exist in " + dir_.string(), 0), 0u)
      << m.rows[0].error;
  EXPECT_EQ(m.rows[0].clip_id, std::string(300, 'x'));
  EXPECT_TRUE(m.rows[1].ok()) << m.rows[1].error;
}

// Regression (found while writing tests/fuzz): a '"' opens a quoted field only at the field's start
// (RFC 4180, Shafranovich 2005, section 2 rule 5); later quotes are text. The check used to copy
// the field at every quote, so a long line of quotes was quadratic (a 1 MB line took 17 s; this
// case took 3 minutes under ASan): the case pins the meaning, the suite's time shows the cost.
TEST_F(ManifestTest, QuotesAfterTheFieldsStartAreTextHoweverMany) {
  const std::string quotes(200000, '"');
  const Manifest m = Parse("clip,drop_height_m,mass_kg,specimen\na.avi,0.3,12,w" + quotes + "\n");
  ASSERT_EQ(m.rows.size(), 1u);
  EXPECT_TRUE(m.rows[0].ok()) << m.rows[0].error.substr(0, 200);
  EXPECT_EQ(m.rows[0].specimen, "w" + quotes);
}

TEST_F(ManifestTest, ReadManifestNamesAMissingFile) {
  try {
    ReadManifest(dir_);
    FAIL() << "no exception";
  } catch (const ManifestStructureError& e) {
    EXPECT_EQ(std::string(e.what()),
              (dir_ / "manifest.csv").string() + ": cannot be read; the clip folder needs a manifest.csv (see README)");
  }
}

}  // namespace
}  // namespace dropfit::cli
