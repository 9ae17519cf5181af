// `dropfit render` end to end (cli/render_command.h): the files it writes follow the output
// contract (docs/formats.md, "manifest.csv", read back with our
// contract reader), its MJPG clips read back through OpenCV's cv::VideoCapture (the reference
// reader) with every frame, it is deterministic for a seed, and the committed demo set in
// demo_clips/ is what its recorded command renders.
#include "cli/render_command.h"

#include <opencv2/videoio.hpp>

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <sstream>

#include "cli/exit_status.h"
#include "cli/manifest.h"
#include "cli/rig_io.h"
#include "cli/truth_io.h"
#include "tests/support/temp_dir.h"

namespace dropfit::cli {
namespace {

namespace fs = std::filesystem;

// A quick render: small frame, a small wheel, a few frames.
RenderCommandOptions Quick(const fs::path& out) {
  RenderCommandOptions o;
  o.out_dir = out.string();
  o.image_size = "320x480";
  o.free_radius_m = 0.1;
  o.section_radius_m = 0.02;
  o.marker_diameter_m = 0.02;
  o.heights_m = {0.1, 0.2};
  o.first_frames = 6;
  o.calibration = false;
  o.board = "5x4";
  o.square_m = 0.04;
  return o;
}

TEST(RenderCommand, WritesAContractManifestAndMjpgClipsThatReadBackFrameByFrame) {
  const test::TempDir tmp("render_cmd_manifest");
  const fs::path& dir = tmp.path();
  RenderCommandOptions o = Quick(dir);
  o.repeats = 2;
  ASSERT_EQ(RunRender(o), kExitDone);
  const Manifest manifest = ReadManifest(dir);
  ASSERT_EQ(manifest.rows.size(), 4u);
  EXPECT_TRUE(manifest.warnings.empty());
  const RenderTruth truth = ReadTruthFile(dir / "truth.json");
  ASSERT_EQ(truth.clips.size(), 4u);
  for (size_t i = 0; i < 4; ++i) {
    const ManifestRow& row = manifest.rows[i];
    EXPECT_TRUE(row.ok()) << row.error;
    EXPECT_EQ(row.clip, truth.clips[i].clip);
    EXPECT_EQ(row.clip_id, truth.clips[i].clip_id);
    EXPECT_DOUBLE_EQ(row.drop_height_m, i < 2 ? 0.1 : 0.2);
    EXPECT_DOUBLE_EQ(row.mass_kg, o.mass_kg);
    EXPECT_EQ(row.capture_fps, o.fps);
    EXPECT_EQ(row.specimen, o.specimen);
    EXPECT_EQ(row.free_radius_m, 0.1);
    EXPECT_EQ(row.section_radius_m, 0.02);
    // Every frame of the clip decodes through OpenCV, and the count matches the truth.
    cv::VideoCapture capture((dir / row.clip).string(), cv::CAP_FFMPEG);
    ASSERT_TRUE(capture.isOpened()) << row.clip;
    int frames = 0;
    cv::Mat frame;
    while (capture.read(frame)) {
      EXPECT_EQ(frame.cols, 320);
      EXPECT_EQ(frame.rows, 480);
      ++frames;
    }
    EXPECT_EQ(frames, 6) << row.clip;
    EXPECT_EQ(truth.clips[i].frames.size(), 6u);
    // The drop's impacts are those of the full clip (three complete bounces by default).
    ASSERT_GE(truth.clips[i].impacts.size(), 3u);
    EXPECT_TRUE(truth.clips[i].impacts[2].complete);
  }
  // The exact rig maps the truth's pixels to the truth's metres.
  const calib::Rig rig = ReadRigFile(dir / "rig_exact.json");
  const synth::FrameTruth& f = truth.clips[0].frames[3];
  const cv::Point2d p = calib::PlaneFromImage(rig, {f.u_px, f.v_px});
  EXPECT_NEAR(p.x, f.x_m, 1e-8);
  EXPECT_NEAR(p.y, f.y_m, 1e-8);
}

TEST(RenderCommand, SameSeedWritesIdenticalFilesAndAnotherSeedDoesNot) {
  const test::TempDir tmp_a("render_cmd_seed_a"), tmp_b("render_cmd_seed_b"), tmp_c("render_cmd_seed_c");
  const fs::path &a = tmp_a.path(), &b = tmp_b.path(), &c = tmp_c.path();
  RenderCommandOptions o = Quick(a);
  o.heights_m = {0.15};
  ASSERT_EQ(RunRender(o), kExitDone);
  o.out_dir = b.string();
  ASSERT_EQ(RunRender(o), kExitDone);
  o.out_dir = c.string();
  o.seed = 2;
  ASSERT_EQ(RunRender(o), kExitDone);
  const std::string clip = "drop_h150mm_r1.avi";
  EXPECT_EQ(test::ReadFileBytes(a / clip), test::ReadFileBytes(b / clip));
  EXPECT_EQ(test::ReadFileBytes(a / "truth.json"), test::ReadFileBytes(b / "truth.json"));
  EXPECT_NE(test::ReadFileBytes(a / clip), test::ReadFileBytes(c / clip));
}

TEST(RenderCommand, BadOptionsWriteNothingAndSayWhatIsWrong) {
  const test::TempDir tmp("render_cmd_bad");
  const fs::path dir = tmp.path() / "out";
  RenderCommandOptions o = Quick(dir);
  o.params = {"k_n_per_m=4e4", "stiffness=3"};
  EXPECT_EQ(*ValidateRenderOptions(o),
            "--param 'stiffness=3': expected name=value with a name of law kelvin-voigt (k_n_per_m, c_ns_per_m)");
  EXPECT_EQ(RunRender(o), kExitBadUsage);
  EXPECT_FALSE(fs::exists(dir));
  o = Quick(dir);
  o.exposure_s = 1e-3;
  EXPECT_EQ(*ValidateRenderOptions(o),
            "sensor: exposure 0.001 s must be positive and at most the frame interval 0.0005 s");
  o = Quick(dir);
  o.format = "gif";
  EXPECT_EQ(*ValidateRenderOptions(o), "unknown video format 'gif'; valid: mjpg, ffv1, h264, png, auto");
}

TEST(RenderCommand, CommittedDemoSetIsWhatItsRecordedCommandRenders) {
  const fs::path demo = fs::path(DROPFIT_SOURCE_DIR) / "demo_clips";
  ASSERT_TRUE(fs::exists(demo / "truth.json")) << "demo_clips/truth.json is missing";
  const RenderTruth committed = ReadTruthFile(demo / "truth.json");
  const Manifest committed_manifest = ReadManifest(demo);
  // Re-render every clip's first frames (and none of the calibration images) from the recorded
  // options; the clips' planning (release, impacts) is the full one.
  RenderCommandOptions o = RenderOptionsFromRecord(committed.options);
  const test::TempDir tmp("render_cmd_demo");
  const fs::path& dir = tmp.path();
  o.out_dir = dir.string();
  o.first_frames = 3;
  o.calibration = false;
  o.format = "png";
  ASSERT_EQ(RunRender(o), kExitDone);
  const RenderTruth fresh = ReadTruthFile(dir / "truth.json");
  const Manifest fresh_manifest = ReadManifest(dir);
  ASSERT_EQ(fresh.clips.size(), committed.clips.size());
  ASSERT_EQ(fresh_manifest.rows.size(), committed_manifest.rows.size());
  for (size_t i = 0; i < fresh.clips.size(); ++i) {
    const ClipTruth& a = fresh.clips[i];
    const ClipTruth& b = committed.clips[i];
    EXPECT_EQ(a.clip_id, b.clip_id);
    EXPECT_EQ(fresh_manifest.rows[i].clip_id, committed_manifest.rows[i].clip_id);
    EXPECT_EQ(fresh_manifest.rows[i].drop_height_m, committed_manifest.rows[i].drop_height_m);
    EXPECT_EQ(fresh_manifest.rows[i].mass_kg, committed_manifest.rows[i].mass_kg);
    EXPECT_EQ(fresh_manifest.rows[i].capture_fps, committed_manifest.rows[i].capture_fps);
    EXPECT_EQ(a.noise_seed, b.noise_seed);
    EXPECT_DOUBLE_EQ(a.release_time_s, b.release_time_s);
    ASSERT_EQ(a.impacts.size(), b.impacts.size()) << a.clip_id;
    for (size_t k = 0; k < a.impacts.size(); ++k) {
      // JSON keeps doubles to their shortest round-trip text: the same numbers.
      EXPECT_DOUBLE_EQ(a.impacts[k].cor, b.impacts[k].cor);
      EXPECT_DOUBLE_EQ(a.impacts[k].t_contact_s, b.impacts[k].t_contact_s);
      EXPECT_DOUBLE_EQ(a.impacts[k].peak_force_n, b.impacts[k].peak_force_n);
    }
    ASSERT_EQ(a.frames.size(), 3u);
    ASSERT_GE(b.frames.size(), 3u);
    for (size_t f = 0; f < 3; ++f) {
      EXPECT_EQ(a.frames[f].u_px, b.frames[f].u_px);
      EXPECT_EQ(a.frames[f].v_px, b.frames[f].v_px);
      EXPECT_EQ(a.frames[f].y_m, b.frames[f].y_m);
    }
    // The committed clip holds as many frames as its truth says.
    cv::VideoCapture capture((demo / b.clip).string(), cv::CAP_FFMPEG);
    ASSERT_TRUE(capture.isOpened()) << b.clip;
    EXPECT_EQ(static_cast<size_t>(capture.get(cv::CAP_PROP_FRAME_COUNT)), b.frames.size()) << b.clip;
  }
}

}  // namespace
}  // namespace dropfit::cli
