#pragma once
// Overlay video for checking a track by eye: each frame in colour with the found centre (a green
// cross and circle of the marker's radius; nothing when not found), the search window (yellow
// while tracking, red while re-acquiring) and a short trail of the previous found positions
// (cyan). Frame number and quality are printed in the top-left corner.
//
// Container and codec follow the file's extension: .avi -> MJPG, .mp4 and .mov -> MPEG-4 part 2
// ("mp4v"), .mkv -> FFV1 (lossless). The stored rate is a playback rate (default 30 frames/s):
// docs/platform.md ("Video writing") warns that .avi drops frames when written above 1,000 frames/s.

#include <opencv2/core.hpp>
#include <opencv2/videoio.hpp>

#include <deque>
#include <string>

#include "tracker/track.h"

namespace dropfit::tracker {

class OverlayWriter {
 public:
  // Opens the video; `marker_radius_px` is drawn when a report carries none. Throws std::invalid_argument on an unknown
  // extension or bad options, and std::runtime_error naming the file when it cannot be opened for writing.
  OverlayWriter(const OverlayOptions& options, cv::Size frame_size, double marker_radius_px);

  // Draws one frame (CV_8UC1) with what the tracker reported and appends it.
  void Write(const cv::Mat& grey, const FrameReport& report);

  // Draws without writing (for tests).
  cv::Mat Draw(const cv::Mat& grey, const FrameReport& report);

 private:
  OverlayOptions options_;
  cv::VideoWriter writer_;
  double radius_px_;
  std::deque<cv::Point2d> trail_;
  cv::Mat bgr_;
};

}  // namespace dropfit::tracker
