// The capture rate's precedence (docs/formats.md, "Capture rate": option, manifest, rig,
// container; common practice, no source) and its source names.

#include "pipeline/capture_rate.h"

#include <gtest/gtest.h>

#include <stdexcept>

namespace dropfit::pipeline {
namespace {

TEST(CaptureRate, CaptureRateFollowsTheContractsPrecedence) {
  EXPECT_EQ(ToString(ResolveCaptureRate(1000, 2000, 3000, 4000)->source), "option");
  EXPECT_EQ(ToString(ResolveCaptureRate(std::nullopt, 2000, 3000, 4000)->source), "manifest");
  EXPECT_EQ(ResolveCaptureRate(std::nullopt, std::nullopt, 3000, 4000)->fps, 3000);
  const auto container = ResolveCaptureRate(std::nullopt, std::nullopt, std::nullopt, 4000);
  EXPECT_EQ(ToString(container->source), "container");
  EXPECT_FALSE(container->warning.has_value());  // 4,000 frames/s is no playback rate
  EXPECT_TRUE(ResolveCaptureRate(std::nullopt, std::nullopt, std::nullopt, 120)->warning.has_value());
  EXPECT_FALSE(ResolveCaptureRate(std::nullopt, std::nullopt, std::nullopt, std::nullopt).has_value());
  EXPECT_EQ(ToString(ResolveCaptureRate(-5.0, std::nullopt, 3000, std::nullopt)->source), "rig");  // unusable skipped
}

TEST(CaptureRate, SourceNamesRoundTripAndAnUnknownOneIsRejectedWithTheValidOnes) {
  for (CaptureRateSource s : {CaptureRateSource::kOption, CaptureRateSource::kManifest, CaptureRateSource::kRig,
                              CaptureRateSource::kContainer}) {
    EXPECT_EQ(CaptureRateSourceFromString(ToString(s)), s);
  }
  try {
    CaptureRateSourceFromString("camera");
    FAIL() << "no exception";
  } catch (const std::invalid_argument& e) {
    EXPECT_NE(std::string(e.what()).find("option, manifest, rig, container"), std::string::npos);
  }
}

}  // namespace
}  // namespace dropfit::pipeline
