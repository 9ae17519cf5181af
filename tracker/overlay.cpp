#include "tracker/overlay.h"

#include <opencv2/imgproc.hpp>

#include <algorithm>
#include <cctype>
#include <cstdio>
#include <stdexcept>

namespace dropfit::tracker {

namespace {

constexpr int kShift = 4;  // sub-pixel drawing: coordinates in 1/16 px
cv::Point Fixed(cv::Point2d p) {
  // OpenCV drawing with `shift` places integer (x << shift) at pixel centre x, as our convention.
  return {cvRound(p.x * (1 << kShift)), cvRound(p.y * (1 << kShift))};
}

int FourCcFor(const std::filesystem::path& path) {
  std::string ext = path.extension().string();
  std::transform(ext.begin(), ext.end(), ext.begin(),
                 [](unsigned char c) { return static_cast<char>(std::tolower(c)); });
  if (ext == ".avi") return cv::VideoWriter::fourcc('M', 'J', 'P', 'G');
  if (ext == ".mp4" || ext == ".mov") return cv::VideoWriter::fourcc('m', 'p', '4', 'v');
  if (ext == ".mkv") return cv::VideoWriter::fourcc('F', 'F', 'V', '1');
  throw std::invalid_argument("overlay file '" + path.string() +
                              "' has an unknown extension; use .avi (MJPG), .mp4, .mov or .mkv (FFV1)");
}

}  // namespace

OverlayWriter::OverlayWriter(const OverlayOptions& options, cv::Size frame_size, double marker_radius_px)
    : options_(options), radius_px_(marker_radius_px) {
  if (!(options.playback_fps > 0 && options.playback_fps <= 1000))
    throw std::invalid_argument("overlay playback_fps = " + std::to_string(options.playback_fps) +
                                " is outside (0, 1000] frames/s");
  if (options.trail_frames < 0 || options.trail_frames > 1000)
    throw std::invalid_argument("overlay trail_frames = " + std::to_string(options.trail_frames) +
                                " is outside [0, 1000]");
  const int fourcc = FourCcFor(options.path);
  if (!writer_.open(options.path.string(), cv::CAP_FFMPEG, fourcc, options.playback_fps, frame_size, true)) {
    throw std::runtime_error(options.path.string() +
                             ": the overlay video cannot be opened for writing; check the folder exists and is "
                             "writable");
  }
}

cv::Mat OverlayWriter::Draw(const cv::Mat& grey, const FrameReport& report) {
  cv::cvtColor(grey, bgr_, cv::COLOR_GRAY2BGR);
  const cv::Scalar green(0, 255, 0), yellow(0, 255, 255), red(0, 0, 255), cyan(255, 255, 0);
  for (size_t i = 1; i < trail_.size(); ++i) {
    cv::line(bgr_, Fixed(trail_[i - 1]), Fixed(trail_[i]), cyan, 1, cv::LINE_AA, kShift);
  }
  if (!report.search_window.empty()) {
    cv::rectangle(bgr_, report.search_window, report.reacquiring ? red : yellow, 1);
  }
  const TrackSample& s = report.sample;
  if (s.found) {
    const cv::Point c = Fixed(s.centre_px);
    const int arm = 6 << kShift;
    cv::line(bgr_, c - cv::Point(arm, 0), c + cv::Point(arm, 0), green, 1, cv::LINE_AA, kShift);
    cv::line(bgr_, c - cv::Point(0, arm), c + cv::Point(0, arm), green, 1, cv::LINE_AA, kShift);
    const double radius = report.marker_radius_px > 0 ? report.marker_radius_px : radius_px_;
    if (radius > 0) cv::circle(bgr_, c, cvRound(radius * (1 << kShift)), green, 1, cv::LINE_AA, kShift);
    trail_.push_back(s.centre_px);
    while (static_cast<int>(trail_.size()) > options_.trail_frames + 1) trail_.pop_front();
  } else {
    trail_.clear();
  }
  char text[96];
  if (s.found) {
    std::snprintf(text, sizeof text, "frame %d  q %.3f  (%.2f, %.2f)", s.frame, s.quality, s.centre_px.x,
                  s.centre_px.y);
  } else {
    std::snprintf(text, sizeof text, "frame %d  not found", s.frame);
  }
  cv::putText(bgr_, text, {6, 16}, cv::FONT_HERSHEY_SIMPLEX, 0.45, s.found ? green : red, 1, cv::LINE_AA);
  return bgr_;
}

void OverlayWriter::Write(const cv::Mat& grey, const FrameReport& report) { writer_.write(Draw(grey, report)); }

}  // namespace dropfit::tracker
