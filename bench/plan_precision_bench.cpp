// The tracker's centre precision as `dropfit plan` uses it (plan/precision_table.h): the hub
// marker rendered by the clip renderer (synth/render.h) moving straight down at constant speed,
// tracked by the real tracker (tracker/track.h), its centre compared with the renderer's truth.
// One cell per marker kind x marker diameter [px] x motion blur during the exposure [px] x read
// noise [grey levels]; the reference sensor otherwise (shot noise 16 e-/grey, lens blur 0.5 px,
// no vignetting or flicker, lossless frames). How it is measured: docs/methods.md §22.
//
//   build/bench/plan_precision_bench [--frames 40] [--seeds 2] [--table]
//
// Prints per cell: the s.d. and the robust s.d. (1.4826 MAD) of the vertical (along the motion) and horizontal centre
// errors about their means [px], the mean vertical error (bias) [px] and the frames found. With
// --table it prints the rows of plan/precision_table.cpp instead (the robust vertical s.d.,
// which is what the robust flight fits see, and the fraction of frames found).
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <random>
#include <string>
#include <vector>

#include "analysis/forward_model.h"
#include "synth/camera.h"
#include "synth/render.h"
#include "tracker/track.h"

namespace {

using namespace dropfit;

constexpr double kDiametersPx[] = {6, 8, 12, 16, 24, 32, 48, 64};
constexpr double kBlursPx[] = {0, 2, 4, 8, 16};
constexpr double kNoisesGrey[] = {2, 4, 8};

// A centre further than this from the truth is another feature (a rim hole) followed, counted
// as not found (the marker's own errors stay far below it; common practice, no source).
constexpr double kWrongLockPx = 1.5;

struct Cell {
  double sd_v_px = 0, sd_u_px = 0, bias_v_px = 0;
  double robust_sd_v_px = 0;  // 1.4826 x the median absolute deviation from the median
  std::vector<double> residuals_v;
  int found = 0, frames = 0;
};

std::vector<Cell> MeasureCells(synth::MarkerShape shape, double diameter_px, double blur_px, int frames, int seeds) {
  const double marker_m = shape == synth::MarkerShape::kQuadrant ? 0.030 : 0.018;
  const double scale_m_per_px = marker_m / diameter_px;
  const double fps = 1000.0;
  const double exposure_s = 1.0 / fps;  // blur per frame = motion per frame
  const double speed_mps = blur_px * scale_m_per_px / exposure_s;
  const int width = static_cast<int>(std::ceil(diameter_px * 2 + 60));
  const int height = static_cast<int>(std::ceil(diameter_px * 2 + 60 + blur_px * (frames + 2)));

  synth::CameraSetup setup;
  setup.intrinsics.image_size = cv::Size(width, height);
  setup.intrinsics.fx_px = setup.intrinsics.fy_px = 1000.0;
  setup.intrinsics.cx_px = width / 2.0 + 0.3;
  setup.intrinsics.cy_px = height / 2.0 - 0.2;
  setup.intrinsics.k1 = setup.intrinsics.k2 = setup.intrinsics.p1 = setup.intrinsics.p2 = 0.0;
  setup.distance_m = scale_m_per_px * 1000.0;
  setup.pitch_deg = setup.roll_deg = setup.yaw_deg = 0.0;
  const double start_y_m = 0.5 + (height / 2.0 - diameter_px - 20) * scale_m_per_px;
  setup.aim_x_m = 0.0;
  setup.aim_y_m = 0.5;
  const synth::PinholeCamera camera = synth::MakeCamera(setup);
  synth::WheelLook look;
  look.free_radius_m = 0.2;
  look.rim_radius_m = 0.11;
  look.marker = shape;
  look.marker_diameter_m = marker_m;
  const synth::SceneRenderer renderer(camera, look, synth::SceneLook{});

  std::vector<Cell> cells(std::size(kNoisesGrey));
  for (int seed = 0; seed < seeds; ++seed) {
    std::vector<tracker::MarkerTracker> trackers;
    std::vector<std::vector<double>> ev(std::size(kNoisesGrey)), eu(std::size(kNoisesGrey));
    for (size_t n = 0; n < std::size(kNoisesGrey); ++n) {
      tracker::TrackOptions options;
      options.marker =
          shape == synth::MarkerShape::kQuadrant ? tracker::MarkerKind::kQuadrant : tracker::MarkerKind::kDot;
      trackers.emplace_back(options);
    }
    std::mt19937_64 rng(1000 + seed);
    const double phase = 0.37 * seed;
    std::vector<cv::Point2d> truth;
    // The marker rests for the tracker's detection frames (a real clip starts before release),
    // then moves at constant speed; only the moving frames count.
    const int still = 10;
    const cv::Mat1f still_radiance = renderer.RenderRadiance({{0.0, start_y_m, phase}}, 0.5);
    for (int f = 0; f < still; ++f) {
      synth::ExposureSettings exposure;
      exposure.exposure_s = exposure_s;
      exposure.vignetting_fraction = 0.0;
      exposure.flicker_fraction = 0.0;
      for (size_t n = 0; n < std::size(kNoisesGrey); ++n) {
        exposure.read_noise_grey = kNoisesGrey[n];
        trackers[n].Process(f, renderer.Expose(still_radiance, 0.0, exposure, &rng));
      }
    }
    for (int f = 0; f < frames; ++f) {
      const double t_mid = (f + 0.5) / fps;
      const int subframes = std::max(4, static_cast<int>(std::ceil(blur_px * 1.5)));
      std::vector<synth::WheelPose> poses;
      for (int j = 0; j < subframes; ++j) {
        const double t = t_mid + ((j + 0.5) / subframes - 0.5) * exposure_s;
        poses.push_back({0.0, start_y_m - speed_mps * t, phase + 1.5 * t});
      }
      const cv::Mat1f radiance = renderer.RenderRadiance(poses, 0.5);
      truth.push_back(renderer.ImageFromWheelPlane({0.0, start_y_m - speed_mps * t_mid}));
      for (size_t n = 0; n < std::size(kNoisesGrey); ++n) {
        synth::ExposureSettings exposure;
        exposure.exposure_s = exposure_s;
        exposure.read_noise_grey = kNoisesGrey[n];
        exposure.vignetting_fraction = 0.0;
        exposure.flicker_fraction = 0.0;
        const cv::Mat1b image = renderer.Expose(radiance, t_mid, exposure, &rng);
        trackers[n].Process(still + f, image);
      }
    }
    for (size_t n = 0; n < std::size(kNoisesGrey); ++n) {
      const tracker::Track track = trackers[n].Finish(still + frames, "precision");
      for (const tracker::TrackSample& s : track.samples) {
        if (!s.found || s.frame < still) continue;
        const cv::Point2d e = s.centre_px - truth[s.frame - still];
        if (std::hypot(e.x, e.y) > kWrongLockPx) continue;  // another feature followed: not found
        ev[n].push_back(e.y);
        eu[n].push_back(e.x);
      }
      Cell& c = cells[n];
      c.frames += frames;
      c.found += static_cast<int>(ev[n].size());
      auto mean = [](const std::vector<double>& x) {
        double s = 0;
        for (double v : x) s += v;
        return x.empty() ? 0.0 : s / x.size();
      };
      auto ss = [&](const std::vector<double>& x) {
        const double m = mean(x);
        double s = 0;
        for (double v : x) s += (v - m) * (v - m);
        return s;
      };
      // Pooled over seeds: accumulate sums of squares with (n - 1) per seed.
      c.sd_v_px += ss(ev[n]);
      c.sd_u_px += ss(eu[n]);
      c.bias_v_px += mean(ev[n]) / seeds;
      const double m = mean(ev[n]);
      for (double v : ev[n]) c.residuals_v.push_back(v - m);
    }
  }
  for (Cell& c : cells) {
    const double dof = std::max(1, c.found - seeds);
    c.sd_v_px = std::sqrt(c.sd_v_px / dof);
    c.sd_u_px = std::sqrt(c.sd_u_px / dof);
    std::vector<double> a = c.residuals_v;
    if (a.empty()) continue;
    std::nth_element(a.begin(), a.begin() + a.size() / 2, a.end());
    const double median = a[a.size() / 2];
    for (double& v : a) v = std::abs(v - median);
    std::nth_element(a.begin(), a.begin() + a.size() / 2, a.end());
    c.robust_sd_v_px = 1.4826 * a[a.size() / 2];
  }
  return cells;
}

}  // namespace

int main(int argc, char** argv) {
  int frames = 40, seeds = 2;
  bool table = false;
  for (int i = 1; i < argc; ++i) {
    if (!std::strcmp(argv[i], "--frames") && i + 1 < argc)
      frames = std::atoi(argv[++i]);
    else if (!std::strcmp(argv[i], "--seeds") && i + 1 < argc)
      seeds = std::atoi(argv[++i]);
    else if (!std::strcmp(argv[i], "--table"))
      table = true;
    else {
      std::fprintf(stderr, "usage: plan_precision_bench [--frames N] [--seeds N] [--table]\n");
      return 2;
    }
  }
  if (!table) {
    std::printf("tracker centre precision (renderer + tracker), %d frames x %d seeds per cell\n", frames, seeds);
    std::printf("%-9s %8s %8s %6s %9s %9s %9s %9s %7s\n", "marker", "diam_px", "blur_px", "noise", "sd_v_px",
                "rsd_v_px", "sd_u_px", "bias_v", "found");
  }
  for (const synth::MarkerShape shape : {synth::MarkerShape::kQuadrant, synth::MarkerShape::kDot}) {
    for (double d : kDiametersPx) {
      for (double b : kBlursPx) {
        const std::vector<Cell> cells = MeasureCells(shape, d, b, frames, seeds);
        for (size_t n = 0; n < cells.size(); ++n) {
          const Cell& c = cells[n];
          if (table) {
            std::printf("    {MarkerShape::k%s, %g, %g, %g, %.4f, %.3f},\n",
                        shape == synth::MarkerShape::kQuadrant ? "Quadrant" : "Dot", d, b, kNoisesGrey[n],
                        c.found > 2 ? c.robust_sd_v_px : NAN, static_cast<double>(c.found) / c.frames);
          } else {
            std::printf("%-9s %8g %8g %6g %9.4f %9.4f %9.4f %9.4f %4d/%d\n", synth::ToString(shape).c_str(), d, b,
                        kNoisesGrey[n], c.sd_v_px, c.robust_sd_v_px, c.sd_u_px, c.bias_v_px, c.found, c.frames);
          }
          std::fflush(stdout);
        }
      }
    }
  }
  return 0;
}
