// Issue 18, the input side: a corpus of a user's mistakes, one test each, each made at test
// time from a short rendered clip (synth/, through `dropfit render`), the demo clip folder's
// calibration images, or frames built in code. For each: the exit status of docs/formats.md
// ("Exit status"), the message naming the fix, no wrong value written as a plain number, and no
// earlier output damaged.
//
// Cases: calibrate without --board or --square; a square and a corner height typed in
// millimetres; a board size two corners short (the suggestion covers the board) and a board
// size that finds part of the board; render options in millimetres; manifest drop heights,
// masses and radii in millimetres or grams; analyze options in millimetres; the old start-point
// option; marker columns in the manifest; 12-bit data in 16-bit TIFF; a template that re-locks
// on a look-alike far away; the volumetric law without a tread geometry.
#include <gtest/gtest.h>
#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include <sys/wait.h>

#include <array>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <map>
#include <memory>
#include <random>
#include <sstream>
#include <string>

#include "analysis/plausible_ranges.h"
#include "calib/rig.h"
#include "cli/analyze_command.h"
#include "cli/calibrate_command.h"
#include "cli/clip_records.h"
#include "cli/exit_status.h"
#include "cli/manifest.h"
#include "cli/render_command.h"
#include "cli/results.h"
#include "cli/rig_io.h"
#include "cli/run_command.h"
#include "cli/track_command.h"
#include "cli/truth_io.h"
#include "media/frame_source.h"
#include "pipeline/clip.h"
#include "synth/camera.h"
#include "tests/support/temp_dir.h"
#include "tracker/track.h"

namespace dropfit::cli {
namespace {

namespace fs = std::filesystem;

constexpr const char* kHint = "did you give millimetres?";
const fs::path kDemo = fs::path(DROPFIT_SOURCE_DIR) / "demo_clips";

void Write(const fs::path& p, const std::string& text) { std::ofstream(p, std::ios::binary) << text; }

bool Has(const std::string& text, const std::string& part) { return text.find(part) != std::string::npos; }

bool AnyHas(const std::vector<std::string>& texts, const std::string& part) {
  for (const std::string& t : texts) {
    if (Has(t, part)) return true;
  }
  return false;
}

// One short clip (210 frames at 1,000 frames/s: a drop from 0.08 m, its first contact and the
// rebound to its apex), rendered once for the corpus, and the rig a perfect calibration gives.
struct Corpus {
  test::TempDir tmp{"mistakes_inputs"};
  fs::path dir = tmp.path();
  fs::path clips = dir / "clips";
  fs::path clip;  // the rendered clip (a folder of PNG frames)
  fs::path rig = dir / "rig.json";
  RenderTruth truth;
};

const Corpus& TheCorpus() {
  static const std::unique_ptr<Corpus> corpus = [] {
    auto c = std::make_unique<Corpus>();
    RenderCommandOptions o;
    o.out_dir = c->clips.string();
    o.heights_m = {0.08};
    o.fps = 1000.0;
    o.exposure_s = 2e-4;
    o.duration_s = 0.21;
    o.image_size = "400x320";
    o.focal_px = 600.0;
    o.floor_margin_px = 20.0;
    o.calibration = false;
    o.format = "png";
    o.seed = 18;
    std::ostringstream out, err;
    EXPECT_EQ(RunRender(o, out, err), kExitDone) << err.str();
    c->truth = ReadTruthFile(c->clips / "truth.json");
    c->clip = c->clips / c->truth.clips.at(0).clip;
    WriteRigFile(c->rig, synth::RigFromCamera(c->truth.camera, 0.0, std::nullopt));
    return c;
  }();
  return *corpus;
}

struct Ran {
  int status = -1;
  std::string out, err;
};

// --- calibrate -----------------------------------------------------------------------------

// A calibration of the demo board (6x9 inner corners, 35 mm squares), writing over an earlier rig.
CalibrateCommandOptions DemoCalibration(const fs::path& out_path) {
  CalibrateCommandOptions o;
  o.inputs = {(kDemo / "calib").string()};
  o.plane_image = (kDemo / "calib" / "plane.png").string();
  o.board = "6x9";
  o.square_m = 0.035;
  o.corner_height_m = 0.070;
  o.out_path = out_path.string();
  return o;
}

// Runs calibrate over an earlier rig file and checks it was refused (exit status 2), left the
// earlier file as it was and named the fix.
Ran RefusedCalibration(const CalibrateCommandOptions& o) {
  const std::string earlier = "{\"earlier\": \"rig\"}\n";
  Write(o.out_path, earlier);
  std::ostringstream out, err;
  Ran r{RunCalibrate(o, out, err), out.str(), err.str()};
  EXPECT_EQ(r.status, kExitBadUsage);
  EXPECT_EQ(test::ReadFileBytes(o.out_path), earlier) << "the earlier rig was replaced";
  EXPECT_TRUE(Has(r.err, "nothing was written")) << r.err;
  EXPECT_EQ(r.out, "") << "a refused calibration prints no figures";
  return r;
}

TEST(MistakesInputs, CalibrateWithoutBoardIsRefusedAndAsksForTheInnerCorners) {
  const Corpus& c = TheCorpus();
  CalibrateCommandOptions o = DemoCalibration(c.dir / "no_board.json");
  o.board.clear();
  const Ran r = RefusedCalibration(o);
  EXPECT_TRUE(Has(r.err, "--board is required")) << r.err;
  EXPECT_TRUE(Has(r.err, "inner corners")) << r.err;
}

TEST(MistakesInputs, CalibrateWithoutSquareIsRefusedAndAsksForMetres) {
  const Corpus& c = TheCorpus();
  CalibrateCommandOptions o = DemoCalibration(c.dir / "no_square.json");
  o.square_m.reset();
  const Ran r = RefusedCalibration(o);
  EXPECT_TRUE(Has(r.err, "--square is required")) << r.err;
  EXPECT_TRUE(Has(r.err, "metres")) << r.err;
}

TEST(MistakesInputs, CalibrateSquareInMillimetresIsRefusedWithTheValueInMetres) {
  const Corpus& c = TheCorpus();
  CalibrateCommandOptions o = DemoCalibration(c.dir / "square_mm.json");
  o.square_m = 35;  // 35 mm typed as metres
  const Ran r = RefusedCalibration(o);
  EXPECT_TRUE(Has(r.err, kHint)) << r.err;
  EXPECT_TRUE(Has(r.err, "--square 0.035")) << r.err;
  EXPECT_FALSE(Has(r.err, "35000")) << "the wrong size was echoed as a measurement: " << r.err;
}

TEST(MistakesInputs, CalibrateCornerHeightInMillimetresIsRefusedWithTheValueInMetres) {
  const Corpus& c = TheCorpus();
  CalibrateCommandOptions o = DemoCalibration(c.dir / "height_mm.json");
  o.corner_height_m = 70;  // 70 mm typed as metres
  const Ran r = RefusedCalibration(o);
  EXPECT_TRUE(Has(r.err, kHint)) << r.err;
  EXPECT_TRUE(Has(r.err, "--corner-height 0.07")) << r.err;
}

// The demo board has 6x9 inner corners; the detector also finds a sheared "3x8" grid through it,
// which the old suggestion named (and following it made a rig with the floor 43 mm off).
TEST(MistakesInputs, ABoardSizeTwoCornersShortSuggestsTheSizeThatCoversTheWholeBoard) {
  const Corpus& c = TheCorpus();
  CalibrateCommandOptions o = DemoCalibration(c.dir / "board_5x8.json");
  o.inputs = {(kDemo / "calib" / "plane.png").string()};
  o.board = "5x8";
  const Ran r = RefusedCalibration(o);
  EXPECT_TRUE(Has(r.err, "pass --board 6x9")) << r.err;
  EXPECT_FALSE(Has(r.err, "3x8")) << r.err;
}

TEST(MistakesInputs, ABoardSizeThatFindsPartOfTheBoardIsRefused) {
  const Corpus& c = TheCorpus();
  CalibrateCommandOptions o = DemoCalibration(c.dir / "board_3x8.json");
  o.inputs = {(kDemo / "calib" / "plane.png").string()};
  o.board = "3x8";  // what the old suggestion named
  const Ran r = RefusedCalibration(o);
  EXPECT_TRUE(Has(r.err, "not the whole checkerboard in view")) << r.err;
  EXPECT_TRUE(Has(r.err, "--board")) << r.err;
}

// --- render ----------------------------------------------------------------------------------

TEST(MistakesInputs, RenderSquareAndHeightsInMillimetresAreRefusedAndNothingIsWritten) {
  const Corpus& c = TheCorpus();
  for (int which = 0; which < 2; ++which) {
    RenderCommandOptions o;
    o.out_dir = (c.dir / ("render_mm_" + std::to_string(which))).string();
    if (which == 0) o.square_m = 35;
    if (which == 1) o.heights_m = {150};
    std::ostringstream out, err;
    EXPECT_EQ(RunRender(o, out, err), kExitBadUsage);
    EXPECT_TRUE(Has(err.str(), kHint)) << err.str();
    EXPECT_TRUE(Has(err.str(), which == 0 ? "--square 35" : "--heights 150")) << err.str();
    EXPECT_FALSE(fs::exists(o.out_dir));
  }
}

// --- the manifest -------------------------------------------------------------------------

// The first row of a manifest with `header` and `row`, read with the files checked.
ManifestRow OneRow(const std::string& header, const std::string& row) {
  const Corpus& c = TheCorpus();
  const Manifest m = ParseManifest(header + "\n" + row + "\n", c.clips, "manifest.csv", true);
  EXPECT_EQ(m.rows.size(), 1u);
  return m.rows.at(0);
}

std::string ClipName() { return TheCorpus().truth.clips.at(0).clip; }

TEST(MistakesInputs, AManifestDropHeightInMillimetresFailsItsRowInARunAndTheRunSaysWhy) {
  const Corpus& c = TheCorpus();
  const fs::path folder = c.dir / "mm_height";
  fs::create_directories(folder);
  fs::create_directory_symlink(fs::absolute(c.clip), folder / ClipName());
  Write(folder / "manifest.csv", "clip,drop_height_m,mass_kg,capture_fps\n" + ClipName() + ",80,5,1000\n");
  RunCommandOptions o;
  o.folder = folder.string();
  o.rig_path = c.rig.string();
  o.out_dir = (c.dir / "mm_height_out").string();
  std::ostringstream out, err;
  EXPECT_EQ(RunRun(o, out, err), kExitPartial);
  EXPECT_TRUE(Has(err.str(), "column 'drop_height_m': '80' is outside the plausible 0.005-5 m; " + std::string(kHint)))
      << err.str();
  // The row's clip was not analysed: no per-clip result carries the 80 m.
  EXPECT_FALSE(fs::exists(fs::path(o.out_dir) / "clips" / c.truth.clips.at(0).clip_id / "result.json"));
  const Summary s = ReadSummaryJson(fs::path(o.out_dir) / "summary.json");
  ASSERT_FALSE(s.errors.empty());
  EXPECT_TRUE(Has(s.errors.at(0).message, kHint));
}

TEST(MistakesInputs, AManifestMassInGramsFailsItsRow) {
  const ManifestRow row = OneRow("clip,drop_height_m,mass_kg", ClipName() + ",0.08,5000");
  EXPECT_TRUE(Has(row.error, "column 'mass_kg': '5000' is outside the plausible 0.01-2000 kg")) << row.error;
  EXPECT_TRUE(Has(row.error, kHint)) << row.error;
}

TEST(MistakesInputs, AManifestFreeRadiusInMillimetresFailsItsRow) {
  const ManifestRow row = OneRow("clip,drop_height_m,mass_kg,free_radius_m", ClipName() + ",0.08,5,200");
  EXPECT_TRUE(
      Has(row.error, "column 'free_radius_m': '200' is outside the plausible 0.005-1.5 m; " + std::string(kHint)))
      << row.error;
}

TEST(MistakesInputs, AManifestSectionRadiusInMillimetresFailsItsRow) {
  const ManifestRow row =
      OneRow("clip,drop_height_m,mass_kg,free_radius_m,section_radius_m", ClipName() + ",0.08,5,0.2,45");
  EXPECT_TRUE(Has(row.error, "column 'section_radius_m'")) << row.error;
  EXPECT_TRUE(Has(row.error, kHint)) << row.error;
}

TEST(MistakesInputs, AManifestTemplateMarkerWithoutItsStartPointFailsItsRow) {
  const ManifestRow row = OneRow("clip,drop_height_m,mass_kg,marker", ClipName() + ",0.08,5,template");
  EXPECT_TRUE(Has(row.error, "column 'marker': 'template' needs the patch to follow: give marker_u_px and marker_v_px"))
      << row.error;
}

TEST(MistakesInputs, AManifestMarkerKindNotKnownFailsItsRowListingTheKinds) {
  const ManifestRow row = OneRow("clip,drop_height_m,mass_kg,marker", ClipName() + ",0.08,5,circle");
  EXPECT_TRUE(Has(row.error, "'circle' is not a marker kind; valid: auto, quadrant, dot, template")) << row.error;
}

TEST(MistakesInputs, AManifestStartPointWithOneCoordinateFailsItsRow) {
  const ManifestRow row = OneRow("clip,drop_height_m,mass_kg,marker_u_px,marker_v_px", ClipName() + ",0.08,5,200,");
  EXPECT_TRUE(Has(row.error, "column 'marker_v_px': is empty but its partner is given")) << row.error;
}

// The marker columns reach the clip's request (what `run` tracks with), each kind by its name.
TEST(MistakesInputs, ManifestMarkerColumnsAreHonouredByTheRunRequest) {
  const ManifestRow row = OneRow("clip,drop_height_m,mass_kg,marker,marker_u_px,marker_v_px,gravity_mps2",
                                 ClipName() + ",0.08,5,dot,210.5,40,9.81");
  ASSERT_TRUE(row.ok()) << row.error;
  const pipeline::ClipRequest request = ClipRequestFor(row, TheCorpus().clips);
  EXPECT_EQ(request.marker, tracker::MarkerKind::kDot);
  ASSERT_TRUE(request.seed_px.has_value());
  EXPECT_EQ(*request.seed_px, cv::Point2d(210.5, 40));
  EXPECT_EQ(request.gravity_mps2, 9.81);
  // The manifest's list of kinds is the tracker's (tracker/marker_kind.h).
  for (const char* kind : kManifestMarkerKinds) EXPECT_NO_THROW(tracker::MarkerKindFromString(kind)) << kind;
}

// --- analyze ---------------------------------------------------------------------------------

AnalyzeCommandOptions AnalyzeOptions(const fs::path& out) {
  const Corpus& c = TheCorpus();
  AnalyzeCommandOptions o;
  o.clip = c.clip.string();
  o.rig_path = c.rig.string();
  o.mass_kg = 5.0;  // the renderer's default mass
  o.drop_height_m = c.truth.clips.at(0).drop_height_m;
  o.free_radius_m = 0.20;  // the renderer's default free radius
  o.fps = 1000.0;          // PNG frames hold no rate
  o.out_dir = out.string();
  return o;
}

TEST(MistakesInputs, AnalyzeSectionRadiusInMillimetresIsRefusedAndAnEarlierResultKept) {
  const Corpus& c = TheCorpus();
  AnalyzeCommandOptions o = AnalyzeOptions(c.dir / "analyze_mm");
  o.section_radius_m = 45;
  fs::create_directories(o.out_dir);
  Write(fs::path(o.out_dir) / "result.json", "{}\n");
  std::ostringstream out, err;
  EXPECT_EQ(RunAnalyze(o, out, err), kExitBadUsage);
  EXPECT_EQ(err.str(),
            "dropfit analyze: --section-radius 45 is outside the plausible 0.005-1.5 m; did you give millimetres? Give "
            "the tyre section radius in metres\n");
  EXPECT_EQ(test::ReadFileBytes(fs::path(o.out_dir) / "result.json"), "{}\n");
}

TEST(MistakesInputs, AnalyzeMassInGramsIsRefused) {
  AnalyzeCommandOptions o = AnalyzeOptions(TheCorpus().dir / "analyze_g");
  o.mass_kg = 5000;
  std::ostringstream out, err;
  EXPECT_EQ(RunAnalyze(o, out, err), kExitBadUsage);
  EXPECT_TRUE(Has(err.str(), "--mass 5000 is outside the plausible 0.01-2000 kg")) << err.str();
  EXPECT_FALSE(fs::exists(o.out_dir));
}

// The old name of the start point, through the program itself (CLI11 is only in the program).
TEST(MistakesInputs, TheOldStartPointOptionNamesItsNewName) {
  const Corpus& c = TheCorpus();
  const fs::path err_file = c.dir / "seed_err.txt";
  const std::string command = std::string(DROPFIT_PROGRAM) + " analyze " + c.clip.string() + " --rig " +
                              c.rig.string() + " --mass 5 -o " + (c.dir / "seed_out").string() + " --seed 200,40 2> " +
                              err_file.string();
  const int raw = std::system(command.c_str());
  ASSERT_TRUE(WIFEXITED(raw));
  EXPECT_EQ(WEXITSTATUS(raw), kExitBadUsage);
  EXPECT_TRUE(Has(test::ReadFileBytes(err_file), "--seed: the marker's start point is now --marker-at U,V"))
      << test::ReadFileBytes(err_file);
  EXPECT_FALSE(fs::exists(c.dir / "seed_out"));
}

// The contact law of the render has no tread geometry given to analyze: the volumetric law is
// listed with the reason and not ranked.
TEST(MistakesInputs, TheVolumetricLawIsNotRankedWithoutATreadGeometry) {
  const Corpus& c = TheCorpus();
  const AnalyzeCommandOptions o = AnalyzeOptions(c.dir / "no_tread");
  std::ostringstream out, err;
  ASSERT_EQ(RunAnalyze(o, out, err), kExitDone) << err.str();
  const ClipResult r = ReadClipResult(fs::path(o.out_dir) / "result.json");
  ASSERT_TRUE(r.best_law.has_value());
  EXPECT_NE(*r.best_law, "volumetric");
  bool listed = false;
  for (const FitRecord& f : r.fits) {
    if (f.law != "volumetric") continue;
    listed = true;
    EXPECT_FALSE(f.converged);
    bool reason = false;
    for (const auto& [name, text] : f.notes) reason |= name == "failure" && Has(text, "the tread geometry is unknown");
    EXPECT_TRUE(reason);
    EXPECT_TRUE(f.params.empty()) << "a volumetric stiffness of an assumed tread was written";
  }
  EXPECT_TRUE(listed);
  for (const std::string& e : r.equivalent_laws) EXPECT_NE(e, "volumetric");
}

// --- 16-bit images ---------------------------------------------------------------------------

// 12-bit camera data (0-4095) in 16-bit TIFF files: tracked like the 8-bit frames, with the
// scaling said in the warnings. Before, the data was scaled as 16-bit (0-15 grey levels) and
// the marker was not found.
TEST(MistakesInputs, TwelveBitDataInSixteenBitTiffIsScaledByItsBitsAndTracked) {
  const Corpus& c = TheCorpus();
  const fs::path tiffs = c.dir / "tiff12";
  fs::create_directories(tiffs);
  auto source = media::FrameSource::Open(c.clip);
  cv::Mat grey, deep;
  int n = 0;
  for (media::FrameRead f = source->Read(grey); f.status != media::ReadStatus::kEnd; f = source->Read(grey)) {
    ASSERT_EQ(f.status, media::ReadStatus::kFrame);
    grey.convertTo(deep, CV_16U, 4095.0 / 255.0);  // 12 significant bits
    char name[32];
    std::snprintf(name, sizeof name, "frame_%05d.tif", n++);
    ASSERT_TRUE(cv::imwrite((tiffs / name).string(), deep));
  }
  const auto track = [&](const fs::path& clip, const fs::path& out_dir) {
    TrackCommandOptions o;
    o.clip = clip.string();
    o.rig_path = c.rig.string();
    o.fps = 1000.0;  // image folders hold no rate
    o.out_dir = out_dir.string();
    std::ostringstream out, err;
    EXPECT_EQ(RunTrack(o, out, err), kExitDone) << err.str();
    return ReadClipResult(out_dir / "result.json");
  };
  const ClipResult eight = track(c.clip, c.dir / "track8");
  const ClipResult twelve = track(tiffs, c.dir / "track12");
  EXPECT_EQ(twelve.tracked_frames, eight.tracked_frames);
  EXPECT_GT(twelve.tracked_frames, n * 9 / 10);
  EXPECT_TRUE(AnyHas(twelve.warnings, "as 12-bit data (largest value")) << "the scaling is not said";
}

// --- template tracking ---------------------------------------------------------------------

// A textured patch followed as a template falls slowly; from frame kSwap on it is gone and an
// identical patch sits 200 px away (a template re-locking on a look-alike, as on a turning
// marker). Free fall from 0.1 m + 0.5 m at 1,000 frames/s and 1 mm/px moves at most
// 3.4 px per frame: the far match is left empty with its reason; without the limit it is taken
// (the check can fail).
TEST(MistakesInputs, ATemplateMatchFartherThanFreeFallAllowsIsLeftEmptyWithItsReason) {
  constexpr int kFrames = 60, kSwap = 20;
  constexpr double kFps = 1000, kMetresPerPx = 1e-3, kDropHeightM = 0.1;
  std::mt19937 rng(18);
  cv::Mat patch(25, 25, CV_8U);
  cv::randu(patch, 30, 220);
  cv::GaussianBlur(patch, patch, cv::Size(3, 3), 0.8);
  const auto frame = [&](int k) {
    cv::Mat img(320, 400, CV_8U, cv::Scalar(128));
    const int x = k < kSwap ? 60 : 260, y = 100 + k / 4;  // ~0.25 px per frame, then 200 px away
    patch.copyTo(img(cv::Rect(x, y, 25, 25)));
    return img;
  };
  const auto run = [&](std::optional<double> max_step_px) {
    tracker::TrackOptions o;
    o.marker = tracker::MarkerKind::kTemplate;
    o.seed_px = cv::Point2d(72, 112);
    o.max_step_px = max_step_px;
    tracker::MarkerTracker t(o);
    for (int k = 0; k < kFrames; ++k) t.Process(k, frame(k));
    return t.Finish(kFrames, "look_alike");
  };
  const double step_px = pipeline::MaxMarkerStepPx(kDropHeightM, 9.80665, kFps, kMetresPerPx);
  // sqrt(2 g (h + 0.5 m)) / fps / scale (free fall from rest; any mechanics text).
  EXPECT_NEAR(step_px, std::sqrt(2 * 9.80665 * 0.6) / kFps / kMetresPerPx, 1e-12);
  const tracker::Track ungated = run(std::nullopt);
  int relocked = -1;  // the first frame the look-alike is taken without the limit
  for (int k = kSwap; k < kFrames && relocked < 0; ++k) {
    if (ungated.samples.at(k).found) relocked = k;
  }
  ASSERT_GE(relocked, kSwap) << "the look-alike is not matched: the case tests nothing";
  EXPECT_GT(ungated.samples.at(relocked).centre_px.x, 250.0);
  const tracker::Track gated = run(step_px);
  EXPECT_TRUE(gated.samples.at(kSwap - 1).found);
  for (int k = kSwap; k < kFrames; ++k) EXPECT_FALSE(gated.samples.at(k).found) << "frame " << k;
  ASSERT_FALSE(gated.left_empty.empty());
  EXPECT_EQ(gated.left_empty.front().frame, relocked);
  EXPECT_TRUE(Has(gated.left_empty.front().reason, "px a free fall from the drop height + 0.5 m allows in "))
      << gated.left_empty.front().reason;
  EXPECT_TRUE(AnyHas(gated.warnings, "template matches not taken on"));
}

}  // namespace
}  // namespace dropfit::cli
