// Clip writers (media/video_out.h). The reference reader is OpenCV's cv::VideoCapture
// (FFmpeg backend), the library the tracker reads clips with; the JPEG reference is
// cv::imdecode of the very bytes we stored.
#include "media/video_out.h"

#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>
#include <opencv2/videoio.hpp>

#include <gtest/gtest.h>

#include <filesystem>
#include <random>

#include "tests/support/temp_dir.h"

namespace dropfit::media {
namespace {

namespace fs = std::filesystem;

// A frame with a moving disc, a gradient and sensor-like noise (what the renderer writes).
cv::Mat TestFrame(int i, cv::Size size, std::mt19937_64& rng) {
  cv::Mat frame(size, CV_8UC1);
  std::normal_distribution<double> noise(0.0, 2.0);
  for (int v = 0; v < size.height; ++v) {
    for (int u = 0; u < size.width; ++u) {
      frame.at<uint8_t>(v, u) = cv::saturate_cast<uint8_t>(90 + 0.1 * u + noise(rng));
    }
  }
  cv::circle(frame, {40 + 3 * i, 60}, 15, 230, -1, cv::LINE_AA);
  return frame;
}

// FFmpeg's MJPEG decoder and libjpeg (cv::imdecode) use different inverse DCTs whose rounding
// differs by one grey level; a corrupt or misplaced frame differs by tens of levels.
constexpr double kIdctRoundingGrey = 1.0;
// JPEG quality 90 changes a grey level by at most ~14 (docs/platform.md, "Codecs", measured on noisy frames).
constexpr double kJpegMaxErrorGrey = 20.0;

TEST(VideoOut, EveryMjpgFrameReadsBackThroughOpenCvAndDecodesCleanly) {
  const test::TempDir tmp("video_out_mjpg");
  const fs::path& dir = tmp.path();
  const cv::Size size(160, 120);
  const int frames = 37;  // odd sizes and counts exercise the chunk padding
  std::mt19937_64 rng(11);
  std::vector<cv::Mat> written;
  {
    MjpgAviWriter writer(dir / "clip.avi", size, 2000.0, 90);
    for (int i = 0; i < frames; ++i) {
      written.push_back(TestFrame(i, size, rng));
      writer.Write(written.back());
    }
    writer.Close();
    EXPECT_EQ(writer.frames_written(), frames);
  }
  cv::VideoCapture capture((dir / "clip.avi").string(), cv::CAP_FFMPEG);
  ASSERT_TRUE(capture.isOpened());
  EXPECT_EQ(static_cast<int>(capture.get(cv::CAP_PROP_FRAME_COUNT)), frames);
  EXPECT_NEAR(capture.get(cv::CAP_PROP_FPS), 2000.0, 1e-6);
  cv::Mat bgr, grey;
  int read = 0;
  while (capture.read(bgr)) {
    ASSERT_LT(read, frames);
    cv::cvtColor(bgr, grey, cv::COLOR_BGR2GRAY);
    // Clean decode: the same pixels as decoding the JPEG on its own (up to IDCT rounding).
    std::vector<uint8_t> jpeg;
    cv::imencode(".jpg", written[read], jpeg, {cv::IMWRITE_JPEG_QUALITY, 90});
    const cv::Mat reference = cv::imdecode(jpeg, cv::IMREAD_GRAYSCALE);
    EXPECT_LE(cv::norm(grey, reference, cv::NORM_INF), kIdctRoundingGrey) << "frame " << read;
    EXPECT_LE(cv::norm(grey, written[read], cv::NORM_INF), kJpegMaxErrorGrey) << "frame " << read;
    ++read;
  }
  EXPECT_EQ(read, frames);
}

TEST(VideoOut, LosslessFormatsReturnTheExactFrames) {
  const test::TempDir tmp("video_out_lossless");
  const fs::path& dir = tmp.path();
  const cv::Size size(96, 64);
  std::mt19937_64 rng(12);
  for (VideoFormat format : {VideoFormat::kFfv1Mov, VideoFormat::kPngFrames}) {
    const fs::path path = dir / ("clip" + FileExtension(format));
    std::vector<cv::Mat> written;
    auto sink = OpenFrameSink(path, format, size, 3000.0);
    for (int i = 0; i < 12; ++i) {
      written.push_back(TestFrame(i, size, rng));
      sink->Write(written.back());
    }
    sink->Close();
    cv::VideoCapture capture;
    if (format == VideoFormat::kPngFrames) {
      capture.open((path / "frame_%05d.png").string(), cv::CAP_IMAGES);
    } else {
      capture.open(path.string(), cv::CAP_FFMPEG);
    }
    ASSERT_TRUE(capture.isOpened()) << ToString(format);
    cv::Mat frame, grey;
    int read = 0;
    while (capture.read(frame)) {
      ASSERT_LT(read, 12);
      if (frame.channels() == 3) {
        cv::cvtColor(frame, grey, cv::COLOR_BGR2GRAY);
      } else {
        grey = frame;
      }
      EXPECT_EQ(cv::norm(grey, written[read], cv::NORM_INF), 0.0) << ToString(format) << " frame " << read;
      ++read;
    }
    EXPECT_EQ(read, 12) << ToString(format);
  }
}

TEST(VideoOut, UnknownFormatIsRejectedWithTheValidList) {
  try {
    VideoFormatFromString("gif");
    FAIL() << "no exception";
  } catch (const std::invalid_argument& e) {
    EXPECT_STREQ(e.what(), "unknown video format 'gif'; valid: mjpg, ffv1, h264, png");
  }
  EXPECT_EQ(VideoFormatFromString("h264"), VideoFormat::kH264Mp4);
}

TEST(VideoOut, FrameOfTheWrongSizeIsRejected) {
  const test::TempDir tmp("video_out_size");
  const fs::path& dir = tmp.path();
  MjpgAviWriter writer(dir / "clip.avi", {64, 48}, 30.0, 90);
  EXPECT_THROW(writer.Write(cv::Mat(10, 10, CV_8UC1, cv::Scalar(0))), std::invalid_argument);
  writer.Close();
}

}  // namespace
}  // namespace dropfit::media
