// Tests of `dropfit calibrate` as a library call (cli/calibrate_command.h): files in, rig file
// out, exit status and messages of the contract. Views are rendered through OpenCV's camera
// model (tests/support/synthetic_board.h; OpenCV 4.6 as the reference library).
#include "cli/calibrate_command.h"

#include <gtest/gtest.h>
#include <opencv2/imgcodecs.hpp>

#include <filesystem>
#include <fstream>
#include <iostream>
#include <random>
#include <sstream>

#include "calib/calibration_input.h"
#include "cli/exit_status.h"
#include "cli/rig_io.h"
#include "media/files.h"
#include "synth/render_calibration.h"
#include "tests/support/synthetic_board.h"
#include "tests/support/temp_dir.h"

namespace dropfit::cli {
namespace {

namespace fs = std::filesystem;
using test::BoardInView;
using test::PoseLookingAt;
using test::RenderBoard;
using test::SyntheticCamera;

// The rig's mapping of a truth point: 0.2 mm covers the corner noise of a 5-view calibration
// at ~0.65 mm/px (the accuracy itself is tested in tests/calib/calibrate_test.cpp).
constexpr double kPositionTolM = 0.2e-3;

struct Fixture {
  fs::path dir;
  SyntheticCamera cam;
  calib::BoardSpec board{9, 6, 0.025};
  cv::Vec3d plane_rvec, plane_tvec;
};

// The fixture's folder, shared by all tests and removed when the test program ends.
const fs::path& FixtureFolder() {
  static const test::TempDir dir("calibrate_command_test");
  return dir.path();
}

// Renders 5 lens views into <dir>/views and the plane view into <dir>/plane.png, once.
const Fixture& TheFixture() {
  static const Fixture f = [] {
    Fixture fx;
    std::mt19937_64 rng(7);
    rng.discard(1);  // the first draw once named the folder; skipping it keeps the rendered views' noise
    fx.dir = FixtureFolder();
    fs::create_directories(fx.dir / "views");
    const double poses[][6] = {{300, 230, 0.5, 0.45, -0.35, 0.1},
                               {720, 230, 0.5, 0.45, 0.35, -0.1},
                               {300, 540, 0.5, -0.45, -0.35, 0.0},
                               {720, 540, 0.5, -0.45, 0.35, 0.05},
                               {512, 384, 0.45, 0.0, 0.6, 0.0}};
    int k = 0;
    for (const auto& p : poses) {
      cv::Vec3d r, t;
      double z = p[2];
      do {
        PoseLookingAt(fx.cam, fx.board, p[0], p[1], z, p[3], p[4], p[5], r, t);
        z *= 1.08;
      } while (!BoardInView(fx.cam, fx.board, r, t, 0.8, 4.0));
      cv::imwrite((fx.dir / "views" / ("v" + std::to_string(k++) + ".png")).string(),
                  RenderBoard(fx.cam, fx.board, r, t, {}, rng));
    }
    PoseLookingAt(fx.cam, fx.board, 560, 430, 0.7, 0.03, -0.05, 0.0, fx.plane_rvec, fx.plane_tvec);
    cv::imwrite((fx.dir / "plane.png").string(), RenderBoard(fx.cam, fx.board, fx.plane_rvec, fx.plane_tvec, {}, rng));
    return fx;
  }();
  return f;
}

struct CommandRun {
  int status;
  std::string out, err;
};
CommandRun RunIt(const CalibrateCommandOptions& o) {
  std::ostringstream out, err;
  const int status = RunCalibrate(o, out, err);
  return {status, out.str(), err.str()};
}

CalibrateCommandOptions BaseOptions(const std::string& rig_name) {
  const Fixture& f = TheFixture();
  CalibrateCommandOptions o;
  o.inputs = {(f.dir / "views").string()};
  o.board = "9x6";
  o.square_m = 0.025;
  o.plane_image = (f.dir / "plane.png").string();
  o.out_path = (f.dir / rig_name).string();
  return o;
}

TEST(CalibrateCommand, AFolderAndAPlaneViewGiveARigFileThatMapsTruthPoints) {
  const Fixture& f = TheFixture();
  CalibrateCommandOptions o = BaseOptions("rig.json");
  o.corner_height_m = 0.1;
  o.fps = 2000;
  const CommandRun r = RunIt(o);
  ASSERT_EQ(r.status, kExitDone) << r.err;
  const calib::Rig rig = ReadRigFile(o.out_path);
  ASSERT_TRUE(rig.lens);
  EXPECT_EQ(rig.capture_fps, 2000.0);
  EXPECT_EQ(rig.y_origin, calib::YOrigin::kFloor);
  EXPECT_EQ(rig.input_hashes.size(), 6u);  // plane view + 5 views
  EXPECT_EQ(rig.input_hashes[0].second, media::Fnv1a64HexOfFile(o.plane_image));
  bool has_board_option = false;
  for (const auto& [name, value] : rig.settings) has_board_option |= (name == "board" && value == "9x6");
  EXPECT_TRUE(has_board_option);
  // Truth: board point (X, Y) of the plane view is at x_m = X, y_m = 0.1 + (rows-1) sq - Y.
  for (cv::Point2d b : {cv::Point2d(0.05, 0.0375), cv::Point2d(0.19, 0.11)}) {
    std::vector<cv::Point3d> obj{{b.x, b.y, 0}};
    std::vector<cv::Point2d> img;
    cv::projectPoints(obj, f.plane_rvec, f.plane_tvec, f.cam.camera_matrix, f.cam.distortion, img);
    const cv::Point2d p = calib::PlaneFromImage(rig, img[0]);
    EXPECT_NEAR(p.x, b.x, kPositionTolM);
    EXPECT_NEAR(p.y, 0.1 + 0.125 - b.y, kPositionTolM);
  }
  EXPECT_NE(r.out.find("square size measured back: mean error "), std::string::npos) << r.out;
  // The uncertainty: printed, and in the rig with the default corner height sd (0.5 mm), which
  // the floor's sd includes.
  EXPECT_NE(r.out.find("uncertainty (1 sd; corner noise "), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("floor "), std::string::npos) << r.out;
  ASSERT_TRUE(rig.uncertainty);
  EXPECT_EQ(rig.uncertainty->corner_height_sd_m, 0.0005);
  ASSERT_TRUE(rig.uncertainty->floor_sd_m);
  EXPECT_GE(*rig.uncertainty->floor_sd_m, 0.0005);
}

TEST(CalibrateCommand, ARefusedCalibrationExitsWithStatusTwoAndWritesNothing) {
  CalibrateCommandOptions o = BaseOptions("refused.json");
  o.board = "10x7";
  const CommandRun r = RunIt(o);
  EXPECT_EQ(r.status, kExitBadUsage);
  EXPECT_EQ(r.err,
            "dropfit calibrate: no checkerboard with 10x7 inner corners was found in any of the 6 images, but one with "
            "9x6 inner corners was found in " +
                o.plane_image + ": pass --board 9x6 (inner corners, not squares); nothing was written\n");
  EXPECT_FALSE(fs::exists(o.out_path));
}

TEST(CalibrateCommand, AMissingPlaneViewIsNamed) {
  CalibrateCommandOptions o = BaseOptions("missing.json");
  o.plane_image = (TheFixture().dir / "nope.png").string();
  const CommandRun r = RunIt(o);
  EXPECT_EQ(r.status, kExitBadUsage);
  EXPECT_EQ(r.err, "dropfit calibrate: the plane view " + o.plane_image +
                       " does not exist; --plane must name an image file of the board lying in the drop plane; nothing "
                       "was written\n");
  o.plane_image.clear();
  EXPECT_EQ(
      RunIt(o).err,
      "dropfit calibrate: no plane view given: pass --plane IMAGE, an image of the board lying in the drop plane; "
      "nothing was written\n");
  EXPECT_FALSE(fs::exists(o.out_path));
}

TEST(CalibrateCommand, BadOptionsAreRefusedWithTheValidValues) {
  CalibrateCommandOptions o = BaseOptions("bad.json");
  o.up = "sky";
  EXPECT_EQ(RunIt(o).err,
            "dropfit calibrate: unknown up side 'sky'; valid: top, bottom, left, right; nothing was written\n");
  o = BaseOptions("bad.json");
  o.board = "9by6";
  EXPECT_EQ(
      RunIt(o).err,
      "dropfit calibrate: board size '9by6' is not COLUMNSxROWS of inner corners, each at least 3 (e.g. 9x6 for a "
      "board of 10 x 7 squares); nothing was written\n");
  o = BaseOptions("bad.json");
  o.corner_height_m = -0.1;
  EXPECT_EQ(RunIt(o).status, kExitBadUsage);
  o = BaseOptions("bad.json");
  o.corner_height_sd_m = -0.001;
  EXPECT_EQ(RunIt(o).err,
            "dropfit calibrate: corner_height_sd_m = -0.001 is out of range (0..1 m); nothing was written\n");
  EXPECT_FALSE(fs::exists(o.out_path));
}

TEST(CalibrateCommand, OnlyAPlaneViewGivesARigWithoutLensAndAWarning) {
  CalibrateCommandOptions o = BaseOptions("plane_only.json");
  o.inputs = {o.plane_image};
  const CommandRun r = RunIt(o);
  ASSERT_EQ(r.status, kExitDone) << r.err;
  EXPECT_EQ(r.err.rfind("dropfit calibrate: warning: no lens model (only the plane view was given)", 0), 0u) << r.err;
  const calib::Rig rig = ReadRigFile(o.out_path);
  EXPECT_FALSE(rig.lens);
  ASSERT_EQ(rig.warnings.size(), 1u);
}

// Issue acceptance on the renderer's calibration images (synth/render_calibration.h, whose
// camera is pinned to OpenCV's model): focal length within 0.5 %, 200 mm in the drop plane
// within 0.05 mm at points off the board's corners.
constexpr double kFocalTolFraction = 0.005;
constexpr double kPlaneDistanceTolM = 0.05e-3;
// Absolute positions also carry the plane view's corner noise through the origin (~0.03 px at
// ~0.6 mm/px): 0.1 mm.
constexpr double kRenderedPositionTolM = 0.1e-3;

TEST(CalibrateCommand, TheRenderersCalibrationImagesGiveBackItsCameraAndDropPlane) {
  const synth::PinholeCamera camera = synth::MakeCamera(synth::CameraSetup{});
  const synth::SceneRenderer scene(camera, synth::WheelLook{}, synth::SceneLook{});
  const synth::CheckerboardSpec board{9, 6, 0.05};
  const auto images = synth::RenderCalibrationImages(scene, board, 12, synth::ExposureSettings{}, true, 11);
  const fs::path dir = TheFixture().dir / "rendered";
  fs::create_directories(dir / "views");
  CalibrateCommandOptions o;
  for (const auto& im : images) {
    const fs::path p = im.drop_plane ? dir / "plane.png" : dir / "views" / (im.name + ".png");
    cv::imwrite(p.string(), im.image);
    if (im.drop_plane) o.plane_image = p.string();
  }
  o.inputs = {(dir / "views").string()};
  o.board = "9x6";
  o.square_m = board.square_m;
  o.corner_height_m = synth::PlaneBoardCornerHeight(board);
  o.out_path = (dir / "rig.json").string();
  const CommandRun r = RunIt(o);
  ASSERT_EQ(r.status, kExitDone) << r.err;
  std::cout << r.out << r.err;
  const calib::Rig rig = ReadRigFile(o.out_path);
  ASSERT_TRUE(rig.lens);
  EXPECT_NEAR(rig.lens->camera_matrix(0, 0), camera.intrinsics.fx_px, kFocalTolFraction * camera.intrinsics.fx_px);
  EXPECT_NEAR(rig.lens->camera_matrix(1, 1), camera.intrinsics.fy_px, kFocalTolFraction * camera.intrinsics.fy_px);
  double worst = 0;
  for (double y : {0.13, 0.21, 0.33}) {
    for (double x : {0.01, 0.07, 0.19}) {
      const cv::Point2d a(x, y), b(x + 0.2, y);
      const cv::Point2d pa = calib::PlaneFromImage(rig, synth::ImageFromDropPlane(camera, a));
      const cv::Point2d pb = calib::PlaneFromImage(rig, synth::ImageFromDropPlane(camera, b));
      worst = std::max(worst, std::abs(cv::norm(pa - pb) - 0.2));
      EXPECT_NEAR(cv::norm(pa - pb), 0.2, kPlaneDistanceTolM) << "at " << a;
      EXPECT_NEAR(pa.x, a.x, kRenderedPositionTolM);
      EXPECT_NEAR(pa.y, a.y, kRenderedPositionTolM);
    }
  }
  std::cout << "rendered: fx " << rig.lens->camera_matrix(0, 0) << " (truth " << camera.intrinsics.fx_px
            << "), worst 200 mm error " << worst * 1e3 << " mm\n";
}

}  // namespace
}  // namespace dropfit::cli
