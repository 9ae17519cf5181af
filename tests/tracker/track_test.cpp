#include "tracker/track.h"

#include <gtest/gtest.h>
#include <opencv2/imgcodecs.hpp>

#include <atomic>
#include <cmath>
#include <filesystem>
#include <functional>
#include <random>

#include "media/frame_source.h"
#include "tests/support/synthetic_marker.h"
#include "tests/support/temp_dir.h"

namespace dropfit::tracker {
namespace {

using test::RenderSyntheticMarker;
using test::SyntheticMarkerOptions;

namespace fs = std::filesystem;

// docs/methods.md §9: 0.05 px RMS is the pass threshold at σ_n ≈ 2 grey levels, and the
// issue's target for the quadrant disc and the dot under reference conditions.
constexpr double kRmsTargetPx = 0.05;
// Template matching with a parabola peak is coarser (pixel locking of the correlation peak,
// common practice, no source); a tenth of a pixel is its usual class.
constexpr double kTemplateRmsPx = 0.15;

// A bouncing path in pixels: falls, bounces at frame 100 (speed ~3 px/frame), rises.
cv::Point2d PathAt(double f) {
  const double phase = std::fmod(f, 100.0);
  return {70.0 + 0.21 * f, 125.0 - 0.03 * phase * (100.0 - phase)};
}

struct Clip {
  std::vector<cv::Mat> frames;
  std::vector<cv::Point2d> truth;
};

// Reference conditions of the issue, scaled to a small frame: contrast 160, read noise 2 grey
// levels plus shot noise, motion blur = 0.2 of the frame interval's travel, JPEG q90.
Clip MakeClip(SyntheticMarkerOptions m, int n, uint64_t seed, cv::Size size = {200, 170},
              const std::function<cv::Point2d(double)>& path = PathAt, double spin_rad_per_frame = 0.01) {
  cv::RNG rng(seed);
  Clip c;
  for (int f = 0; f < n; ++f) {
    const cv::Point2d p = path(f);
    m.motion_px = 0.2 * (path(f + 0.5) - path(f - 0.5));
    m.rotation_rad = 0.3 + spin_rad_per_frame * f;  // the wheel turns
    c.frames.push_back(RenderSyntheticMarker(size, p, m, rng));
    c.truth.push_back(p);
  }
  return c;
}

SyntheticMarkerOptions Reference(MarkerKind kind) {
  SyntheticMarkerOptions m;
  m.kind = kind;
  m.shot_noise_per_level = 0.02;
  m.jpeg_quality = 90;
  if (kind == MarkerKind::kDot) {
    m.radius_px = 9;
    m.background = 60;
  }
  return m;
}

Track TrackInMemory(const Clip& c, const TrackOptions& o) {
  MarkerTracker t(o);
  for (size_t i = 0; i < c.frames.size(); ++i) t.Process(static_cast<int>(i), c.frames[i]);
  return t.Finish(static_cast<int>(c.frames.size()), "clip");
}

double RmsError(const Track& t, const Clip& c, int* found = nullptr) {
  double s2 = 0;
  int n = 0;
  for (const TrackSample& s : t.samples) {
    if (!s.found) continue;
    const cv::Point2d e = s.centre_px - c.truth[static_cast<size_t>(s.frame)];
    s2 += e.dot(e);
    ++n;
  }
  if (found) *found = n;
  return n ? std::sqrt(s2 / n) : 1e9;
}

TEST(Track, QuadrantDiscIsFollowedThroughABounceWithinTheTarget) {
  const Clip c = MakeClip(Reference(MarkerKind::kQuadrant), 220, 21);
  const Track t = TrackInMemory(c, {});
  ASSERT_TRUE(t.marker_chosen) << (t.errors.empty() ? "" : t.errors[0]);
  EXPECT_EQ(t.kind, MarkerKind::kQuadrant);
  EXPECT_NE(t.choice.find("quadrant disc of radius"), std::string::npos) << t.choice;
  EXPECT_NEAR(t.marker_radius_px, 15.0, 1.0);
  int found = 0;
  EXPECT_LT(RmsError(t, c, &found), kRmsTargetPx);
  EXPECT_EQ(found, 220);
  EXPECT_TRUE(t.lost.empty()) << FormatFrameRanges(t.lost);
  for (const TrackSample& s : t.samples) EXPECT_GT(s.quality, 0.9);
}

TEST(Track, BrightAndDarkDotsAreFollowedWithinTheTarget) {
  for (bool bright : {true, false}) {
    SyntheticMarkerOptions m = Reference(MarkerKind::kDot);
    m.bright_dot = bright;
    m.background = bright ? 50 : 215;
    const Clip c = MakeClip(m, 150, bright ? 22 : 23);
    const Track t = TrackInMemory(c, {});
    ASSERT_TRUE(t.marker_chosen);
    EXPECT_EQ(t.kind, MarkerKind::kDot);
    EXPECT_NE(t.choice.find(bright ? "bright dot" : "dark dot"), std::string::npos) << t.choice;
    int found = 0;
    EXPECT_LT(RmsError(t, c, &found), kRmsTargetPx);
    EXPECT_EQ(found, 150);
  }
}

TEST(Track, TemplateNeedsASeedAndFollowsThePatch) {
  TrackOptions o;
  o.marker = MarkerKind::kTemplate;
  EXPECT_THROW(MarkerTracker{o}, std::invalid_argument);
  const Clip c = MakeClip(
      Reference(MarkerKind::kQuadrant), 60, 24, {200, 170},
      [](double f) { return cv::Point2d(60 + 0.7 * f, 60 + 0.4 * f); }, 0.0);
  o.seed_px = c.truth[0] + cv::Point2d(0.3, -0.2);
  const Track t = TrackInMemory(c, o);
  ASSERT_TRUE(t.marker_chosen);
  EXPECT_EQ(t.kind, MarkerKind::kTemplate);
  // The template is cut around the rounded seed, so positions carry that constant offset.
  const cv::Point2d offset(std::round(o.seed_px->x) - c.truth[0].x, std::round(o.seed_px->y) - c.truth[0].y);
  Clip shifted = c;
  for (auto& p : shifted.truth) p += offset;
  int found = 0;
  EXPECT_LT(RmsError(t, shifted, &found), kTemplateRmsPx);
  EXPECT_EQ(found, 60);
}

TEST(Track, SeedPicksOneOfTwoMarkers) {
  cv::RNG rng(25);
  SyntheticMarkerOptions m = Reference(MarkerKind::kDot);
  std::vector<cv::Mat> frames;
  for (int f = 0; f < 10; ++f) {
    cv::Mat a = RenderSyntheticMarker({200, 170}, cv::Point2d(50.0 + f, 60.0), m, rng);
    cv::Mat b = RenderSyntheticMarker({200, 170}, cv::Point2d(150.0 - f, 110.0), m, rng);
    frames.push_back(cv::max(a, b));  // two bright dots on one background
  }
  TrackOptions o;
  o.seed_px = cv::Point2d(148, 112);
  MarkerTracker t(o);
  for (int f = 0; f < 10; ++f) t.Process(f, frames[static_cast<size_t>(f)]);
  const Track tr = t.Finish(10, "two");
  ASSERT_EQ(tr.tracked_frames, 10);
  EXPECT_NEAR(tr.samples[9].centre_px.x, 141, 0.1);
  EXPECT_NEAR(tr.samples[9].centre_px.y, 110, 0.1);
  // Without a seed, the choice is reported with the other candidate and the hint.
  MarkerTracker t2(TrackOptions{});
  t2.Process(0, frames[0]);
  const Track tr2 = t2.Finish(1, "two");
  ASSERT_FALSE(tr2.warnings.empty());
  EXPECT_NE(tr2.warnings[0].find("several marker candidates"), std::string::npos) << tr2.warnings[0];
  EXPECT_NE(tr2.warnings[0].find("--marker-at U,V"), std::string::npos);
}

TEST(Track, MarkerLeavingTheViewLeavesEmptyFramesReportedAsRanges) {
  // Moves right at 2 px/frame out of a 200 px frame, then comes back.
  auto path = [](double f) { return cv::Point2d(f < 60 ? 120 + 2 * f : 240 - 2 * (f - 60), 80); };
  const Clip c = MakeClip(Reference(MarkerKind::kDot), 120, 26, {200, 170}, path);
  const Track t = TrackInMemory(c, {});
  ASSERT_TRUE(t.marker_chosen);
  // Frames whose whole fit window (radius 9 + 3 px) is in view are found; frames with the dot
  // fully outside are never found (nothing is invented).
  int visible_found = 0, visible = 0;
  for (size_t f = 0; f < c.truth.size(); ++f) {
    const double u = c.truth[f].x;
    if (u < 200 - 1 - 14) {
      ++visible;
      visible_found += t.samples[f].found;
    }
    if (u > 200 + 10) {
      EXPECT_FALSE(t.samples[f].found) << f;
    }
  }
  // Re-acquisition after the return may take a few frames (one search in reacquire_every_frames).
  EXPECT_GE(visible_found, visible - 2 * TrackOptions{}.reacquire_every_frames);
  ASSERT_FALSE(t.lost.empty());
  EXPECT_GT(t.lost[0].first, 25);
  bool left = false, ranges = false;
  for (const std::string& w : t.warnings) {
    left |= w.find("marker left the view at frame") != std::string::npos;
    ranges |= w.find("left empty in track.csv, never interpolated") != std::string::npos;
  }
  EXPECT_TRUE(left);
  EXPECT_TRUE(ranges);
  EXPECT_LT(RmsError(t, c), kRmsTargetPx);
}

TEST(Track, MarkerNeverFoundIsAnErrorThatSaysWhatToTry) {
  cv::RNG rng(27);
  MarkerTracker t(TrackOptions{});
  for (int f = 0; f < 40; ++f) {
    cv::Mat blank(120, 160, CV_8U);
    rng.fill(blank, cv::RNG::NORMAL, 100, 2);
    t.Process(f, blank);
  }
  const Track tr = t.Finish(40, "empty.avi");
  EXPECT_FALSE(tr.marker_chosen);
  EXPECT_EQ(tr.tracked_frames, 0);
  ASSERT_EQ(tr.errors.size(), 1u);
  EXPECT_NE(tr.errors[0].find("empty.avi: no quadrant disc or dot marker found"), std::string::npos) << tr.errors[0];
  EXPECT_NE(tr.errors[0].find("Try: --marker-at U,V"), std::string::npos);
  EXPECT_NE(tr.errors[0].find("--marker template"), std::string::npos);
}

TEST(Track, SeedOutsideTheFrameIsRejected) {
  TrackOptions o;
  o.seed_px = cv::Point2d(500, 10);
  MarkerTracker t(o);
  cv::Mat img(100, 100, CV_8U, cv::Scalar(0));
  try {
    t.Process(0, img);
    FAIL() << "no exception";
  } catch (const std::invalid_argument& e) {
    EXPECT_NE(std::string(e.what()).find("seed (500.00, 10.00) lies outside the 100x100 frame"), std::string::npos);
  }
}

TEST(Track, BadOptionsAreRejectedWithTheFieldName) {
  TrackOptions o;
  o.min_quality = 1.5;
  try {
    MarkerTracker t(o);
    FAIL() << "no exception";
  } catch (const std::invalid_argument& e) {
    EXPECT_STREQ(e.what(), "tracker: min_quality = 1.5 is outside [0, 1)");
  }
}

TEST(Track, ClipFromAnImageFolderIsReadOnASecondThreadWithProgressAndGaps) {
  const test::TempDir tmp("track_test_folder");
  const fs::path& dir = tmp.path();
  const Clip c = MakeClip(Reference(MarkerKind::kQuadrant), 40, 28);
  for (int f = 0; f < 40; ++f) {
    if (f == 17) continue;  // a gap in the numbering
    char name[32];
    std::snprintf(name, sizeof name, "shot_%06d.png", 1200 + f);
    cv::imwrite((dir / name).string(), c.frames[static_cast<size_t>(f)]);
  }
  auto source = media::FrameSource::Open(dir);
  std::atomic<int> last_done{0};
  const Track t = TrackClip(*source, TrackOptions{}, [&](int done, int total) {
    last_done = done;
    EXPECT_EQ(total, 40);
  });
  EXPECT_EQ(last_done.load(), 40);
  EXPECT_EQ(t.frames, 40);
  EXPECT_EQ(t.tracked_frames, 39);
  EXPECT_FALSE(t.samples[17].found);
  EXPECT_TRUE(t.errors.empty());  // a missing frame is left empty: a warning, not a failure
  int named = 0;
  for (const std::string& w : t.warnings) named += w.find("no file for frame 17 (number 1217 is missing") != w.npos;
  EXPECT_EQ(named, 1);
  EXPECT_LT(RmsError(t, c), kRmsTargetPx);
}

}  // namespace
}  // namespace dropfit::tracker
