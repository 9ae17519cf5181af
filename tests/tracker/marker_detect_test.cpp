#include "tracker/marker_detect.h"

#include <gtest/gtest.h>
#include <opencv2/imgproc.hpp>

#include "tests/support/synthetic_marker.h"

namespace dropfit::tracker {
namespace {

using test::RenderSyntheticMarker;
using test::SyntheticMarkerOptions;

// Detection hands the tracker a start within its fit's reach; the fit does the rest. A tenth
// of a pixel is ample (common practice, no source).
constexpr double kProposalTolerancePx = 0.1;
// The radius found at the half-contrast crossing of a blurred edge (own simulations).
constexpr double kRadiusTolerancePx = 0.6;

TEST(MarkerDetect, QuadrantDiscAndDotAreFoundWithTheirKindRadiusAndPolarity) {
  cv::RNG rng(41);
  SyntheticMarkerOptions q;
  q.radius_px = 14;
  cv::Mat img = RenderSyntheticMarker({240, 160}, {60.3, 80.6}, q, rng);
  SyntheticMarkerOptions d;
  d.kind = MarkerKind::kDot;
  d.radius_px = 7;
  d.bright_dot = false;
  d.background = 120;
  const cv::Mat dot = RenderSyntheticMarker({240, 160}, {170.8, 70.2}, d, rng);
  dot(cv::Rect(120, 0, 120, 160)).copyTo(img(cv::Rect(120, 0, 120, 160)));

  const auto c = FindMarkerCandidates(img, {0, 0, 240, 160}, MarkerKind::kAuto, DetectOptions{});
  ASSERT_EQ(c.size(), 2u);
  const MarkerCandidate& quad = c[0].kind == MarkerKind::kQuadrant ? c[0] : c[1];
  const MarkerCandidate& dt = c[0].kind == MarkerKind::kDot ? c[0] : c[1];
  EXPECT_EQ(quad.kind, MarkerKind::kQuadrant);
  EXPECT_NEAR(quad.centre_px.x, 60.3, kProposalTolerancePx);
  EXPECT_NEAR(quad.centre_px.y, 80.6, kProposalTolerancePx);
  EXPECT_NEAR(quad.radius_px, 14, kRadiusTolerancePx);
  EXPECT_LT(quad.quarter_turn_corr, -0.9);
  EXPECT_EQ(dt.kind, MarkerKind::kDot);
  EXPECT_FALSE(dt.bright);
  EXPECT_NEAR(dt.centre_px.x, 170.8, kProposalTolerancePx);
  EXPECT_NEAR(dt.centre_px.y, 70.2, kProposalTolerancePx);
  EXPECT_NEAR(dt.radius_px, 7, kRadiusTolerancePx);
  EXPECT_NE(dt.Describe().find("dark dot of radius 7."), std::string::npos) << dt.Describe();

  // Asking for one kind returns only that kind.
  const auto only = FindMarkerCandidates(img, {0, 0, 240, 160}, MarkerKind::kDot, DetectOptions{});
  ASSERT_EQ(only.size(), 1u);
  EXPECT_EQ(only[0].kind, MarkerKind::kDot);
}

TEST(MarkerDetect, PlainEdgesAndLowContrastAreNotMarkers) {
  cv::RNG rng(42);
  cv::Mat img(120, 160, CV_8U, cv::Scalar(60));
  img(cv::Rect(80, 0, 80, 120)).setTo(200);               // a straight edge
  cv::rectangle(img, {20, 20, 30, 50}, 180, cv::FILLED);  // a rectangle (corners, not X-corners)
  cv::Mat noise(img.size(), CV_8U);
  rng.fill(noise, cv::RNG::NORMAL, 0, 2);
  img += noise;
  EXPECT_TRUE(FindMarkerCandidates(img, {0, 0, 160, 120}, MarkerKind::kAuto, DetectOptions{}).empty());
  SyntheticMarkerOptions faint;
  faint.kind = MarkerKind::kDot;
  faint.radius_px = 8;
  faint.bright = 135;  // 15 grey levels above the background: below min_contrast
  const cv::Mat f = RenderSyntheticMarker({100, 100}, {50, 50}, faint, rng);
  EXPECT_TRUE(FindMarkerCandidates(f, {0, 0, 100, 100}, MarkerKind::kAuto, DetectOptions{}).empty());
}

TEST(MarkerDetect, RotationCorrelationsTellQuadrantFromDot) {
  cv::RNG rng(43);
  SyntheticMarkerOptions q;
  double h = 0, r = 0;
  ASSERT_TRUE(RotationCorrelations(RenderSyntheticMarker({64, 64}, {32, 32}, q, rng), {32, 32}, 1, 10, h, r));
  EXPECT_GT(h, 0.95);
  EXPECT_LT(r, -0.95);
  q.kind = MarkerKind::kDot;
  q.radius_px = 8;
  ASSERT_TRUE(RotationCorrelations(RenderSyntheticMarker({64, 64}, {32, 32}, q, rng), {32, 32}, 0, 11, h, r));
  EXPECT_GT(h, 0.95);
  EXPECT_GT(r, 0.95);
}

TEST(MarkerDetect, BadOptionsAreRejectedWithTheFieldName) {
  DetectOptions o;
  o.min_radius_px = 50;
  o.max_radius_px = 40;
  EXPECT_EQ(*ValidateDetectOptions(o), "marker radius range [50, 40] px is not 2 <= min < max <= 300");
}

}  // namespace
}  // namespace dropfit::tracker
