#include "synth/render_set.h"

#include <opencv2/imgcodecs.hpp>

#include <chrono>
#include <filesystem>
#include <mutex>
#include <numbers>
#include <random>
#include <stdexcept>
#include <utility>

#include "analysis/contact_law.h"
#include "analysis/forward_model.h"
#include "media/video_out.h"
#include "synth/render_calibration.h"

namespace dropfit::synth {

namespace {

namespace fs = std::filesystem;

// The set-wide part of the truth: seed, specimen, law, camera, wheel, exposure, options.
RenderTruth SetTruth(const RenderSetPlan& set) {
  const RenderOptions& options = set.options;
  const RenderPlan& plan = set.plan;
  RenderTruth truth;
  truth.seed = options.seed;
  truth.specimen = options.specimen;
  truth.law = options.law;
  for (size_t i = 0; i < plan.law_params.size(); ++i) {
    truth.params.emplace_back(analysis::ParameterNames(plan.law)[i], plan.law_params[i]);
  }
  truth.mass_kg = options.mass_kg;
  truth.gravity_mps2 = options.gravity_mps2;
  truth.tread = plan.tread;
  truth.camera = set.camera;
  truth.wheel = plan.wheel;
  truth.exposure = plan.exposure;
  truth.options = EffectiveOptions(options, plan);
  return truth;
}

// Writes calib/lens_NN.png and calib/plane.png into `out` and returns their truth.
CalibrationTruth WriteCalibrationImages(const RenderSetPlan& set, const fs::path& out) {
  const RenderOptions& options = set.options;
  const fs::path calib_dir = out / "calib";
  fs::create_directories(calib_dir);
  CalibrationTruth ct;
  ct.board = options.board;
  ct.square_m = options.square_m;
  ct.corner_height_m = PlaneBoardCornerHeight(set.plan.board);
  for (const CalibrationImage& image :
       RenderCalibrationImages(*set.renderer, set.plan.board, options.lens_views, set.plan.exposure, set.plan.add_noise,
                               CalibrationNoiseSeed(options))) {
    const std::string file = "calib/" + image.name + ".png";
    if (!cv::imwrite((out / file).string(), image.image)) {
      throw std::runtime_error("cannot write '" + (out / file).string() + "'");
    }
    ct.views.push_back({file, image.drop_plane, image.board_rvec_rad, image.board_tvec_m, image.inner_corners_px});
  }
  return ct;
}

// Renders one clip into `out` (its own generator, its own file) and returns its truth.
ClipTruth RenderOneClip(const RenderSetPlan& set, const RenderSetPlan::Clip& clip, const fs::path& out) {
  const RenderOptions& options = set.options;
  const RenderPlan& plan = set.plan;
  const double container_fps = options.container_fps > 0 ? options.container_fps : options.fps;
  const analysis::Trajectory trajectory = analysis::SimulateDrop(clip.plan.scenario);
  const fs::path clip_path = out / clip.file;
  if (plan.format == media::VideoFormat::kPngFrames) fs::remove_all(clip_path);
  auto sink = media::OpenFrameSink(clip_path, plan.format, set.camera.intrinsics.image_size, container_fps,
                                   options.jpeg_quality);
  ExposureSettings exposure = plan.exposure;
  std::mt19937_64 phase_rng(clip.plan.noise_seed ^ 0xF11C4E5ull);
  exposure.flicker_phase_rad = std::uniform_real_distribution<double>(0, 2 * std::numbers::pi)(phase_rng);
  const int frames = options.first_frames > 0 ? std::min(options.first_frames, clip.plan.frames) : clip.plan.frames;
  ClipTruth truth;
  truth.clip_id = clip.clip_id;
  truth.clip = clip.file;
  truth.drop_height_m = clip.drop_height_m;
  truth.frames = RenderClip(*set.renderer, trajectory, frames, options.fps, exposure, plan.add_noise,
                            clip.plan.noise_seed, *sink, plan.occluder);
  sink->Close();
  const analysis::DropScenario& s = clip.plan.scenario;
  truth.release_drop_height_m = clip.plan.release_drop_height_m;
  truth.release_time_s = s.start_time_s;
  truth.capture_fps = options.fps;
  truth.container_fps = plan.format == media::VideoFormat::kPngFrames ? 0.0 : container_fps;
  truth.noise_seed = clip.plan.noise_seed;
  truth.onset_height_m = s.onset_height_m;
  truth.start_x_m = s.start_x_m;
  truth.start_spin_rad = s.start_spin_angle_rad;
  truth.drift_mps = s.drift_speed_mps;
  truth.spin_radps = s.spin_rate_radps;
  truth.impacts = trajectory.impacts();
  return truth;
}

}  // namespace

RenderSetPlan PlanRenderSet(const RenderOptions& options) {
  if (auto msg = ValidateRenderOptions(options)) throw std::invalid_argument(*msg);
  RenderSetPlan set;
  set.options = options;
  set.plan = MakePlan(options);
  set.camera = MakeCamera(set.plan.camera_setup);
  SceneLook scene;
  scene.texture_seed = options.seed * 0x9E3779B97F4A7C15ull + 17;
  set.renderer = std::make_unique<const SceneRenderer>(set.camera, set.plan.wheel, scene);
  int index = 0;
  for (double height : options.heights_m) {
    for (int r = 1; r <= options.repeats; ++r, ++index) {
      RenderSetPlan::Clip clip;
      clip.plan = PlanClip(options, set.plan, *set.renderer, height, index);
      clip.clip_id = ClipName(height, r);
      clip.file = clip.clip_id + media::FileExtension(set.plan.format);
      clip.drop_height_m = height;
      set.clips.push_back(std::move(clip));
    }
  }
  return set;
}

RenderTruth RenderSet(const RenderSetPlan& set, const ClipLoop& loop, const ClipDone& clip_done) {
  const fs::path out(set.options.out_dir);
  fs::create_directories(out);
  RenderTruth truth = SetTruth(set);
  if (set.options.calibration) truth.calibration = WriteCalibrationImages(set, out);

  std::vector<ClipTruth> clips(set.clips.size());
  std::mutex done_mutex;
  auto render_clip = [&](size_t i) {
    const auto started = std::chrono::steady_clock::now();
    clips[i] = RenderOneClip(set, set.clips[i], out);
    const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
    if (!clip_done) return;
    std::lock_guard<std::mutex> lock(done_mutex);
    clip_done(clips[i], seconds);
  };
  if (loop) {
    loop(clips.size(), render_clip);
  } else {
    for (size_t i = 0; i < clips.size(); ++i) render_clip(i);
  }
  truth.clips = std::move(clips);
  return truth;
}

}  // namespace dropfit::synth
