#include "cli/track_command.h"

#include <gtest/gtest.h>
#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>
#include <opencv2/videoio.hpp>

#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <functional>

#include "cli/exit_status.h"
#include "cli/results.h"
#include "cli/rig_io.h"
#include "tests/support/synthetic_marker.h"
#include "tests/support/temp_dir.h"

namespace dropfit::cli {
namespace {

namespace fs = std::filesystem;

// docs/methods.md §9: 0.05 px RMS at 2 grey levels of noise (lossless frames here).
constexpr double kRmsTargetPx = 0.05;
// Metres are the rig's mapping of the pixel position: checked to round-off.
constexpr double kMetresTolerance = 1e-9;
constexpr double kCaptureFps = 2000.0;

const cv::Size kSize(160, 128);

// "<prefix><n><ext>" (snprintf: GCC 12 warns falsely on chained std::string additions).
std::string Name(const char* prefix, int n, const char* ext) {
  char buf[64];
  std::snprintf(buf, sizeof buf, "%s%d%s", prefix, n, ext);
  return buf;
}

cv::Point2d PathAt(int f) { return {40.0 + 1.3 * f, 40.0 + 0.5 * f + 0.02 * f * f}; }

std::vector<cv::Mat> Frames(int n, uint64_t seed, const std::function<cv::Point2d(int)>& path = PathAt) {
  cv::RNG rng(seed);
  test::SyntheticMarkerOptions m;
  m.kind = tracker::MarkerKind::kDot;
  m.radius_px = 8;
  m.background = 50;
  std::vector<cv::Mat> frames;
  for (int f = 0; f < n; ++f) frames.push_back(test::RenderSyntheticMarker(kSize, path(f), m, rng));
  return frames;
}

// Lossless FFV1 in .avi at a playback rate (docs/platform.md, "Video writing": .avi is safe at <= 1,000 fps).
void WriteVideo(const fs::path& file, const std::vector<cv::Mat>& frames, double fps = 30.0) {
  cv::VideoWriter w(file.string(), cv::CAP_FFMPEG, cv::VideoWriter::fourcc('F', 'F', 'V', '1'), fps, kSize, true);
  ASSERT_TRUE(w.isOpened());
  cv::Mat bgr;
  for (const cv::Mat& f : frames) {
    cv::cvtColor(f, bgr, cv::COLOR_GRAY2BGR);
    w.write(bgr);
  }
}

// A rig without lens: x_m = 0.001 u, y_m = 0.2 - 0.001 v (1 px per mm, y up).
fs::path WriteRig(const fs::path& dir, cv::Size size = kSize) {
  calib::Rig rig;
  rig.image_size = size;
  rig.plane_from_undistorted = cv::Matx33d(0.001, 0, 0, 0, -0.001, 0.2, 0, 0, 1);
  rig.tool_version = "test";
  const fs::path p = dir / "rig.json";
  WriteRigFile(p, rig);
  return p;
}

TrackCommandOptions Options(const fs::path& clip, const fs::path& rig, const fs::path& out) {
  TrackCommandOptions o;
  o.clip = clip.string();
  o.rig_path = rig.string();
  o.out_dir = out.string();
  return o;
}

bool Contains(const std::vector<std::string>& list, const std::string& text) {
  for (const std::string& s : list) {
    if (s.find(text) != std::string::npos) return true;
  }
  return false;
}

TEST(TrackCommand, VideoClipIsTrackedIntoTheContractsFiles) {
  const test::TempDir tmp("track_cmd_video");
  WriteVideo(tmp.path() / "drop_a.avi", Frames(40, 31));
  TrackCommandOptions o = Options(tmp.path() / "drop_a.avi", WriteRig(tmp.path()), tmp.path() / "out");
  o.fps = kCaptureFps;
  o.overlay_path = (tmp.path() / "out" / "overlay.avi").string();
  ASSERT_EQ(RunTrack(o), kExitDone);

  const std::vector<TrackRow> rows = ReadTrackCsv(tmp.path() / "out" / "track.csv");
  ASSERT_EQ(rows.size(), 40u);
  double s2 = 0;
  for (const TrackRow& r : rows) {
    ASSERT_TRUE(r.u_px && r.v_px && r.x_m && r.y_m) << r.frame;
    EXPECT_DOUBLE_EQ(r.t_s, r.frame / kCaptureFps);
    const cv::Point2d e = cv::Point2d(*r.u_px, *r.v_px) - PathAt(r.frame);
    s2 += e.dot(e);
    EXPECT_NEAR(*r.x_m, 0.001 * *r.u_px, kMetresTolerance);
    EXPECT_NEAR(*r.y_m, 0.2 - 0.001 * *r.v_px, kMetresTolerance);
    EXPECT_GT(r.quality, 0.9);
  }
  EXPECT_LT(std::sqrt(s2 / 40), kRmsTargetPx);

  const ClipResult res = ReadClipResult(tmp.path() / "out" / "result.json");
  EXPECT_EQ(res.clip, "drop_a");
  EXPECT_DOUBLE_EQ(res.capture_fps, kCaptureFps);
  EXPECT_EQ(res.capture_fps_source, "option");
  EXPECT_EQ(res.frames, 40);
  EXPECT_EQ(res.tracked_frames, 40);
  EXPECT_TRUE(res.errors.empty());

  cv::VideoCapture overlay((tmp.path() / "out" / "overlay.avi").string(), cv::CAP_FFMPEG);
  ASSERT_TRUE(overlay.isOpened());
  EXPECT_EQ(static_cast<int>(overlay.get(cv::CAP_PROP_FRAME_COUNT)), 40);
}

TEST(TrackCommand, ContainerPlaybackRateIsUsedWithAWarning) {
  const test::TempDir tmp("track_cmd_playback");
  WriteVideo(tmp.path() / "clip.avi", Frames(12, 32), 30.0);
  ASSERT_EQ(RunTrack(Options(tmp.path() / "clip.avi", WriteRig(tmp.path()), tmp.path() / "out")), kExitDone);
  const ClipResult res = ReadClipResult(tmp.path() / "out" / "result.json");
  EXPECT_EQ(res.capture_fps_source, "container");
  EXPECT_NEAR(res.capture_fps, 30.0, 1e-6);
  EXPECT_TRUE(Contains(res.warnings, "looks like a playback rate")) << (res.warnings.empty() ? "" : res.warnings[0]);
}

// Issue 9: a truncated file is used as far as it decodes, with a warning naming the last good frame.
TEST(TrackCommand, TruncatedVideoIsTrackedAsFarAsItDecodesAndTheBreakIsReported) {
  const test::TempDir tmp("track_cmd_truncated");
  const fs::path clip = tmp.path() / "cut.avi";
  WriteVideo(clip, Frames(60, 33));
  fs::resize_file(clip, fs::file_size(clip) * 6 / 10);
  TrackCommandOptions o = Options(clip, WriteRig(tmp.path()), tmp.path() / "out");
  o.fps = kCaptureFps;
  EXPECT_EQ(RunTrack(o), kExitDone);
  const ClipResult res = ReadClipResult(tmp.path() / "out" / "result.json");
  EXPECT_TRUE(res.errors.empty()) << res.errors[0];
  EXPECT_TRUE(Contains(res.warnings, "cut.avi: decoding stopped at frame " + std::to_string(res.frames) +
                                         " of the 60 frames the container announces (truncated or damaged file); "
                                         "the last good frame is " +
                                         std::to_string(res.frames - 1)))
      << (res.warnings.empty() ? "" : res.warnings[0]);
  EXPECT_GT(res.tracked_frames, 10);
  EXPECT_LT(res.frames, 60);
  EXPECT_EQ(ReadTrackCsv(tmp.path() / "out" / "track.csv").size(), static_cast<size_t>(res.frames));
}

TEST(TrackCommand, FileWithNoFramesFailsTheClipWithItsName) {
  const test::TempDir tmp("track_cmd_empty");
  std::ofstream(tmp.path() / "empty.avi").put('x');
  TrackCommandOptions o = Options(tmp.path() / "empty.avi", WriteRig(tmp.path()), tmp.path() / "out");
  o.fps = kCaptureFps;
  EXPECT_EQ(RunTrack(o), kExitPartial);
  const ClipResult res = ReadClipResult(tmp.path() / "out" / "result.json");
  EXPECT_EQ(res.frames, 0);
  EXPECT_TRUE(Contains(res.errors, "empty.avi: ")) << (res.errors.empty() ? "" : res.errors[0]);
  EXPECT_TRUE(ReadTrackCsv(tmp.path() / "out" / "track.csv").empty());
}

TEST(TrackCommand, FrameOfAnotherSizeIsSkippedAndNamed) {
  const test::TempDir tmp("track_cmd_sizes");
  const fs::path clip = tmp.path() / "seq";
  fs::create_directories(clip);
  const auto frames = Frames(20, 34);
  for (int f = 0; f < 20; ++f) {
    cv::Mat img = frames[static_cast<size_t>(f)];
    if (f == 9) cv::resize(img, img, {80, 64});
    cv::imwrite((clip / Name("img", 500 + f, ".png")).string(), img);
  }
  TrackCommandOptions o = Options(clip, WriteRig(tmp.path()), tmp.path() / "out");
  o.fps = kCaptureFps;
  EXPECT_EQ(RunTrack(o), kExitDone);  // a frame left empty is no failure of the clip (issue 9)
  const ClipResult res = ReadClipResult(tmp.path() / "out" / "result.json");
  EXPECT_EQ(res.clip, "seq");
  EXPECT_EQ(res.frames, 20);
  EXPECT_EQ(res.tracked_frames, 19);
  EXPECT_TRUE(res.errors.empty());
  EXPECT_TRUE(Contains(res.warnings, "img509.png: frame 9 is 80x64 but the clip's first frame is 160x128"))
      << (res.warnings.empty() ? "" : res.warnings[0]);
  const auto rows = ReadTrackCsv(tmp.path() / "out" / "track.csv");
  ASSERT_EQ(rows.size(), 20u);
  EXPECT_FALSE(rows[9].u_px.has_value());
  EXPECT_EQ(rows[9].quality, 0.0);
}

TEST(TrackCommand, MarkerNeverFoundFailsTheClipAndSaysWhatToTry) {
  const test::TempDir tmp("track_cmd_nomarker");
  const fs::path clip = tmp.path() / "blank";
  fs::create_directories(clip);
  cv::RNG rng(35);
  for (int f = 0; f < 5; ++f) {
    cv::Mat img(kSize, CV_8U);
    rng.fill(img, cv::RNG::NORMAL, 90, 2);
    cv::imwrite((clip / Name("f", f, ".png")).string(), img);
  }
  TrackCommandOptions o = Options(clip, WriteRig(tmp.path()), tmp.path() / "out");
  o.fps = kCaptureFps;
  EXPECT_EQ(RunTrack(o), kExitPartial);
  const ClipResult res = ReadClipResult(tmp.path() / "out" / "result.json");
  EXPECT_EQ(res.tracked_frames, 0);
  EXPECT_TRUE(Contains(res.errors, "no quadrant disc or dot marker found"));
  EXPECT_TRUE(Contains(res.errors, "Try: --marker-at U,V"));
  EXPECT_EQ(ReadTrackCsv(tmp.path() / "out" / "track.csv").size(), 5u);
}

TEST(TrackCommand, MarkerLeavingTheViewLeavesEmptyRowsAndAWarning) {
  const test::TempDir tmp("track_cmd_leaving");
  const fs::path clip = tmp.path() / "away";
  fs::create_directories(clip);
  const auto frames = Frames(40, 36, [](int f) { return cv::Point2d(100.0 + 3.0 * f, 64.0); });
  for (int f = 0; f < 40; ++f) cv::imwrite((clip / Name("f", f, ".bmp")).string(), frames[size_t(f)]);
  TrackCommandOptions o = Options(clip, WriteRig(tmp.path()), tmp.path() / "out");
  o.fps = kCaptureFps;
  EXPECT_EQ(RunTrack(o), kExitDone);
  const ClipResult res = ReadClipResult(tmp.path() / "out" / "result.json");
  EXPECT_TRUE(Contains(res.warnings, "marker left the view at frame"));
  const auto rows = ReadTrackCsv(tmp.path() / "out" / "track.csv");
  EXPECT_TRUE(rows[0].u_px.has_value());
  EXPECT_FALSE(rows[39].u_px.has_value());  // at u = 217, outside the 160 px frame
}

TEST(TrackCommand, BadUsageWritesNothingAndExitsTwo) {
  const test::TempDir tmp("track_cmd_usage");
  WriteVideo(tmp.path() / "c.avi", Frames(5, 37));
  const fs::path rig = WriteRig(tmp.path());
  auto expect_bad = [&](TrackCommandOptions o) {
    EXPECT_EQ(RunTrack(o), kExitBadUsage);
    EXPECT_FALSE(fs::exists(tmp.path() / "out" / "result.json"));
  };
  TrackCommandOptions o = Options(tmp.path() / "c.avi", rig, tmp.path() / "out");
  o.marker = "circle";
  expect_bad(o);
  o = Options(tmp.path() / "c.avi", rig, tmp.path() / "out");
  o.marker_at = "12;4";
  expect_bad(o);
  o = Options(tmp.path() / "c.avi", rig, tmp.path() / "out");
  o.marker = "template";  // needs a seed
  expect_bad(o);
  expect_bad(Options(tmp.path() / "c.avi", tmp.path() / "missing_rig.json", tmp.path() / "out"));
  expect_bad(Options(tmp.path() / "nothing.avi", rig, tmp.path() / "out"));
  expect_bad(Options(tmp.path() / "c.avi", WriteRig(tmp.path(), {640, 480}), tmp.path() / "out"));
}

TEST(TrackCommand, MarkerAtTextIsParsedOrRejectedWithAnExample) {
  EXPECT_EQ(ParseMarkerAt("412.5,230"), cv::Point2d(412.5, 230));
  EXPECT_EQ(ParseMarkerAt("1, 2"), cv::Point2d(1, 2));
  try {
    ParseMarkerAt("412");
    FAIL() << "no exception";
  } catch (const std::invalid_argument& e) {
    EXPECT_STREQ(e.what(), "--marker-at '412' is not U,V in pixels (two numbers, e.g. --marker-at 412.5,230)");
  }
}

}  // namespace
}  // namespace dropfit::cli
