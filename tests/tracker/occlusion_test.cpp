// Partly hidden markers (tracker/track.h, "Judging each frame against the clip's own"): a card
// edge swept across the hub marker in eighths of its extent, rendered by dropfit's renderer
// (synth/render.h, Occluder) under the reference conditions (the `dropfit render` defaults:
// 800x640, 4 sub-frames of motion blur, read and shot noise, lens blur, vignetting, flicker,
// JPEG q90), both marker kinds. The truth is the drawn marker centre and the fraction covered.
// The requirement (issue 16): a frame kept is within 0.05 px of the truth; a frame more than an
// eighth covered is left empty, with its reason; a clip without a card keeps every frame. The
// sweep starts at 1/8: with the card's edge just touching the dot (0/8) its lens-blurred edge
// eats into the dot's blurred rim and pulls the centre by 0.045-0.07 px, a pull neither the
// misfit nor the robust shift tells from the clip's own spread (bench/occlusion_bench).
#include <gtest/gtest.h>
#include <opencv2/imgcodecs.hpp>

#include <cmath>
#include <vector>

#include "analysis/forward_model.h"
#include "media/video_out.h"
#include "synth/camera.h"
#include "synth/render.h"
#include "tracker/track.h"

namespace dropfit::tracker {
namespace {

// docs/methods.md §9 and §15: 0.05 px is the tracker's precision target at reference conditions;
// issue 16 asks that no kept frame be farther than that from the truth.
constexpr double kKeptFrameTolerancePx = 0.05;
// "More than about an eighth covered": frames covering 2/8 and more must be empty; at 1/8 the
// tracker may keep a frame (then within the tolerance) or leave it empty.
constexpr double kMustBeEmptyCover = 0.2;

constexpr int kCleanBefore = 12;  // frames before the card (the clip's own distribution)
constexpr int kSweep = 8;         // cover 1/8, 2/8, ..., 8/8
constexpr int kCleanAfter = 3;

// Frames kept in memory, each through JPEG q90 as an MJPG clip stores them.
class JpegMemorySink final : public media::FrameSink {
 public:
  void Write(const cv::Mat& grey8) override {
    std::vector<uchar> bytes;
    cv::imencode(".jpg", grey8, bytes, {cv::IMWRITE_JPEG_QUALITY, 90});
    frames.push_back(cv::imdecode(bytes, cv::IMREAD_GRAYSCALE));
  }
  void Close() override {}
  int frames_written() const override { return static_cast<int>(frames.size()); }
  std::vector<cv::Mat> frames;
};

struct Rendered {
  std::vector<cv::Mat> frames;
  std::vector<synth::FrameTruth> truth;
};

// The wheel falling through the view at about 2 m/s, 2,000 frames/s, the renderer's default
// camera and exposure; the card (when active) on frames kCleanBefore .. kCleanBefore + 7.
Rendered Render(synth::MarkerShape shape, const synth::Occluder& card, int frames) {
  const synth::PinholeCamera camera = synth::MakeCamera(synth::CameraSetup{});
  synth::WheelLook wheel;
  wheel.marker = shape;
  wheel.marker_diameter_m = shape == synth::MarkerShape::kDot ? 0.018 : 0.030;
  const synth::SceneRenderer renderer(camera, wheel, synth::SceneLook{});
  analysis::DropScenario drop;
  drop.setup.mass_kg = 12.0;
  drop.law_params = {3.0e5, 400.0};  // Kelvin-Voigt k [N/m], c [N s/m]
  drop.onset_height_m = wheel.free_radius_m;
  drop.start_height_m = 0.62;
  drop.start_x_m = 0.17;
  drop.drift_speed_mps = 0.15;
  drop.spin_rate_radps = 6.0;
  drop.start_time_s = -0.2;
  drop.end_time_s = 0.05;
  const analysis::Trajectory trajectory = analysis::SimulateDrop(drop);
  JpegMemorySink sink;
  Rendered r;
  r.truth = synth::RenderClip(renderer, trajectory, frames, 2000.0, synth::ExposureSettings{}, true, 77, sink, card);
  r.frames = std::move(sink.frames);
  return r;
}

Track TrackInMemory(const Rendered& r, const TrackOptions& options = {}) {
  MarkerTracker t{options};
  for (size_t i = 0; i < r.frames.size(); ++i) t.Process(static_cast<int>(i), r.frames[i]);
  return t.Finish(static_cast<int>(r.frames.size()), "clip");
}

double ErrorPx(const TrackSample& s, const synth::FrameTruth& t) {
  return std::hypot(s.centre_px.x - t.u_px, s.centre_px.y - t.v_px);
}

void CheckSweep(synth::MarkerShape shape, double angle_deg) {
  synth::Occluder card;
  card.first_frame = kCleanBefore;
  card.last_frame = kCleanBefore + kSweep - 1;
  card.cover_from = 1.0 / 8;
  card.angle_deg = angle_deg;
  const Rendered r = Render(shape, card, kCleanBefore + kSweep + kCleanAfter);
  const Track track = TrackInMemory(r);
  ASSERT_TRUE(track.marker_chosen) << track.choice;
  int empty_with_reason = 0;
  for (const TrackSample& s : track.samples) {
    const synth::FrameTruth& t = r.truth[static_cast<size_t>(s.frame)];
    SCOPED_TRACE("frame " + std::to_string(s.frame) + ", covered " + std::to_string(t.marker_covered_fraction));
    if (t.marker_covered_fraction == 0.0 && (s.frame < kCleanBefore || s.frame >= kCleanBefore + kSweep)) {
      EXPECT_TRUE(s.found) << "a frame without the card was left empty";
    }
    if (s.found) {
      EXPECT_LE(ErrorPx(s, t), kKeptFrameTolerancePx);
      EXPECT_GT(s.quality, 0.0);
    } else {
      EXPECT_EQ(s.quality, 0.0);
    }
    if (t.marker_covered_fraction > kMustBeEmptyCover) {
      EXPECT_FALSE(s.found);
    }
  }
  // Frames where the marker was located but distrusted carry a reason; they are not found.
  for (const EmptyFrame& e : track.left_empty) {
    ASSERT_LT(static_cast<size_t>(e.frame), track.samples.size());
    EXPECT_FALSE(track.samples[static_cast<size_t>(e.frame)].found);
    EXPECT_GE(e.frame, kCleanBefore);
    EXPECT_LT(e.frame, kCleanBefore + kSweep);
    EXPECT_NE(e.reason.find("partly hidden"), std::string::npos) << e.reason;
    ++empty_with_reason;
  }
  // At 2/8 the fit still converges on what is left of the marker: that frame must be among
  // those left empty with a reason (not merely lost).
  EXPECT_GE(empty_with_reason, 1);
  const TrackSample& quarter = track.samples[static_cast<size_t>(kCleanBefore + 1)];
  EXPECT_FALSE(quarter.found);
}

void CheckCleanClipKeepsEveryFrame(synth::MarkerShape shape) {
  const Rendered r = Render(shape, synth::Occluder{}, 16);
  const Track track = TrackInMemory(r);
  EXPECT_TRUE(track.left_empty.empty()) << (track.left_empty.empty() ? "" : track.left_empty[0].reason);
  EXPECT_EQ(track.tracked_frames, 16);
  for (const TrackSample& s : track.samples) {
    EXPECT_LE(ErrorPx(s, r.truth[static_cast<size_t>(s.frame)]), kKeptFrameTolerancePx) << "frame " << s.frame;
  }
}

// 45°: the direction in which the quadrant's misfit at 1/8 stays near the clip's own level while
// the centre is pulled by ~0.07 px without the robust-shift test (bench/occlusion_bench).
TEST(PartlyHiddenMarker, QuadrantDiscSweptByACardKeepsOnlyAccurateFramesAndEmptiesTheCoveredOnes) {
  CheckSweep(synth::MarkerShape::kQuadrant, 45.0);
}

TEST(PartlyHiddenMarker, DotSweptByACardKeepsOnlyAccurateFramesAndEmptiesTheCoveredOnes) {
  CheckSweep(synth::MarkerShape::kDot, 180.0);
}

// A card whose edge touches the dot (cover 0: it hides the dark ring around the white dot and the
// dot's blurred rim on one side) pulled the plain centre 0.054-0.060 px in the benchmark's eight
// directions; the robust centre, reported for frames whose robust shift stands out, keeps them
// within the tolerance. 45 degrees was the worst direction.
TEST(PartlyHiddenMarker, ACardTouchingTheDotLeavesTheKeptCentreWithinTheTolerance) {
  synth::Occluder card;
  card.first_frame = kCleanBefore;
  card.last_frame = kCleanBefore + 3;
  card.cover_from = card.cover_to = 0.0;
  card.angle_deg = 45.0;
  const Rendered r = Render(synth::MarkerShape::kDot, card, kCleanBefore + 4 + kCleanAfter);
  const Track track = TrackInMemory(r);
  TrackOptions plain;
  plain.robust_centre_mads = 1000.0;  // the plain centre everywhere: the failure this guards against
  const Track without = TrackInMemory(r, plain);
  double worst = 0.0, worst_plain = 0.0;
  for (int f = kCleanBefore; f < kCleanBefore + 4; ++f) {
    const TrackSample& s = track.samples[static_cast<size_t>(f)];
    const synth::FrameTruth& t = r.truth[static_cast<size_t>(f)];
    if (s.found) worst = std::max(worst, ErrorPx(s, t));
    const TrackSample& p = without.samples[static_cast<size_t>(f)];
    if (p.found) worst_plain = std::max(worst_plain, ErrorPx(p, t));
  }
  EXPECT_LE(worst, kKeptFrameTolerancePx);
  EXPECT_GT(worst_plain, kKeptFrameTolerancePx) << "the scene no longer pulls the plain centre";
  EXPECT_GT(worst_plain, worst);
}

TEST(PartlyHiddenMarker, ClipsWithoutACardKeepEveryFrame) {
  CheckCleanClipKeepsEveryFrame(synth::MarkerShape::kQuadrant);
  CheckCleanClipKeepsEveryFrame(synth::MarkerShape::kDot);
}

TEST(PartlyHiddenMarker, JudgementSwitchedOffKeepsTheConfidentWrongCentre) {
  // The failure issue 16 reports, reproduced: without the judgement a frame an eighth covered is
  // kept with a high quality and a centre pulled well beyond the tolerance. (Guards the test
  // scene: the sweeps above would pass trivially if the card missed the marker.)
  synth::Occluder card;
  card.first_frame = kCleanBefore;
  card.last_frame = kCleanBefore + kSweep - 1;
  card.cover_from = 1.0 / 8;
  card.angle_deg = 180.0;
  const Rendered r = Render(synth::MarkerShape::kDot, card, kCleanBefore + 2);
  TrackOptions o;
  o.judge_against_clip = false;
  MarkerTracker t(o);
  for (size_t i = 0; i < r.frames.size(); ++i) t.Process(static_cast<int>(i), r.frames[i]);
  const Track track = t.Finish(static_cast<int>(r.frames.size()), "clip");
  const TrackSample& eighth = track.samples[static_cast<size_t>(kCleanBefore)];
  ASSERT_TRUE(eighth.found);
  EXPECT_GT(eighth.quality, 0.9);
  EXPECT_GT(ErrorPx(eighth, r.truth[static_cast<size_t>(kCleanBefore)]), 5 * kKeptFrameTolerancePx);
  EXPECT_TRUE(track.left_empty.empty());
}

}  // namespace
}  // namespace dropfit::tracker
