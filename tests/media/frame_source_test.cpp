#include "media/frame_source.h"

#include <gtest/gtest.h>
#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>
#include <opencv2/videoio.hpp>

#include <filesystem>
#include <fstream>

#include "tests/support/temp_dir.h"

namespace dropfit::media {
namespace {

namespace fs = std::filesystem;

cv::Mat Pattern(int f, int type = CV_8UC1) {
  cv::Mat img(48, 64, CV_8UC1, cv::Scalar(10 + 3 * f));
  img(cv::Rect(f, 5, 10, 10)).setTo(250);
  if (type == CV_8UC3) cv::cvtColor(img, img, cv::COLOR_GRAY2BGR);
  if (type == CV_16UC1) img.convertTo(img, CV_16U, 257.0);
  return img;
}

TEST(FrameSource, NumberedImagesAreOrderedByTheirLastNumberFromAnyStart) {
  const test::TempDir tmp("frame_source_order");
  const fs::path& dir = tmp.path();
  // Colour TIFF, grey PNG and 16-bit PNG mixed; names hold other numbers before the frame number.
  cv::imwrite((dir / "cam2_take7_0099.tif").string(), Pattern(0, CV_8UC3));
  cv::imwrite((dir / "cam2_take7_0100.png").string(), Pattern(1));
  cv::imwrite((dir / "cam2_take7_0101.png").string(), Pattern(2, CV_16UC1));
  std::ofstream(dir / "notes.txt") << "not a frame";
  auto src = FrameSource::Open(dir);
  EXPECT_TRUE(src->info().image_sequence);
  EXPECT_EQ(src->info().size, cv::Size(64, 48));
  EXPECT_EQ(src->info().announced_frames, 3);
  cv::Mat g;
  for (int f = 0; f < 3; ++f) {
    const FrameRead r = src->Read(g);
    ASSERT_EQ(r.status, ReadStatus::kFrame) << r.message;
    EXPECT_EQ(r.frame, f);
    ASSERT_EQ(g.type(), CV_8UC1);
    EXPECT_EQ(g.at<uchar>(10, f + 2), 250);  // the bright square moved one pixel per frame
    EXPECT_NEAR(g.at<uchar>(40, 40), 10 + 3 * f, 1);
  }
  EXPECT_EQ(src->Read(g).status, ReadStatus::kEnd);
  bool warned16 = false;
  for (const auto& w : src->info().warnings) warned16 |= w.find("16-bit images were scaled") != std::string::npos;
  EXPECT_TRUE(warned16);
}

TEST(FrameSource, DamagedImageIsAnErrorForItsFrameAndReadingGoesOn) {
  const test::TempDir tmp("frame_source_damaged");
  const fs::path& dir = tmp.path();
  cv::imwrite((dir / "f1.png").string(), Pattern(0));
  std::ofstream(dir / "f2.png") << "garbage";
  cv::imwrite((dir / "f3.png").string(), Pattern(2));
  auto src = FrameSource::Open(dir);
  cv::Mat g;
  EXPECT_EQ(src->Read(g).status, ReadStatus::kFrame);
  const FrameRead bad = src->Read(g);
  EXPECT_EQ(bad.status, ReadStatus::kError);
  EXPECT_NE(bad.message.find("f2.png: frame 1 could not be decoded"), std::string::npos) << bad.message;
  EXPECT_EQ(src->Read(g).status, ReadStatus::kFrame);
}

TEST(FrameSource, VideoFramesComeBackGreyWithTheContainersCountAndRate) {
  const test::TempDir tmp("frame_source_video");
  const fs::path& dir = tmp.path();
  const fs::path file = dir / "clip.mov";
  {
    cv::VideoWriter w(file.string(), cv::CAP_FFMPEG, cv::VideoWriter::fourcc('F', 'F', 'V', '1'), 500.0, {64, 48},
                      true);
    ASSERT_TRUE(w.isOpened());
    for (int f = 0; f < 7; ++f) w.write(Pattern(f, CV_8UC3));
  }
  auto src = FrameSource::Open(file);
  EXPECT_FALSE(src->info().image_sequence);
  EXPECT_EQ(src->info().announced_frames, 7);
  ASSERT_TRUE(src->info().container_fps.has_value());
  EXPECT_NEAR(*src->info().container_fps, 500.0, 1e-6);
  cv::Mat g;
  int n = 0;
  while (src->Read(g).status == ReadStatus::kFrame) {
    EXPECT_EQ(g.type(), CV_8UC1);
    EXPECT_EQ(g.at<uchar>(10, n + 2), 250);  // FFV1 is lossless
    ++n;
  }
  EXPECT_EQ(n, 7);
}

TEST(FrameSource, ClipThatCannotBeOpenedIsRejectedWithItsName) {
  const test::TempDir tmp("frame_source_bad");
  const fs::path& dir = tmp.path();
  try {
    FrameSource::Open(dir / "missing.avi");
    FAIL() << "no exception";
  } catch (const std::runtime_error& e) {
    EXPECT_NE(std::string(e.what()).find("missing.avi: no such file or folder"), std::string::npos);
  }
  std::ofstream(dir / "empty.avi").close();  // a zero-length file is named as such (issue 9)
  try {
    FrameSource::Open(dir / "empty.avi");
    FAIL() << "no exception";
  } catch (const std::runtime_error& e) {
    EXPECT_NE(std::string(e.what()).find("empty.avi: is empty (0 bytes)"), std::string::npos) << e.what();
  }
  fs::remove(dir / "empty.avi");
  std::ofstream(dir / "readme.txt") << "x";
  try {
    FrameSource::Open(dir);
    FAIL() << "no exception";
  } catch (const std::runtime_error& e) {
    EXPECT_NE(std::string(e.what()).find("holds no numbered image files"), std::string::npos);
  }
}

}  // namespace
}  // namespace dropfit::media
