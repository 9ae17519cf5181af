// The choice of the best law on rendered clips whose contact is exactly Hunt-Crossley with an
// exponent of 1 or below (a linear Hunt-Crossley law, Hunt & Crossley 1975, and a softening
// one): rendered by the project's renderer from the forward model (synth/, itself pinned to
// published closed forms in tests/analysis/forward_model_test.cpp), analysed by `dropfit run`
// (cli/run_command.h). The fit must converge inside its exponent range (docs/methods.md §13),
// give n back, and rank first, per clip and jointly; bilinear with a parameter the data do not
// determine must never be the best law.
#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <filesystem>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

#include "cli/exit_status.h"
#include "cli/render_command.h"
#include "cli/results.h"
#include "cli/run_command.h"
#include "cli/truth_io.h"
#include "tests/support/quiet_logs.h"
#include "tests/support/temp_dir.h"

namespace dropfit::cli {
namespace {

namespace fs = std::filesystem;

const bool kQuietCeres = [] {
  test::SilenceCeresLogs();  // Ceres logs through glog; these tests report through gtest
  return true;
}();

// The tolerance on the exponent.
constexpr double kExponentTolerance = 0.05;

const FitRecord* FindFit(const std::vector<FitRecord>& fits, const std::string& law) {
  for (const FitRecord& f : fits) {
    if (f.law == law) return &f;
  }
  return nullptr;
}

double Param(const FitRecord& f, const std::string& name) {
  for (const auto& [n, v] : f.params) {
    if (n == name) return v;
  }
  return std::nan("");
}

bool AnyUndetermined(const FitRecord& f) {
  for (size_t i = 0; i < f.params.size() && i < f.param_sd.size(); ++i) {
    if (!(f.param_sd[i].second <= 0.5 * std::abs(f.params[i].second))) return true;
  }
  return false;
}

std::string Note(const FitRecord& f, const std::string& name) {
  for (const auto& [n, v] : f.notes) {
    if (n == name) return v;
  }
  return "";
}

// Renders `law` with `params` at `heights_m` into dir/clips, at half the default image size and
// focal length (same view, 2x larger pixels) to keep the test short, then runs `dropfit run`
// with the renderer's exact rig into dir/out; the truth, or nothing (with a test failure).
std::optional<RenderTruth> RenderAndRun(const fs::path& dir, const std::string& law,
                                        const std::vector<std::string>& params, double mass_kg,
                                        const std::vector<double>& heights_m, uint64_t seed) {
  RenderCommandOptions r;
  r.out_dir = (dir / "clips").string();
  r.law = law;
  r.params = params;
  r.mass_kg = mass_kg;
  r.heights_m = heights_m;
  r.image_size = "400x320";
  r.focal_px = 600.0;
  r.floor_margin_px = 20.0;
  r.calibration = false;
  r.seed = seed;
  if (RunRender(r) != kExitDone) {
    ADD_FAILURE() << "render failed";
    return std::nullopt;
  }
  RunCommandOptions o;
  o.folder = (dir / "clips").string();
  o.rig_path = (dir / "clips" / "rig_exact.json").string();
  o.out_dir = (dir / "out").string();
  std::ostringstream sink;
  if (RunRun(o, sink, sink) != kExitDone) {
    ADD_FAILURE() << sink.str();
    return std::nullopt;
  }
  return ReadTruthFile(dir / "clips" / "truth.json");
}

// A tyre of 4.2 kg on k = 8.0e4 N/m^n, alpha = 0.10 s/m, dropped from 0.05, 0.10 and 0.20 m
// (the 0.10 m drop at n = 1 is the case of the issue).
void CheckHuntCrossleyTruth(double n, uint64_t seed) {
  const test::TempDir tmp("law_choice");
  const fs::path out = tmp.path() / "out";
  std::ostringstream n_text;
  n_text << "n=" << n;
  const std::optional<RenderTruth> rendered = RenderAndRun(
      tmp.path(), "hunt-crossley", {"k=8.0e4", n_text.str(), "alpha_s_per_m=0.10"}, 4.2, {0.05, 0.10, 0.20}, seed);
  ASSERT_TRUE(rendered);
  const RenderTruth& truth = *rendered;
  ASSERT_EQ(truth.clips.size(), 3u);
  for (const auto& clip : truth.clips) {
    const std::string id = fs::path(clip.clip).stem().string();
    const ClipResult result = ReadClipResult(out / "clips" / id / "result.json");
    const FitRecord* hc = FindFit(result.fits, "hunt-crossley");
    ASSERT_NE(hc, nullptr) << id;
    std::printf("%s (n = %.1f): best %s; hunt-crossley n = %.4f, rms %.1f um, converged %d\n", id.c_str(), n,
                result.best_law.value_or("none").c_str(), Param(*hc, "n"), 1e6 * hc->rms_residual_m, hc->converged);
    EXPECT_TRUE(hc->converged) << id;
    EXPECT_TRUE(Note(*hc, "bounds_reached").empty()) << id << ": " << Note(*hc, "bounds_reached");
    EXPECT_EQ(Note(*hc, "warnings").find("does not describe"), std::string::npos) << id;
    EXPECT_NEAR(Param(*hc, "n"), n, kExponentTolerance) << id;
    ASSERT_TRUE(result.best_law.has_value()) << id;
    EXPECT_EQ(*result.best_law, "hunt-crossley") << id;
    const FitRecord* bilinear = FindFit(result.fits, "bilinear");
    ASSERT_NE(bilinear, nullptr);
    if (AnyUndetermined(*bilinear)) {
      EXPECT_NE(*result.best_law, "bilinear") << id;
    }
  }

  const Summary summary = ReadSummaryJson(out / "summary.json");
  ASSERT_EQ(summary.specimens.size(), 1u);
  const SpecimenSummary& sp = summary.specimens.front();
  ASSERT_TRUE(sp.best_law.has_value());
  EXPECT_EQ(*sp.best_law, "hunt-crossley");
  for (const JointFitRecord& j : sp.joint_fits) {
    if (j.fit.law != "hunt-crossley") continue;
    std::printf("joint (n = %.1f): hunt-crossley n = %.4f, converged %d\n", n, Param(j.fit, "n"), j.fit.converged);
    EXPECT_TRUE(j.fit.converged);
    EXPECT_NEAR(Param(j.fit, "n"), n, kExponentTolerance);
  }
}

// A truth outside the five fitted laws (the renderer's "bottoming": stiffness growing with the
// cube of the deflection beyond a knee, damping proportional to the force), set so that the
// best of the five leaves residuals far above the track's noise: the clip is flagged as fitted
// by no law and keeps its law-free figures. Bounds: the COR 0.002 and maximum
// deflection 0.1 mm on the two complete bounces with full flights; the track-only contact
// duration measured 0.3-2.2 ms long on this test's half-scale 400x320 clip (near the onset
// height the soft linear part departs from free flight too little for the noisier track to
// see, so the rising flight starts late), bounded at 2.5 ms; under the reference conditions
// (bench/outside_law_bench.sh) it is within 0.15 ms of the truth, inside the 1.5 ms.
TEST(LawChoice, ATruthOutsideTheFiveLawsIsFlaggedAndKeepsItsLawFreeFigures) {
  const test::TempDir tmp("law_choice_none");
  const fs::path out = tmp.path() / "out";
  const std::optional<RenderTruth> rendered = RenderAndRun(
      tmp.path(), "bottoming", {"k_n_per_m=6e4", "k3_n_per_m3=3e9", "knee_m=0.012", "a_s_per_m=0.3"}, 5.0, {0.20}, 5);
  ASSERT_TRUE(rendered);
  const RenderTruth& truth = *rendered;
  const std::string id = fs::path(truth.clips.at(0).clip).stem().string();
  const ClipResult result = ReadClipResult(out / "clips" / id / "result.json");
  ASSERT_TRUE(result.no_law_fits.has_value());
  std::printf("%s\n", result.no_law_fits->c_str());
  const auto& impacts = truth.clips.at(0).impacts;
  ASSERT_GE(result.impacts.size(), 2u);
  for (size_t i = 0; i < 2; ++i) {
    const ImpactRecord& m = result.impacts[i];
    std::printf("bounce %zu: COR %.4f (truth %.4f), deflection %.2f mm (%.2f), track duration %.2f ms (%.2f)\n", i,
                m.cor, impacts[i].cor, 1e3 * m.max_deflection_m, 1e3 * impacts[i].max_deflection_m,
                1e3 * m.contact_duration_s, 1e3 * impacts[i].contact_duration_s);
    EXPECT_EQ(m.source, "track");
    EXPECT_NEAR(m.cor, impacts[i].cor, 0.002);
    EXPECT_NEAR(m.max_deflection_m, impacts[i].max_deflection_m, 0.1e-3);
    EXPECT_NEAR(m.contact_duration_s, impacts[i].contact_duration_s, 2.5e-3);
  }
}

TEST(LawChoice, LinearHuntCrossleyConvergesRanksFirstAndGivesNBack) { CheckHuntCrossleyTruth(1.0, 3); }

TEST(LawChoice, SofteningHuntCrossleyConvergesRanksFirstAndGivesNBack) { CheckHuntCrossleyTruth(0.8, 4); }

}  // namespace
}  // namespace dropfit::cli
