// The report page: well-formed markup (every element closed in order, HTML5 void elements
// excepted: W3C HTML Living Standard, "void elements"), self-contained (no script, no network
// reference), and every chart carries data points.
#include <gtest/gtest.h>

#include <cmath>
#include <regex>
#include <stack>

#include "cli/report_html.h"
#include "cli/svg_plot.h"

namespace dropfit::cli {
namespace {

// Returns "" when every tag is closed in order, else a description of the first problem.
std::string CheckTagBalance(const std::string& html) {
  static const std::regex tag(R"(<(/?)([a-zA-Z][a-zA-Z0-9]*)([^>]*?)(/?)>)");
  std::stack<std::string> open;
  for (auto it = std::sregex_iterator(html.begin(), html.end(), tag); it != std::sregex_iterator(); ++it) {
    const std::string name = (*it)[2];
    const bool closing = (*it)[1] == "/", self_closing = (*it)[4] == "/";
    if (name == "meta" || name == "br" || self_closing) continue;
    if (!closing) {
      open.push(name);
    } else {
      if (open.empty() || open.top() != name) return "unexpected </" + name + "> at " + std::to_string(it->position());
      open.pop();
    }
  }
  return open.empty() ? "" : "unclosed <" + open.top() + ">";
}

Summary MakeSummary() {
  Summary s;
  SummaryGroup g;
  g.specimen = "wheel <A>";
  g.drop_height_m = 0.3;
  g.clips = 2;
  g.cor_mean = 0.7;
  g.cor_sd = 0.01;
  s.groups = {g};
  SpecimenSummary sp;
  sp.specimen = "wheel <A>";
  sp.best_law = "kelvin-voigt";
  JointFitRecord jf;
  jf.fit.law = "kelvin-voigt";
  jf.fit.params = {{"k_n_per_m", 2e5}, {"c_ns_per_m", 300}};
  jf.fit.param_sd = {{"k_n_per_m", 1e3}, {"c_ns_per_m", 5}};
  jf.fit.converged = true;
  jf.fit.bic = -100;
  jf.holdout = {{0.3, 0.003, 1e-4, 2e-4}};
  sp.joint_fits = {jf};
  sp.curves = {{"measured", CurveKind::kCorMeasured, {2.0, 2.4}, {0.71, 0.70}},
               {"kelvin-voigt", CurveKind::kCorVsSpeed, {1.5, 2.0, 2.5}, {0.70, 0.705, 0.71}}};
  s.specimens = {sp};
  s.errors = {{"clip_9", "no impact found"}};
  s.warnings = {{"clip_1", "rate looks 2x too low"}};
  s.rig_quality = {{"rms_reprojection_px", 0.2}};
  s.run = {{"folder", "day3"}};
  return s;
}

ClipReportData MakeClip() {
  ClipReportData c;
  c.result.clip = "clip_1";
  c.result.capture_fps = 2000;
  c.result.frames = 3;
  c.result.best_law = "kelvin-voigt";
  ImpactRecord im;
  im.t_contact_s = 0.0005;
  im.t_separation_s = 0.0008;
  c.result.impacts = {im};
  c.result.curves = {{"kelvin-voigt", CurveKind::kTrajectory, {0, 0.0005, 0.001}, {0.3, 0.29, 0.3}},
                     {"kelvin-voigt", CurveKind::kForceDeflection, {0, 0.01}, {0, 2000}},
                     {"track", CurveKind::kForceDeflectionTrack, {0, 0.01}, {10, 1900}},
                     {"kelvin-voigt", CurveKind::kResidual, {0, 0.001}, {1e-6, -2e-6}}};
  c.track = {{0, 0.0, 1.0, 2.0, 0.0, 0.3, 1.0},
             {1, 0.0005, std::nullopt, std::nullopt, std::nullopt, std::nullopt, 0},
             {2, 0.001, 1.0, 2.0, 0.0, 0.3, 1.0}};
  return c;
}

TEST(Report, PageIsWellFormedSelfContainedAndEveryChartHasData) {
  const std::string html = BuildReportHtml(MakeSummary(), {MakeClip()}, "test");
  EXPECT_EQ(CheckTagBalance(html), "");
  EXPECT_EQ(html.find("<script"), std::string::npos);
  EXPECT_EQ(html.find("http://www.w3.org/2000/svg"), html.find("http"));  // the SVG namespace is the only URL
  // Text from the results is escaped.
  EXPECT_NE(html.find("wheel &lt;A&gt;"), std::string::npos);
  EXPECT_EQ(html.find("wheel <A>"), std::string::npos);
  // Every chart has data marks; none says "no data".
  const std::regex svg(R"(<svg[\s\S]*?</svg>)");
  int charts = 0;
  for (auto it = std::sregex_iterator(html.begin(), html.end(), svg); it != std::sregex_iterator(); ++it) {
    ++charts;
    const std::string chart = it->str();
    EXPECT_TRUE(chart.find("<circle") != std::string::npos || chart.find("<path d=\"M") != std::string::npos)
        << chart.substr(0, 200);
    EXPECT_EQ(chart.find(">no data<"), std::string::npos);
  }
  EXPECT_EQ(charts, 4);  // COR vs speed, height, force-deflection, residuals
  // Errors and warnings come before the summary table.
  EXPECT_LT(html.find("no impact found"), html.find("Impact summary per height"));
  EXPECT_LT(html.find("rate looks 2x too low"), html.find("Impact summary per height"));
}

// docs/methods.md §23: each clip shows the budget of its first complete bounce, the dominant
// part marked; the summary shows each mean's standard uncertainty.
TEST(Report, EachClipShowsTheUncertaintyBudgetOfItsFirstCompleteBounce) {
  ClipReportData clip = MakeClip();
  clip.result.impacts[0].cor = 0.71;
  clip.result.impacts[0].budget = {{"cor",
                                    2.5e-4,
                                    "rig_scale",
                                    {{"fit", 1e-4},
                                     {"onset_height", 5e-5},
                                     {"rig_scale", 2.2e-4},
                                     {"marker_plane", 0.0},
                                     {"capture_rate", 0.0},
                                     {"gravity", 0.0}}}};
  Summary summary = MakeSummary();
  summary.groups.front().mean_budget = {{"cor", 0.00031, "rig_scale", {{"rig_scale", 0.0003}}}};
  const std::string html = BuildReportHtml(summary, {clip}, "test");
  EXPECT_EQ(CheckTagBalance(html), "");
  const size_t table = html.find("Uncertainty budget of bounce 0");
  ASSERT_NE(table, std::string::npos);
  EXPECT_NE(html.find("<strong>0.00022</strong>", table), std::string::npos);  // the dominant part
  EXPECT_NE(html.find("(u 0.00031)"), std::string::npos);                      // the mean's uncertainty
  // A clip without budgets (a result written before) shows no table.
  EXPECT_EQ(BuildReportHtml(MakeSummary(), {MakeClip()}, "test").find("Uncertainty budget"), std::string::npos);
}

TEST(SvgPlot, NiceTicksUseStepsOfOneTwoOrFive) {
  // "Nice numbers" for axis labels (Heckbert 1990, Graphics Gems, "Nice numbers for graph labels").
  EXPECT_EQ(NiceTicks(0.0, 1.0, 5), (std::vector<double>{0.0, 0.2, 0.4, 0.6000000000000001, 0.8, 1.0}));
  const auto t = NiceTicks(-3.2, 7.9, 5);
  ASSERT_GE(t.size(), 2u);
  EXPECT_DOUBLE_EQ(t[1] - t[0], 2.0);
  EXPECT_DOUBLE_EQ(t.front(), -2.0);
}

TEST(SvgPlot, NonFinitePointsAreSkippedAndCounted) {
  Plot p;
  p.series.push_back({"a", "#000", SeriesStyle::kPoints, {0, 1, 2}, {1, std::nan(""), 3}});
  EXPECT_EQ(CountDataPoints(p), 2);
  EXPECT_EQ(CheckTagBalance(RenderSvg(p)), "");
  Plot empty;
  EXPECT_NE(RenderSvg(empty).find(">no data<"), std::string::npos);
}

}  // namespace
}  // namespace dropfit::cli
