#include "tracker/symmetry_fit.h"

#include <gtest/gtest.h>

#include <cmath>

#include "tests/support/synthetic_marker.h"

namespace dropfit::tracker {
namespace {

using test::RenderSyntheticMarker;
using test::SyntheticMarkerOptions;

// docs/methods.md §9: 0.05 px RMS as the pass threshold at σ_n ≈ 2 grey levels for a
// well-contrasted synthetic marker (own simulations there; cornerSubPix gets
// 0.037 px on an X-corner at σ_n = 2). The target for the hub marker is the same 0.05 px.
constexpr double kRmsTargetPx = 0.05;
// Noise-free, 8-bit quantised frames with sharp edges (0.5 px optical blur): only quantisation and
// interpolation ("pixel locking") remain. §9 gives 0.020 px for cornerSubPix on the same kind of
// frame; we require clearly better.
constexpr double kNoiseFreeRmsPx = 0.015;

struct Stats {
  double rms_px = 0;
  double mean_quality = 0;
  int failures = 0;
};

Stats RunTrials(const SyntheticMarkerOptions& marker, const SymmetryFitOptions& fit, int trials, uint64_t seed,
                double start_error_px = 0.7) {
  cv::RNG rng(seed);
  SymmetryFitter fitter(fit);
  double sum2 = 0, sumq = 0;
  Stats s;
  for (int i = 0; i < trials; ++i) {
    SyntheticMarkerOptions m = marker;
    m.rotation_rad = rng.uniform(-3.14, 3.14);
    const cv::Point2d truth(40 + rng.uniform(0.0, 1.0), 40 + rng.uniform(0.0, 1.0));
    const cv::Mat img = RenderSyntheticMarker({80, 80}, truth, m, rng);
    const cv::Point2d start =
        truth + cv::Point2d(rng.uniform(-start_error_px, start_error_px), rng.uniform(-start_error_px, start_error_px));
    const SymmetryFitResult r = fitter.Fit(img, start);
    if (!r.converged) {
      ++s.failures;
      continue;
    }
    const cv::Point2d e = r.centre_px - truth;
    sum2 += e.dot(e);
    sumq += r.quality;
  }
  const int ok = trials - s.failures;
  s.rms_px = ok ? std::sqrt(sum2 / ok) : 1e9;
  s.mean_quality = ok ? sumq / ok : 0;
  return s;
}

TEST(SymmetryFit, QuadrantDiscCentreIsExactWithoutNoise) {
  SyntheticMarkerOptions m;
  m.read_noise = 0;
  SymmetryFitOptions f;
  f.window_radius_px = 0.75 * m.radius_px;
  const Stats s = RunTrials(m, f, 40, 11);
  EXPECT_EQ(s.failures, 0);
  EXPECT_LT(s.rms_px, kNoiseFreeRmsPx);
  EXPECT_GT(s.mean_quality, 0.99);
}

// "Pixel locking": with sharp edges an interpolating sampler pulls the centre towards
// preferred sub-pixel fractions. Sweeping the true centre across one pixel in x, noise-free (8-bit
// quantised, 0.5 px optical blur), the error must stay small and not follow the fraction. Measured
// 2026-12-02 on this sweep: bilinear sampling (the third-moment term derived in symmetry_fit.cpp)
// 0.0074 px RMS (quadrant) and 0.0121 px (dot); four-point Lagrange 0.0037 and 0.0055 px. The
// bounds sit between, so a sampler that locks like bilinear fails. Truth: the drawn centre.
TEST(SymmetryFit, CentreDoesNotLockToPixelFractions) {
  for (const MarkerKind kind : {MarkerKind::kQuadrant, MarkerKind::kDot}) {
    SyntheticMarkerOptions m;
    m.kind = kind;
    m.radius_px = kind == MarkerKind::kQuadrant ? 15 : 9;
    m.read_noise = 0;
    SymmetryFitOptions f;
    f.window_radius_px = kind == MarkerKind::kQuadrant ? 0.75 * m.radius_px : m.radius_px + 3;
    SymmetryFitter fitter(f);
    cv::RNG rng(1);
    double sum2 = 0;
    const int steps = 20;
    for (int i = 0; i < steps; ++i) {
      const cv::Point2d truth(40 + i * 0.05, 40.3);
      const SymmetryFitResult r =
          fitter.Fit(RenderSyntheticMarker({80, 80}, truth, m, rng), truth + cv::Point2d(0.3, -0.2));
      ASSERT_TRUE(r.converged);
      sum2 += std::pow(r.centre_px.x - truth.x, 2);
    }
    EXPECT_LT(std::sqrt(sum2 / steps), kind == MarkerKind::kQuadrant ? 0.0055 : 0.0085) << ToString(kind);
  }
}

TEST(SymmetryFit, QuadrantDiscMeetsTheTargetUnderReferenceConditions) {
  SyntheticMarkerOptions m;  // contrast 160, noise 2 + shot noise, motion blur 0.6 px, JPEG q90
  m.shot_noise_per_level = 0.02;
  m.motion_px = {0.2, 0.57};
  m.jpeg_quality = 90;
  SymmetryFitOptions f;
  f.window_radius_px = 0.75 * m.radius_px;
  const Stats s = RunTrials(m, f, 100, 12);
  EXPECT_EQ(s.failures, 0);
  EXPECT_LT(s.rms_px, kRmsTargetPx);
  std::printf("quadrant rms %.4f px\n", s.rms_px);
}

TEST(SymmetryFit, DotMeetsTheTargetUnderReferenceConditions) {
  for (bool bright : {true, false}) {
    SyntheticMarkerOptions m;
    m.kind = MarkerKind::kDot;
    m.radius_px = 9;
    m.bright_dot = bright;
    m.background = bright ? 40 : 210;
    m.bright = 210;
    m.dark = 40;
    m.shot_noise_per_level = 0.02;
    m.motion_px = {-0.3, 0.5};
    m.jpeg_quality = 90;
    SymmetryFitOptions f;
    f.window_radius_px = m.radius_px + 3;
    const Stats s = RunTrials(m, f, 100, bright ? 13 : 14);
    EXPECT_EQ(s.failures, 0);
    EXPECT_LT(s.rms_px, kRmsTargetPx) << (bright ? "bright" : "dark");
    std::printf("dot rms %.4f px\n", s.rms_px);
  }
}

TEST(SymmetryFit, UnevenLightDoesNotPullTheCentre) {
  SyntheticMarkerOptions m;
  m.light_gradient_per_px = 0.02;  // 30 % brighter on one side of the disc than the other
  m.read_noise = 0;
  SymmetryFitOptions f;
  f.window_radius_px = 0.75 * m.radius_px;
  EXPECT_LT(RunTrials(m, f, 30, 15).rms_px, 2 * kNoiseFreeRmsPx);
  // Without the light terms, the same frames are located worse: the model is what helps.
  f.fit_light_gradient = false;
  m.kind = MarkerKind::kDot;
  m.radius_px = 9;
  f.window_radius_px = 12;
  SymmetryFitOptions with = f;
  with.fit_light_gradient = true;
  EXPECT_LT(RunTrials(m, with, 30, 16).rms_px, RunTrials(m, f, 30, 16).rms_px);
}

TEST(SymmetryFit, PureNoiseHasLowQuality) {
  cv::RNG rng(17);
  cv::Mat img(60, 60, CV_8U);
  rng.fill(img, cv::RNG::NORMAL, 128, 10);
  SymmetryFitOptions f;
  f.max_shift_px = 100;
  const SymmetryFitResult r = SymmetryFitter(f).Fit(img, {30, 30});
  EXPECT_LT(r.quality, 0.3);
}

TEST(SymmetryFit, WindowOffTheFrameIsReportedNotRead) {
  cv::Mat img(40, 40, CV_8U, cv::Scalar(100));
  SymmetryFitOptions f;
  const SymmetryFitResult r = SymmetryFitter(f).Fit(img, {3, 20});
  EXPECT_FALSE(r.inside);
  EXPECT_FALSE(r.converged);
}

TEST(SymmetryFit, BadOptionsAreRejectedWithTheFieldName) {
  SymmetryFitOptions f;
  f.window_radius_px = 0.5;
  try {
    SymmetryFitter fitter(f);
    FAIL() << "no exception";
  } catch (const std::invalid_argument& e) {
    EXPECT_NE(std::string(e.what()).find("window_radius_px = 0.5 px is outside (1, 200]"), std::string::npos);
  }
}

}  // namespace
}  // namespace dropfit::tracker
