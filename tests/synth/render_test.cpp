// The clip renderer (synth/render.h): where it draws the marker, measured independently of
// the renderer by intensity moments on the rendered frame, its exposure model and determinism.
//
// Centre measurement (the independent check). The first moments of a background-subtracted
// intensity image give the centroid of the drawn shape (centre of gravity; e.g. van Assen et
// al. 2002, and docs/methods.md §9). For a dot the centroid is the centre of the dot;
// for the quadrant marker the white quarters are two opposite quarters of a disc, a shape
// symmetric under a half turn about the centre, so their centroid is the centre as well (the
// black quarters merge with the black cap, which is subtracted as background). The moment
// window stays inside the hub cap, whose level is measured on the frame itself.
#include "synth/render.h"

#include <gtest/gtest.h>
#include <opencv2/calib3d.hpp>

#include <cmath>

namespace dropfit::synth {
namespace {

// Requirement: the drawn centre known to < 0.01 px. The moments themselves carry sampling
// error of a few 1e-3 px (partly covered edge pixels), inside this bound.
constexpr double kCentreTolerancePx = 0.01;

ExposureSettings CleanExposure() { return WithoutImperfections(ExposureSettings{}); }

// Background-subtracted first moments over the pixels whose centres lie within `window_px`
// of `guess`; the background is the median of the ring of radii [r0, r1] px (inside the cap).
// Pixels outside the drawn shape weigh zero, so the window's edge does not bias the result.
template <typename Image>
cv::Point2d MomentCentroid(const Image& image, cv::Point2d guess, double window_px, double r0, double r1) {
  std::vector<double> ring;
  const int cu = static_cast<int>(std::lround(guess.x)), cv_ = static_cast<int>(std::lround(guess.y));
  const int outer = static_cast<int>(std::ceil(std::max(r1, window_px))) + 1;
  for (int v = cv_ - outer; v <= cv_ + outer; ++v) {
    for (int u = cu - outer; u <= cu + outer; ++u) {
      const double d = std::hypot(u - guess.x, v - guess.y);
      if (d >= r0 && d <= r1) ring.push_back(image(v, u));
    }
  }
  std::nth_element(ring.begin(), ring.begin() + static_cast<long>(ring.size() / 2), ring.end());
  const double background = ring[ring.size() / 2];
  double m0 = 0, mu = 0, mv = 0;
  for (int v = cv_ - outer; v <= cv_ + outer; ++v) {
    for (int u = cu - outer; u <= cu + outer; ++u) {
      if (std::hypot(u - guess.x, v - guess.y) > window_px) continue;
      const double w = image(v, u) - background;
      m0 += w;
      mu += w * u;
      mv += w * v;
    }
  }
  return {mu / m0, mv / m0};
}

// Where first moments of a perfectly drawn marker lie: the image-area centroid of its white
// part, by quadrature over the drop plane through the camera model alone (camera.h, checked
// against cv::projectPoints). Perspective and lens distortion are not affine, so this differs
// from the projected centre by up to ~0.015 px at the frame corners; the moment check compares
// against it, and the renderer's truth stays the projected centre (the quadrant's saddle
// point, and the dot's centre).
cv::Point2d PredictedMomentCentroid(const PinholeCamera& camera, const WheelPose& pose, double radius_m,
                                    MarkerShape shape, double plane_z_m = 0.0) {
  // Polar midpoint rule in the marker's own frame, so the quarter edges fall between nodes.
  const int nr = 120, nt = 480;
  const double h = 1e-6;
  double m0 = 0, mu = 0, mv = 0;
  for (int i = 0; i < nr; ++i) {
    const double r = (i + 0.5) / nr * radius_m;
    for (int j = 0; j < nt; ++j) {
      // White quarters: the first and third (render.h).
      if (shape == MarkerShape::kQuadrant && (j / (nt / 4)) % 2 == 1) continue;
      const double a = pose.spin_rad + (j + 0.5) / nt * 2 * CV_PI;
      const double x = pose.x_m + r * std::cos(a), y = pose.y_m + r * std::sin(a);
      const cv::Point2d p = ProjectWorldPoint(camera, {x, y, plane_z_m});
      const cv::Point2d px = ProjectWorldPoint(camera, {x + h, y, plane_z_m});
      const cv::Point2d py = ProjectWorldPoint(camera, {x, y + h, plane_z_m});
      const double area = std::abs((px.x - p.x) * (py.y - p.y) - (px.y - p.y) * (py.x - p.x)) / (h * h);
      const double w = r * area;
      m0 += w;
      mu += w * p.x;
      mv += w * p.y;
    }
  }
  return {mu / m0, mv / m0};
}

struct Case {
  MarkerShape shape;
  double diameter_m;
};

TEST(Render, DrawnMarkerCentreMatchesTheTruthByIntensityMoments) {
  const PinholeCamera camera = MakeCamera(CameraSetup{});
  std::mt19937_64 rng(42);
  std::uniform_real_distribution<double> jitter(-0.0005, 0.0005);
  const double px_per_m = 1.0 / MetresPerPixelAtCentre(camera);
  for (const Case& c : {Case{MarkerShape::kDot, 0.018}, Case{MarkerShape::kQuadrant, 0.030}}) {
    WheelLook look;
    look.marker = c.shape;
    look.marker_diameter_m = c.diameter_m;
    const SceneRenderer renderer(camera, look, SceneLook{});
    const double marker_r_px = c.diameter_m / 2 * px_per_m;
    const double cap_r_px = CapRadius(look) * px_per_m;
    // Near the centre, and towards two corners where distortion and perspective are strongest.
    for (const cv::Point2d base : {cv::Point2d(0.2, 0.3), cv::Point2d(0.51, 0.52), cv::Point2d(-0.1, 0.24)}) {
      for (double spin : {0.0, 0.37, 1.1}) {
        const WheelPose pose{base.x + jitter(rng), base.y + jitter(rng), spin};
        const cv::Point2d truth = ImageFromDropPlane(camera, {pose.x_m, pose.y_m});
        const cv::Point2d bias = PredictedMomentCentroid(camera, pose, c.diameter_m / 2, c.shape) - truth;
        const cv::Mat1f radiance = renderer.RenderRadiance({pose});
        const cv::Point2d measured =
            MomentCentroid(radiance, truth, cap_r_px - 1.5, marker_r_px + 1.5, cap_r_px - 1.5) - bias;
        EXPECT_NEAR(measured.x, truth.x, kCentreTolerancePx) << ToString(c.shape) << " at " << base << " spin " << spin;
        EXPECT_NEAR(measured.y, truth.y, kCentreTolerancePx) << ToString(c.shape) << " at " << base << " spin " << spin;
        // The 8-bit clean frame agrees too (its rounding noise averages out over the window).
        const cv::Mat1b frame = renderer.Expose(radiance, 0.0, CleanExposure(), nullptr);
        const cv::Point2d measured8 =
            MomentCentroid(frame, truth, cap_r_px - 1.5, marker_r_px + 1.5, cap_r_px - 1.5) - bias;
        EXPECT_NEAR(measured8.x, truth.x, kCentreTolerancePx) << ToString(c.shape) << " 8-bit";
        EXPECT_NEAR(measured8.y, truth.y, kCentreTolerancePx) << ToString(c.shape) << " 8-bit";
      }
    }
  }
}

TEST(Render, AMarkerOffTheDropPlaneIsDrawnWhereOpenCvProjectsItsPoint) {
  // The wheel drawn in the plane z_m = d (WheelLook::marker_offset_m): the marker's drawn centre,
  // by intensity moments, is where cv::projectPoints (the reference library) puts the world point
  // (x_m, y_m, d), and the frame truth says the same; it is not where the drop-plane point is.
  const PinholeCamera camera = MakeCamera(CameraSetup{});
  const double px_per_m = 1.0 / MetresPerPixelAtCentre(camera);
  const cv::Matx33d k(camera.intrinsics.fx_px, 0, camera.intrinsics.cx_px, 0, camera.intrinsics.fy_px,
                      camera.intrinsics.cy_px, 0, 0, 1);
  const std::vector<double> dist{camera.intrinsics.k1, camera.intrinsics.k2, camera.intrinsics.p1, camera.intrinsics.p2,
                                 camera.intrinsics.k3};
  for (double offset_m : {0.03, -0.02}) {
    WheelLook look;
    look.marker = MarkerShape::kDot;
    look.marker_diameter_m = 0.018;
    look.marker_offset_m = offset_m;
    const SceneRenderer renderer(camera, look, SceneLook{});
    // The scale in the wheel's plane is (D / (D - d)) times the drop plane's (similar triangles).
    const double scale = camera.tvec_m[2] / (camera.tvec_m[2] - offset_m);
    const double marker_r_px = look.marker_diameter_m / 2 * px_per_m * scale;
    const double cap_r_px = CapRadius(look) * px_per_m * scale;
    for (const cv::Point2d base : {cv::Point2d(-0.05, 0.12), cv::Point2d(0.45, 0.5)}) {
      const WheelPose pose{base.x, base.y, 0.4};
      std::vector<cv::Point2d> ref;
      cv::projectPoints(std::vector<cv::Point3d>{{pose.x_m, pose.y_m, offset_m}}, camera.rvec_rad, camera.tvec_m, k,
                        dist, ref);
      const cv::Point2d bias =
          PredictedMomentCentroid(camera, pose, look.marker_diameter_m / 2, look.marker, offset_m) - ref[0];
      const cv::Mat1f radiance = renderer.RenderRadiance({pose});
      const cv::Point2d measured =
          MomentCentroid(radiance, ref[0], cap_r_px - 1.5, marker_r_px + 1.5, cap_r_px - 1.5) - bias;
      EXPECT_NEAR(measured.x, ref[0].x, kCentreTolerancePx) << "offset " << offset_m << " at " << base;
      EXPECT_NEAR(measured.y, ref[0].y, kCentreTolerancePx) << "offset " << offset_m << " at " << base;
      // OpenCV's projection and ours agree in double precision (camera_test.cpp's bound).
      const cv::Point2d ours = renderer.ImageFromWheelPlane({pose.x_m, pose.y_m});
      EXPECT_NEAR(ours.x, ref[0].x, 1e-7);
      EXPECT_NEAR(ours.y, ref[0].y, 1e-7);
      EXPECT_GT(cv::norm(ref[0] - ImageFromDropPlane(camera, {pose.x_m, pose.y_m})), 1.0);
    }
  }
}

// A simple bouncing scenario for the clip-level tests.
analysis::Trajectory TestDrop() {
  analysis::DropScenario s;
  s.setup.law = analysis::LawId::kKelvinVoigt;
  s.setup.mass_kg = 5.0;
  s.law_params = {4e4, 100.0};
  s.onset_height_m = 0.2;
  s.start_time_s = 0.0;
  s.start_height_m = 0.45;
  s.end_time_s = 0.6;
  s.start_x_m = 0.2;
  s.drift_speed_mps = 0.01;
  s.spin_rate_radps = 1.5;
  return analysis::SimulateDrop(s);
}

class MemorySink : public media::FrameSink {
 public:
  void Write(const cv::Mat& grey8) override { frames.push_back(grey8.clone()); }
  void Close() override {}
  int frames_written() const override { return static_cast<int>(frames.size()); }
  std::vector<cv::Mat> frames;
};

TEST(Render, MotionBlurredMarkerIsCentredOnTheMidExposurePosition) {
  // Fast flight (about 2.2 m/s, 0.45 px per sub-frame step over a 0.8 ms exposure): the blurred
  // dot's centroid is the mean of the sub-frame positions, which for motion of constant
  // acceleration is the mid-exposure position up to a T^2/24 term (~1e-9 m here).
  const PinholeCamera camera = MakeCamera(CameraSetup{});
  WheelLook look;
  look.marker = MarkerShape::kDot;
  look.marker_diameter_m = 0.018;
  const SceneRenderer renderer(camera, look, SceneLook{});
  const analysis::Trajectory drop = TestDrop();
  ExposureSettings e = CleanExposure();
  e.subframes = 8;
  e.exposure_s = 8e-4;
  const double fps = 1000;
  const int frame = 220;  // 0.22 s after release: still falling
  const FrameTruth truth = TruthOfFrame(renderer, drop, frame, fps);
  ASSERT_FALSE(truth.in_contact);
  ASSERT_LT(truth.vy_mps, -2.0);
  const cv::Mat1f radiance = renderer.RenderRadiance(SubframePoses(drop, frame, fps, e));
  const double px_per_m = 1.0 / MetresPerPixelAtCentre(camera);
  const double cap_r_px = CapRadius(look) * px_per_m;
  const cv::Point2d bias =
      PredictedMomentCentroid(camera, {truth.x_m, truth.y_m, 0.0}, look.marker_diameter_m / 2, look.marker) -
      cv::Point2d(truth.u_px, truth.v_px);
  const cv::Point2d measured =
      MomentCentroid(radiance, {truth.u_px, truth.v_px}, cap_r_px - 1.5, 12.0, cap_r_px - 1.5) - bias;
  EXPECT_NEAR(measured.x, truth.u_px, kCentreTolerancePx);
  EXPECT_NEAR(measured.y, truth.v_px, kCentreTolerancePx);
}

TEST(Render, SameSeedGivesIdenticalFramesAndAnotherSeedDoesNot) {
  CameraSetup setup;
  setup.intrinsics.image_size = {320, 640};
  setup.intrinsics.cx_px = 160.3;
  const PinholeCamera camera = MakeCamera(setup);
  const SceneRenderer renderer(camera, WheelLook{}, SceneLook{});
  const analysis::Trajectory drop = TestDrop();
  MemorySink a, b, c;
  const auto truth_a = RenderClip(renderer, drop, 3, 2000, ExposureSettings{}, true, 7, a);
  const auto truth_b = RenderClip(renderer, drop, 3, 2000, ExposureSettings{}, true, 7, b);
  RenderClip(renderer, drop, 3, 2000, ExposureSettings{}, true, 8, c);
  ASSERT_EQ(a.frames.size(), 3u);
  for (size_t i = 0; i < 3; ++i) {
    EXPECT_EQ(cv::norm(a.frames[i], b.frames[i], cv::NORM_INF), 0.0);
    EXPECT_GT(cv::norm(a.frames[i], c.frames[i], cv::NORM_INF), 0.0);
    EXPECT_EQ(truth_a[i].u_px, truth_b[i].u_px);
  }
}

TEST(Render, NoiseHasTheModelledShotAndReadVariance) {
  // Variance of (noisy - noise-free) exposures = mu / gain + read^2 (render.h exposure model),
  // plus 1/12 grey level^2 from rounding each of the two images (Sheppard's correction, common
  // practice). 400k pixels give the s.d. to ~0.2 %; 3 % leaves room for the rounding model.
  const PinholeCamera camera = MakeCamera(CameraSetup{});
  const SceneRenderer renderer(camera, WheelLook{}, SceneLook{});
  ExposureSettings e;
  e.read_noise_grey = 2.0;
  e.electrons_per_grey = 16.0;
  const cv::Mat1f radiance = renderer.static_radiance();
  std::mt19937_64 rng(3);
  const cv::Mat1b noisy = renderer.Expose(radiance, 0.001, e, &rng);
  const cv::Mat1b clean = renderer.Expose(radiance, 0.001, e, nullptr);
  double sum2 = 0, expected = 0;
  long n = 0;
  for (int v = 0; v < radiance.rows; ++v) {
    for (int u = 0; u < radiance.cols; ++u) {
      const double d = static_cast<double>(noisy(v, u)) - clean(v, u);
      sum2 += d * d;
      // Vignetting lowers mu off-centre; use the clean exposure as mu.
      expected += clean(v, u) / e.electrons_per_grey + e.read_noise_grey * e.read_noise_grey + 2.0 / 12.0;
      ++n;
    }
  }
  EXPECT_NEAR(std::sqrt(sum2 / n), std::sqrt(expected / n), 0.03 * std::sqrt(expected / n));
}

TEST(Render, FlattenedTyreNeverCrossesTheFloor) {
  const PinholeCamera camera = MakeCamera(CameraSetup{});
  WheelLook look;
  const SceneRenderer renderer(camera, look, SceneLook{});
  // Hub 15 mm lower than the free radius: pressed into the floor.
  const WheelPose pose{0.2, look.free_radius_m - 0.015, 0.0};
  const cv::Mat1f with = renderer.RenderRadiance({pose});
  const cv::Mat1f& without = renderer.static_radiance();
  int changed_below = 0, changed_above = 0;
  for (int v = 0; v < with.rows; ++v) {
    for (int u = 0; u < with.cols; ++u) {
      if (with(v, u) == without(v, u)) continue;
      // Only pixels entirely below the floor line (a pixel's reach) count as crossing.
      if (renderer.PlaneAtPixel(u, v).y < -0.001) ++changed_below;
      if (renderer.PlaneAtPixel(u, v).y > 0.001) ++changed_above;
    }
  }
  EXPECT_EQ(changed_below, 0);
  EXPECT_GT(changed_above, 1000);
}

// The card's edge is a straight line: in a row across it, the card's coverage summed over the
// pixels (each pixel u covering [u - 1/2, u + 1/2]) is the distance from the row's start to the
// edge, with or without the symmetric lens blur (which moves no area); common practice, no
// source. Where the edge stands comes from the marker rim's image (ImageFromDropPlane, checked
// against OpenCV in camera_test).
TEST(Render, OccluderCardCoversTheAskedFractionOfTheMarker) {
  // Sampling of the edge profile (8 x 8 per pixel): far below a hundredth of a pixel.
  constexpr double kEdgeTolerancePx = 2e-3;
  const PinholeCamera camera = MakeCamera(CameraSetup{});
  WheelLook look;
  look.marker = MarkerShape::kDot;
  look.marker_diameter_m = 0.018;
  const SceneRenderer renderer(camera, look, SceneLook{});
  const WheelPose pose{0.21, 0.33, 0.4};
  const cv::Point2d centre = ImageFromDropPlane(camera, {pose.x_m, pose.y_m});
  double left = 1e9, right = -1e9;
  for (int i = 0; i < 3600; ++i) {
    const double a = 2 * 3.141592653589793 * i / 3600;
    const cv::Point2d p = ImageFromDropPlane(camera, {pose.x_m + 0.009 * std::cos(a), pose.y_m + 0.009 * std::sin(a)});
    left = std::min(left, p.x);
    right = std::max(right, p.x);
  }
  Occluder card;
  card.first_frame = 0;
  card.last_frame = 0;
  card.grey = 0.0;  // angle 0: the card comes from the left
  const int row = static_cast<int>(std::lround(centre.y));
  for (double psf : {0.0, 0.5}) {
    for (double cover : {0.0, 0.375, 1.0}) {
      cv::Mat1f radiance(renderer.image_size(), 200.0f);
      DrawOccluder(renderer, pose, card, cover, psf, radiance);
      double covered = 0;
      for (int u = 0; u < radiance.cols; ++u) covered += 1.0 - radiance(row, u) / 200.0;
      const double edge_u = left + cover * (right - left);
      EXPECT_NEAR(covered, edge_u + 0.5, kEdgeTolerancePx) << "psf " << psf << ", cover " << cover;
    }
  }
  // The cover grows linearly over the card's frames and is 0 outside them.
  card.first_frame = 10;
  card.last_frame = 18;
  card.cover_from = 0.0;
  card.cover_to = 1.0;
  EXPECT_DOUBLE_EQ(OccluderCover(card, 9), 0.0);
  EXPECT_DOUBLE_EQ(OccluderCover(card, 10), 0.0);
  EXPECT_DOUBLE_EQ(OccluderCover(card, 13), 3.0 / 8);
  EXPECT_DOUBLE_EQ(OccluderCover(card, 18), 1.0);
  EXPECT_DOUBLE_EQ(OccluderCover(card, 19), 0.0);
  EXPECT_DOUBLE_EQ(OccluderCover(Occluder{}, 13), 0.0);
  card.cover_to = 1.5;
  EXPECT_EQ(*ValidateOccluder(card), "occluder cover 0:1.5 must lie in [0, 1]");
}

TEST(Render, ClipTruthGivesTheFractionCoveredOnTheCardsFramesOnly) {
  CameraSetup setup;
  setup.intrinsics.image_size = {320, 640};
  setup.intrinsics.cx_px = 160.3;
  const PinholeCamera camera = MakeCamera(setup);
  const SceneRenderer renderer(camera, WheelLook{}, SceneLook{});
  Occluder card;
  card.first_frame = 1;
  card.last_frame = 2;
  card.cover_from = 0.25;
  card.cover_to = 0.75;
  MemorySink with, without;
  const auto truth = RenderClip(renderer, TestDrop(), 4, 2000, CleanExposure(), false, 7, with, card);
  RenderClip(renderer, TestDrop(), 4, 2000, CleanExposure(), false, 7, without);
  ASSERT_EQ(truth.size(), 4u);
  EXPECT_EQ(truth[0].marker_covered_fraction, 0.0);
  EXPECT_EQ(truth[1].marker_covered_fraction, 0.25);
  EXPECT_EQ(truth[2].marker_covered_fraction, 0.75);
  EXPECT_EQ(truth[3].marker_covered_fraction, 0.0);
  // Only the card's frames differ from the clip without it.
  EXPECT_EQ(cv::norm(with.frames[0], without.frames[0], cv::NORM_INF), 0.0);
  EXPECT_GT(cv::norm(with.frames[1], without.frames[1], cv::NORM_INF), 0.0);
  EXPECT_EQ(cv::norm(with.frames[3], without.frames[3], cv::NORM_INF), 0.0);
}

TEST(Render, BadLooksAreRejectedWithTheFieldAndWhatToDo) {
  WheelLook look;
  look.rim_radius_m = 0.03;
  const auto msg = ValidateWheelLook(look);
  ASSERT_TRUE(msg.has_value());
  EXPECT_NE(msg->find("rim radius 0.03 m must be at least"), std::string::npos) << *msg;
  EXPECT_THROW(MarkerShapeFromString("cross"), std::invalid_argument);
  ExposureSettings e;
  e.exposure_s = 1e-3;
  EXPECT_EQ(*ValidateExposure(e, 2000), "exposure 0.001 s must be positive and at most the frame interval 0.0005 s");
}

}  // namespace
}  // namespace dropfit::synth
