#include "tracker/overlay.h"

#include <gtest/gtest.h>
#include <opencv2/videoio.hpp>

#include <filesystem>

#include "tests/support/temp_dir.h"

namespace dropfit::tracker {
namespace {

namespace fs = std::filesystem;

TEST(Overlay, CentreWindowAndTrailAreDrawnAndEveryFrameIsWritten) {
  const test::TempDir tmp("overlay");
  const fs::path& dir = tmp.path();
  OverlayOptions o;
  o.path = dir / "overlay.avi";
  const cv::Mat grey(96, 128, CV_8U, cv::Scalar(0));
  {
    OverlayWriter w(o, grey.size(), 10.0);
    for (int f = 0; f < 12; ++f) {
      FrameReport r;
      r.sample = {f, f != 5, cv::Point2d(40.0 + 3 * f, 50.0), 0.98};
      r.search_window = cv::Rect(30 + 3 * f, 40, 20, 20);
      r.marker_radius_px = 8;
      const cv::Mat img = w.Draw(grey, r);
      if (f == 11) {
        // Green cross at the found centre (73, 50); yellow search window edge; cyan trail behind.
        EXPECT_GT(img.at<cv::Vec3b>(50, 73)[1], 200);
        EXPECT_EQ(img.at<cv::Vec3b>(40, 70), cv::Vec3b(0, 255, 255));
        EXPECT_GT(img.at<cv::Vec3b>(50, 64)[0], 100);
      }
      w.Write(grey, r);
    }
  }
  cv::VideoCapture cap(o.path.string(), cv::CAP_FFMPEG);
  ASSERT_TRUE(cap.isOpened());
  EXPECT_EQ(static_cast<int>(cap.get(cv::CAP_PROP_FRAME_COUNT)), 12);
}

TEST(Overlay, UnknownExtensionIsRejectedWithTheValidOnes) {
  OverlayOptions o;
  o.path = "overlay.gif";
  try {
    OverlayWriter w(o, {64, 64}, 5);
    FAIL() << "no exception";
  } catch (const std::invalid_argument& e) {
    EXPECT_NE(std::string(e.what()).find("use .avi (MJPG), .mp4, .mov or .mkv"), std::string::npos);
  }
}

}  // namespace
}  // namespace dropfit::tracker
