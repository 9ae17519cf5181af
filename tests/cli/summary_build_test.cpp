// Per-height summary (docs/formats.md, "summary.csv"): first complete impact of each
// clip; mean and sample standard deviation with Bessel's correction (n - 1; common practice,
// no source); sd empty for one clip.
#include "cli/summary_build.h"

#include <gtest/gtest.h>

#include <cmath>

namespace dropfit::cli {
namespace {

ClipResult ClipWith(std::vector<std::pair<bool, double>> impacts) {
  ClipResult r;
  for (auto [complete, cor] : impacts) {
    ImpactRecord im;
    im.complete = complete;
    im.cor = cor;
    im.impact_speed_mps = 2.0;
    r.impacts.push_back(im);
  }
  return r;
}

ManifestRow Row(const std::string& specimen, double height) {
  ManifestRow row;
  row.specimen = specimen;
  row.drop_height_m = height;
  return row;
}

TEST(SummaryBuild, GroupsBySpecimenThenHeightUsingTheFirstCompleteImpact) {
  const ManifestRow r1 = Row("B", 0.4), r2 = Row("B", 0.3), r3 = Row("A", 0.3), r4 = Row("B", 0.4), r5 = Row("B", 0.3);
  const ClipResult c1 = ClipWith({{false, 0.1}, {true, 0.70}, {true, 0.5}});  // first is cut: skip it
  const ClipResult c2 = ClipWith({{true, 0.72}});
  const ClipResult c3 = ClipWith({{true, 0.65}});
  const ClipResult c4 = ClipWith({{true, 0.74}});
  const ClipResult c5 = ClipWith({{false, 0.9}});  // no complete impact: does not count
  const auto groups = BuildSummaryGroups({{&r1, &c1}, {&r2, &c2}, {&r3, &c3}, {&r4, &c4}, {&r5, &c5}});
  ASSERT_EQ(groups.size(), 3u);
  EXPECT_EQ(groups[0].specimen, "B");
  EXPECT_DOUBLE_EQ(groups[0].drop_height_m, 0.3);
  EXPECT_EQ(groups[0].clips, 1);
  EXPECT_FALSE(groups[0].cor_sd.has_value());
  // c5 has no complete impact: it does not count, and says so in its group's flags
  // (docs/formats.md, "Flags").
  EXPECT_EQ(groups[0].flags, std::vector<std::string>{"incomplete"});
  EXPECT_TRUE(groups[1].flags.empty());
  EXPECT_EQ(groups[1].specimen, "B");
  EXPECT_DOUBLE_EQ(groups[1].drop_height_m, 0.4);
  EXPECT_EQ(groups[1].clips, 2);
  EXPECT_NEAR(groups[1].cor_mean, 0.72, 1e-15);
  // Sample sd of {0.70, 0.74}: |0.74 - 0.70| / sqrt(2).
  EXPECT_NEAR(groups[1].cor_sd.value(), 0.04 / std::sqrt(2.0), 1e-15);
  EXPECT_NEAR(groups[1].impact_speed_mps_sd.value(), 0.0, 1e-15);
  EXPECT_EQ(groups[2].specimen, "A");
}

// GUM (JCGM 100:2008) eq. 13 with r = 1 for the parts the clips share (the rig's scale) and
// r = 0 for their own (the fit), docs/methods.md §23.
TEST(SummaryBuild, TheMeansUncertaintyKeepsTheSharedPartsWhole) {
  const ManifestRow r1 = Row("A", 0.3), r2 = Row("A", 0.3);
  ClipResult c1 = ClipWith({{true, 0.70}}), c2 = ClipWith({{true, 0.70}});
  for (ClipResult* c : {&c1, &c2}) {
    c->impacts[0].budget.push_back({"impact_speed_mps", 0.005, "rig_scale", {{"fit", 0.003}, {"rig_scale", 0.004}}});
  }
  const auto groups = BuildSummaryGroups({{&r1, &c1}, {&r2, &c2}});
  ASSERT_EQ(groups.size(), 1u);
  // Both clips read 2.0 m/s: no spread; the fit parts average down (0.003 sqrt(2) / 2), the
  // rig's does not (0.004).
  ASSERT_TRUE(groups[0].MeanU("impact_speed_mps").has_value());
  EXPECT_NEAR(*groups[0].MeanU("impact_speed_mps"), std::hypot(0.003 / std::sqrt(2.0), 0.004), 1e-12);
  EXPECT_FALSE(groups[0].MeanU("cor").has_value());  // no budget given for it
}

TEST(SummaryBuild, AFailedClipFlagsItsGroupWithItsOwnFlagsAndAGroupWithoutClipsHasNoNumbers) {
  // docs/formats.md, "Flags": a wrong figure is never written as a plain number.
  const ManifestRow row = Row("A", 0.3);
  ClipResult gated = ClipWith({{true, 0.7}});
  gated.flags = {"rate_or_scale"};
  const auto groups = BuildSummaryGroups({{&row, &gated, /*failed=*/true}});
  ASSERT_EQ(groups.size(), 1u);
  EXPECT_EQ(groups[0].clips, 0);
  EXPECT_TRUE(std::isnan(groups[0].cor_mean));
  EXPECT_TRUE(std::isnan(groups[0].impact_speed_mps_mean));
  EXPECT_EQ(groups[0].flags, (std::vector<std::string>{"rate_or_scale", "failed"}));
}

}  // namespace
}  // namespace dropfit::cli
