// Round trips of the contract's result files (docs/formats.md, "What one run writes"):
// what is written is read back unchanged, with the contract's column order and field names.
#include "cli/results.h"

#include <gtest/gtest.h>

#include <algorithm>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <sstream>

#include "tests/support/temp_dir.h"

namespace dropfit::cli {
namespace {

class ResultsTest : public ::testing::Test {
 protected:
  const test::TempDir tmp_{"results"};
  const std::filesystem::path dir_ = tmp_.path();
};

TEST_F(ResultsTest, TrackCsvRoundTripsAndLeavesLostFramesEmpty) {
  std::vector<TrackRow> rows;
  rows.push_back({0, 0.0, 401.123456789, 200.5, 0.012345678901, 0.456789012345, 0.98});
  rows.push_back({1, 0.0005, std::nullopt, std::nullopt, std::nullopt, std::nullopt, 0.0});
  rows.push_back({2, 0.001, 401.2, 203.75, 0.0124, 0.4501, 0.9});
  const auto path = dir_ / "track.csv";
  WriteTrackCsv(path, rows);
  const std::string text = test::ReadFileBytes(path);
  EXPECT_EQ(text.substr(0, text.find('\n')), "frame,t_s,u_px,v_px,x_m,y_m,quality");
  const size_t row1 = text.find("\n1,");
  ASSERT_NE(row1, std::string::npos) << text;
  EXPECT_EQ(text.substr(text.find(',', row1 + 3), 7), ",,,,,0\n") << text;
  const auto back = ReadTrackCsv(path);
  ASSERT_EQ(back.size(), 3u);
  for (size_t i = 0; i < rows.size(); ++i) {
    EXPECT_EQ(back[i].frame, rows[i].frame);
    EXPECT_EQ(back[i].t_s, rows[i].t_s);  // shortest round-trip text: exact
    EXPECT_EQ(back[i].u_px, rows[i].u_px);
    EXPECT_EQ(back[i].y_m, rows[i].y_m);
    EXPECT_EQ(back[i].quality, rows[i].quality);
  }
}

TEST_F(ResultsTest, ClipResultRoundTripsWithExtraFields) {
  ClipResult r;
  r.clip = "drop_0400_a";
  r.capture_fps = 2000;
  r.capture_fps_source = "manifest";
  r.frames = 600;
  r.tracked_frames = 598;
  r.y_origin = "floor";
  r.gravity_check.flight_accel_mps2 = 9.79;
  ImpactRecord im;
  im.t_contact_s = 0.1234;
  im.t_separation_s = 0.1456;
  im.impact_speed_mps = 2.8;
  im.rebound_speed_mps = 2.0;
  im.cor = 2.0 / 2.8;
  im.contact_duration_s = 0.0222;
  im.max_deflection_m = 0.012;
  im.peak_force_n = 2500;
  im.onset_height_m = 0.25;
  im.onset_height_source = "geometry";
  im.source = "hunt-crossley";
  im.complete = true;
  im.extra = {{"cor_sd", 0.001}, {"t_separation_track_s", 0.147}};
  r.impacts = {im};
  FitRecord f;
  f.law = "hunt-crossley";
  f.params = {{"k", 1e7}, {"n", 1.5}, {"alpha_s_per_m", 0.2}};
  f.param_sd = {{"k", 1e5}, {"n", 0.01}, {"alpha_s_per_m", 0.003}};
  f.onset_height_m = 0.25;
  f.onset_height_source = "geometry";
  f.bounces = {0, 1};
  f.rms_residual_m = 2e-5;
  f.bic = -1234.5;
  f.converged = true;
  f.notes = {{"formula", "F = k delta^n (1 + alpha delta_dot)"}};
  r.fits = {f};
  r.best_law = "hunt-crossley";
  r.warnings = {"w1"};
  r.errors = {};
  r.frames_left_empty = {{311, "marker partly hidden or disturbed: symmetry misfit 1 - quality = 0.0480"},
                         {312, "marker washed out: contrast (window s.d.) 20.1 grey levels"}};
  r.info = {{"marker_kind", "quadrant"}};
  const auto path = dir_ / "result.json";
  WriteClipResult(path, r);
  const ClipResult b = ReadClipResult(path);
  EXPECT_EQ(b.clip, r.clip);
  EXPECT_EQ(b.capture_fps, 2000);
  EXPECT_EQ(b.capture_fps_source, "manifest");
  EXPECT_EQ(b.frames, 600);
  EXPECT_EQ(b.tracked_frames, 598);
  EXPECT_EQ(b.y_origin, "floor");
  EXPECT_EQ(b.gravity_check.flight_accel_mps2, 9.79);
  EXPECT_EQ(b.gravity_check.expected_mps2, 9.80665);
  ASSERT_EQ(b.impacts.size(), 1u);
  EXPECT_EQ(b.impacts[0].cor, im.cor);
  EXPECT_EQ(b.impacts[0].source, "hunt-crossley");
  EXPECT_EQ(b.impacts[0].onset_height_source, "geometry");
  EXPECT_EQ(b.impacts[0].extra, im.extra);
  ASSERT_EQ(b.fits.size(), 1u);
  EXPECT_EQ(b.fits[0].params, f.params);
  EXPECT_EQ(b.fits[0].param_sd, f.param_sd);
  EXPECT_EQ(b.fits[0].bounces, f.bounces);
  EXPECT_EQ(b.fits[0].notes, f.notes);
  EXPECT_TRUE(b.fits[0].converged);
  EXPECT_EQ(b.best_law, r.best_law);
  EXPECT_EQ(b.warnings, r.warnings);
  ASSERT_EQ(b.frames_left_empty.size(), 2u);
  EXPECT_EQ(b.frames_left_empty[1].frame, 312);
  EXPECT_EQ(b.frames_left_empty[1].reason, r.frames_left_empty[1].reason);
  EXPECT_EQ(b.info, r.info);  // the list is not read back as an extra text
  EXPECT_TRUE(
      std::none_of(b.extra.begin(), b.extra.end(), [](const auto& e) { return e.first == "frames_left_empty"; }));
}

TEST_F(ResultsTest, NonFiniteNumbersAreWrittenAsNull) {
  ClipResult r;
  r.clip = "x";
  r.capture_fps = 1000;
  ImpactRecord im;
  im.cor = std::nan("");
  r.impacts = {im};
  const auto path = dir_ / "result.json";
  WriteClipResult(path, r);
  EXPECT_NE(test::ReadFileBytes(path).find("\"cor\": null"), std::string::npos);
  EXPECT_TRUE(std::isnan(ReadClipResult(path).impacts[0].cor));
}

TEST_F(ResultsTest, SummaryCsvHasTheContractColumnsInOrderAndEmptySdForOneClip) {
  SummaryGroup g;
  g.specimen = "wheel, front";
  g.drop_height_m = 0.4;
  g.clips = 1;
  g.cor_mean = 0.7;
  g.mean_budget.push_back({"cor", 0.001234, "rig_scale", {{"fit", 0.0001}}});
  const auto path = dir_ / "summary.csv";
  WriteSummaryCsv(path, {g});
  // The mean's uncertainty beside the spread, to its own second significant digit (docs/formats.md).
  EXPECT_EQ(test::ReadFileBytes(path),
            "specimen,drop_height_m,clips,impact_speed_mps_mean,impact_speed_mps_sd,impact_speed_mps_mean_u,cor_mean,"
            "cor_sd,cor_mean_u,contact_duration_s_mean,contact_duration_s_sd,contact_duration_s_mean_u,max_"
            "deflection_m_mean,max_deflection_m_sd,max_deflection_m_mean_u,peak_force_n_mean,peak_force_n_sd,peak_"
            "force_n_mean_u,rebound_speed_mps_mean,rebound_speed_mps_sd,rebound_speed_mps_mean_u,energy_lost_j_mean,"
            "energy_lost_j_sd,energy_lost_j_mean_u,flags\n"
            "\"wheel, front\",0.4,1,0,,,0.7,,0.0012,0,,,0,,,0,,,0,,,0,,,\n");
}

TEST_F(ResultsTest, BudgetsRoundTripThroughResultAndSummary) {
  ClipResult r;
  r.clip = "x";
  ImpactRecord im;
  im.cor = 0.7;
  im.budget.push_back({"cor", 2e-4, "fit", {{"fit", 1.9e-4}, {"onset_height", 6e-5}, {"rig_scale", 0.0}}});
  r.impacts = {im};
  FitRecord f;
  f.law = "kelvin-voigt";
  f.params = {{"k_n_per_m", 4e4}};
  f.param_sd = {{"k_n_per_m", 90.0}};
  f.budget.push_back({"k_n_per_m", 90.0, "capture_rate", {{"capture_rate", 80.0}}});
  r.fits = {f};
  const auto path = dir_ / "result.json";
  WriteClipResult(path, r);
  const ClipResult back = ReadClipResult(path);
  ASSERT_EQ(back.impacts[0].budget.size(), 1u);
  EXPECT_EQ(back.impacts[0].budget[0].dominant, "fit");
  EXPECT_EQ(back.impacts[0].budget[0].parts.size(), 3u);
  EXPECT_DOUBLE_EQ(back.impacts[0].budget[0].sd, 2e-4);
  ASSERT_EQ(back.fits[0].budget.size(), 1u);
  EXPECT_EQ(back.fits[0].budget[0].figure, "k_n_per_m");
  // Not read as extra numbers.
  for (const auto& [name, value] : back.impacts[0].extra) EXPECT_NE(name, "budget");
  Summary s;
  SummaryGroup g;
  g.mean_budget = {{"cor", 0.0012, "rig_scale", {{"rig_scale", 0.001}}}};
  s.groups = {g};
  WriteSummaryJson(dir_ / "summary.json", s);
  const Summary sback = ReadSummaryJson(dir_ / "summary.json");
  ASSERT_TRUE(sback.groups[0].MeanU("cor").has_value());
  EXPECT_DOUBLE_EQ(*sback.groups[0].MeanU("cor"), 0.0012);
  EXPECT_FALSE(sback.groups[0].MeanU("peak_force_n").has_value());
  EXPECT_NE(test::ReadFileBytes(dir_ / "summary.json").find("\"cor_mean_u\": 0.0012"), std::string::npos);
}

TEST_F(ResultsTest, SummaryJsonRoundTrips) {
  Summary s;
  SummaryGroup g;
  g.specimen = "A";
  g.drop_height_m = 0.3;
  g.clips = 2;
  g.cor_mean = 0.71;
  g.cor_sd = 0.004;
  s.groups = {g};
  SpecimenSummary sp;
  sp.specimen = "A";
  sp.best_law = "kelvin-voigt";
  JointFitRecord jf;
  jf.fit.law = "kelvin-voigt";
  jf.fit.params = {{"k_n_per_m", 2e5}, {"c_ns_per_m", 300}};
  jf.fit.converged = true;
  jf.holdout = {{0.3, 0.004, 1e-4, 2e-4}};
  sp.joint_fits = {jf};
  s.specimens = {sp};
  s.errors = {{"bad_clip", "no impact found"}};
  s.warnings = {{"c1", "rate looks 2x too low"}};
  const auto path = dir_ / "summary.json";
  WriteSummaryJson(path, s);
  const Summary b = ReadSummaryJson(path);
  ASSERT_EQ(b.groups.size(), 1u);
  EXPECT_EQ(b.groups[0].cor_sd, 0.004);
  EXPECT_FALSE(b.groups[0].impact_speed_mps_sd.has_value());
  ASSERT_EQ(b.specimens.size(), 1u);
  EXPECT_EQ(b.specimens[0].best_law, "kelvin-voigt");
  ASSERT_EQ(b.specimens[0].joint_fits.size(), 1u);
  EXPECT_EQ(b.specimens[0].joint_fits[0].fit.params, jf.fit.params);
  ASSERT_EQ(b.specimens[0].joint_fits[0].holdout.size(), 1u);
  EXPECT_EQ(b.specimens[0].joint_fits[0].holdout[0].cor_error, 0.004);
  ASSERT_EQ(b.errors.size(), 1u);
  EXPECT_EQ(b.errors[0].message, "no impact found");
  EXPECT_EQ(b.warnings[0].clip, "c1");
}

TEST_F(ResultsTest, AMalformedTrackFileIsRejectedWithFileAndLine) {
  const auto path = dir_ / "track.csv";
  std::ofstream(path) << "frame,t_s,u_px,v_px,x_m,y_m,quality\n0,0,1,2,3,4,1\n1,zero,1,2,3,4,1\n";
  try {
    ReadTrackCsv(path);
    FAIL() << "no exception";
  } catch (const std::runtime_error& e) {
    EXPECT_EQ(std::string(e.what()), path.string() + ":3: 'zero' is not a number");
  }
}

}  // namespace
}  // namespace dropfit::cli
