#include "tracker/marker_kind.h"

#include <gtest/gtest.h>

namespace dropfit::tracker {
namespace {

TEST(MarkerKind, StringsRoundTrip) {
  for (auto kind : {MarkerKind::kAuto, MarkerKind::kQuadrant, MarkerKind::kDot, MarkerKind::kTemplate}) {
    EXPECT_EQ(MarkerKindFromString(ToString(kind)), kind);
  }
}

TEST(MarkerKind, UnknownKindIsRejectedWithTheValidList) {
  try {
    MarkerKindFromString("circle");
    FAIL() << "no exception";
  } catch (const std::invalid_argument& e) {
    EXPECT_STREQ(e.what(), "unknown marker kind 'circle'; valid: auto, quadrant, dot, template");
  }
}

}  // namespace
}  // namespace dropfit::tracker
