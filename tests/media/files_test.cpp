// File kinds, still-image reading and the input fingerprint (media/files.h).

#include "media/files.h"

#include <gtest/gtest.h>
#include <opencv2/imgcodecs.hpp>

#include <filesystem>
#include <fstream>
#include <stdexcept>

#include "tests/support/temp_dir.h"

namespace dropfit::media {
namespace {

namespace fs = std::filesystem;

TEST(Files, FnvHashMatchesThePublishedTestVector) {
  // FNV-1a 64 of "a" is af63dc4c8601ec8c, of "" the offset basis (Fowler, Noll & Vo test
  // vectors; from memory).
  EXPECT_EQ(Fnv1a64Hex("a"), "af63dc4c8601ec8c");
  EXPECT_EQ(Fnv1a64Hex(""), "cbf29ce484222325");
}

TEST(Files, OneExtensionRuleForImagesAndVideosInAnyCase) {
  for (const char* name : {"a.png", "b.JPG", "c.jpeg", "d.bmp", "e.TIF", "f.tiff", "g.pgm", "h.ppm"}) {
    EXPECT_TRUE(IsImageFile(name)) << name;
    EXPECT_FALSE(IsVideoFile(name)) << name;
  }
  for (const char* name : {"a.mp4", "b.MOV", "c.avi", "d.mkv", "e.m4v", "f.webm"}) {
    EXPECT_TRUE(IsVideoFile(name)) << name;
    EXPECT_FALSE(IsImageFile(name)) << name;
  }
  EXPECT_FALSE(IsImageFile("notes.txt"));
  EXPECT_FALSE(IsImageFile("png"));
  EXPECT_EQ(ImageExtensionsText(), ".png, .jpg, .jpeg, .bmp, .tif, .tiff, .pgm, .ppm");
}

TEST(Files, FingerprintOfAFileHashesItsNameAndBytesAndChangesWithEither) {
  const test::TempDir dir("files_fingerprint");
  const fs::path a = dir.path() / "clip.avi";
  std::ofstream(a, std::ios::binary) << "abc";
  Fnv1a64 expected;
  expected.Add("clip.avi");
  expected.Add("abc");
  EXPECT_EQ(InputFingerprint(a), expected.Hex());
  EXPECT_EQ(Fnv1a64HexOfFile(a), Fnv1a64Hex("abc"));
  const std::string before = InputFingerprint(a);
  std::ofstream(a, std::ios::binary) << "abd";
  EXPECT_NE(InputFingerprint(a), before);
}

TEST(Files, FingerprintOfAFolderCoversEveryFileInNameOrder) {
  const test::TempDir dir("files_folder");
  std::ofstream(dir.path() / "frame_2.png", std::ios::binary) << "2";
  std::ofstream(dir.path() / "frame_1.png", std::ios::binary) << "1";
  Fnv1a64 expected;
  for (const char* part : {"frame_1.png", "1", "frame_2.png", "2"}) expected.Add(std::string(part));
  EXPECT_EQ(InputFingerprint(dir.path()), expected.Hex());
}

TEST(Files, AStillImageIsReadAsGreyAndAMissingOneIsNamed) {
  const test::TempDir dir("files_image");
  const cv::Mat bgr(6, 8, CV_8UC3, cv::Scalar(10, 20, 30));
  ASSERT_TRUE(cv::imwrite((dir.path() / "view.png").string(), bgr));
  const cv::Mat grey = ReadGreyImage(dir.path() / "view.png", "image");
  EXPECT_EQ(grey.type(), CV_8UC1);
  EXPECT_EQ(grey.size(), cv::Size(8, 6));
  try {
    ReadGreyImage(dir.path() / "missing.png", "the plane view");
    FAIL() << "no exception";
  } catch (const std::runtime_error& e) {
    EXPECT_NE(std::string(e.what()).find("the plane view"), std::string::npos);
    EXPECT_NE(std::string(e.what()).find("missing.png"), std::string::npos);
  }
}

}  // namespace
}  // namespace dropfit::media
