// Tracker benchmark: precision and speed of dropfit's hub-marker tracker on rendered drop clips,
// side by side with a plain threshold-and-centroid and OpenCV's general-purpose trackers.
//
//   track_bench [--frames N] [--noise 2,4] [--kinds quadrant,dot] [--quality 90] [--keep DIR]
//
// Per marker kind and read-noise level, one clip is rendered by dropfit's renderer
// (synth/render.h: a wheel dropped in front of a textured wall at 2,000 frames/s, 800x640,
// exposure 0.2 ms, shot + read noise, vignetting, flicker) and written as MJPG .avi (JPEG q90),
// with the exact mid-exposure marker centre of every frame. Then, on the same clip:
//   decode only     cv::VideoCapture::read + cvtColor to grey, whole clip [frames/s]
//   whole clip      tracker::TrackClip on a FrameSource (decode thread + tracker) [frames/s]
//   track only      tracker::MarkerTracker on frames already in memory, one core [frames/s]
//   RMS error [px]  radial: sqrt(mean(du² + dv²)) against the truth, over frames with the marker
//                   in view that each method tracked; and the share of those frames tracked:
//     dropfit       this tracker
//     otsu          Otsu threshold in a window of 2 x marker diameter centred on the truth
//                   (rounded), centroid of the whole blob of the marker's bright class
//     csrt, kcf     cv::TrackerCSRT / cv::TrackerKCF (OpenCV contrib tracking), initialised on a
//                   box of 1.4 x marker diameter at the first frame's truth; position = box
//                   centre, with the constant offset of the first frame removed
//   one-core ratio  (decode CPU + tracker CPU incl. the first-frame search) / decode CPU, from
//                   thread CPU times: what whole/decode would be with the tracker on the decoding
//                   core; steady on a shared machine, where wall-clock ratios are not
// Prints one table. A benchmark, not a test: nothing is asserted.

#include <opencv2/imgproc.hpp>
#include <opencv2/tracking.hpp>
#include <opencv2/videoio.hpp>

#include <chrono>
#include <cmath>
#include <cstdio>
#include <ctime>
#include <filesystem>
#include <iostream>
#include <sstream>
#include <string>
#include <vector>

#include "analysis/forward_model.h"
#include "media/frame_source.h"
#include "media/video_out.h"
#include "synth/camera.h"
#include "synth/render.h"
#include "tracker/track.h"

namespace {

using namespace dropfit;
namespace fs = std::filesystem;
using Clock = std::chrono::steady_clock;

double Seconds(Clock::time_point a, Clock::time_point b) { return std::chrono::duration<double>(b - a).count(); }

// CPU time of the calling thread [s]: steadier than wall time on a shared machine.
double ThreadCpuSeconds() {
  timespec ts{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return ts.tv_sec + 1e-9 * ts.tv_nsec;
}

struct Args {
  int frames = 600;
  std::vector<double> noise = {2.0, 4.0};
  std::vector<std::string> kinds = {"quadrant", "dot"};
  int quality = 90;
  std::string keep;
};

std::vector<std::string> Split(const std::string& s) {
  std::vector<std::string> out;
  std::stringstream ss(s);
  std::string item;
  while (std::getline(ss, item, ',')) out.push_back(item);
  return out;
}

struct Accuracy {
  double sum2 = 0;
  int tracked = 0;
  int visible = 0;
  void Add(bool visible_frame, bool found, cv::Point2d est, cv::Point2d truth) {
    if (!visible_frame) return;
    ++visible;
    if (!found) return;
    ++tracked;
    const cv::Point2d e = est - truth;
    sum2 += e.dot(e);
  }
  double Rms() const { return tracked ? std::sqrt(sum2 / tracked) : NAN; }
  double Share() const { return visible ? 100.0 * tracked / visible : NAN; }
};

// Otsu threshold in a window of 2 x diameter around the truth; centroid of the bright class.
bool OtsuCentroid(const cv::Mat& grey, cv::Point2d centre, double diameter_px, cv::Point2d& out) {
  const int half = static_cast<int>(std::lround(diameter_px));
  const cv::Rect win = cv::Rect(static_cast<int>(std::lround(centre.x)) - half,
                                static_cast<int>(std::lround(centre.y)) - half, 2 * half + 1, 2 * half + 1) &
                       cv::Rect(0, 0, grey.cols, grey.rows);
  if (win.width < 4 || win.height < 4) return false;
  cv::Mat bin;
  cv::threshold(grey(win), bin, 0, 255, cv::THRESH_BINARY | cv::THRESH_OTSU);
  // The blob of the marker: the connected bright component at (or nearest) the window centre;
  // for a quadrant disc, whose two white quarters touch only at the centre, all bright pixels
  // within the marker's radius.
  cv::Mat labels;
  const int n = cv::connectedComponents(bin, labels, 8, CV_32S);
  if (n < 2) return false;
  const cv::Point c(half, half);
  int best = -1;
  double best_d = 1e300;
  for (int y = 0; y < labels.rows; ++y) {
    for (int x = 0; x < labels.cols; ++x) {
      const int l = labels.at<int>(y, x);
      if (l == 0) continue;
      const double d = std::hypot(x - c.x, y - c.y);
      if (d < best_d) {
        best_d = d;
        best = l;
      }
    }
  }
  const cv::Moments m = cv::moments(labels == best, true);
  if (m.m00 <= 0) return false;
  out = {win.x + m.m10 / m.m00, win.y + m.m01 / m.m00};
  return true;
}

struct Row {
  std::string kind;
  double noise = 0;
  Accuracy ours, otsu, csrt, kcf;
  double decode_fps = 0, whole_fps = 0, track_fps = 0, csrt_fps = 0, kcf_fps = 0;
  double decode_cpu_fps = 0, detect_ms = 0;
  std::string choice;
};

Row RunOne(const std::string& kind, double noise, const Args& args, const fs::path& dir) {
  Row row;
  row.kind = kind;
  row.noise = noise;
  // The scene: the renderer's defaults (about 1 px per mm at 800x640).
  const synth::PinholeCamera camera = synth::MakeCamera(synth::CameraSetup{});
  synth::WheelLook wheel;
  wheel.marker = synth::MarkerShapeFromString(kind);
  wheel.marker_diameter_m = kind == "dot" ? 0.018 : 0.030;
  const synth::SceneRenderer renderer(camera, wheel, synth::SceneLook{});
  analysis::DropScenario drop;
  drop.setup.mass_kg = 12.0;
  drop.law_params = {3.0e5, 400.0};  // Kelvin-Voigt k [N/m], c [N s/m]
  drop.onset_height_m = wheel.free_radius_m;
  drop.start_height_m = 0.62;  // about 3 m/s at impact: the upper hub speed
  drop.start_x_m = 0.17;
  drop.drift_speed_mps = 0.15;
  drop.spin_rate_radps = 6.0;
  const double fps = 2000.0;
  drop.start_time_s = -0.14;  // the clip starts shortly before the first impact
  drop.end_time_s = args.frames / fps + 0.01;
  const analysis::Trajectory trajectory = analysis::SimulateDrop(drop);
  synth::ExposureSettings exposure;
  exposure.read_noise_grey = noise;
  const fs::path clip = dir / (kind + "_noise" + std::to_string(static_cast<int>(noise)) + ".avi");
  std::vector<synth::FrameTruth> truth;
  {
    auto sink = media::OpenFrameSink(clip, media::VideoFormat::kMjpgAvi, renderer.image_size(), 1000.0, args.quality);
    truth = synth::RenderClip(renderer, trajectory, args.frames, fps, exposure, true,
                              0x5eed0000u + static_cast<uint64_t>(noise * 10), *sink);
    sink->Close();
  }
  const double diameter_px = wheel.marker_diameter_m / synth::MetresPerPixelAtCentre(camera);

  // Decode only (and keep the frames for the in-memory runs).
  std::vector<cv::Mat> frames;
  {
    cv::VideoCapture cap(clip.string(), cv::CAP_FFMPEG);
    cv::Mat bgr, grey;
    const auto t0 = Clock::now();
    const double c0 = ThreadCpuSeconds();
    int n = 0;
    while (cap.read(bgr)) {
      cv::cvtColor(bgr, grey, cv::COLOR_BGR2GRAY);
      ++n;
    }
    const auto t1 = Clock::now();
    row.decode_fps = n / Seconds(t0, t1);
    row.decode_cpu_fps = n / (ThreadCpuSeconds() - c0);
    cv::VideoCapture again(clip.string(), cv::CAP_FFMPEG);
    while (again.read(bgr)) {
      cv::cvtColor(bgr, grey, cv::COLOR_BGR2GRAY);
      frames.push_back(grey.clone());
    }
  }

  // Whole clip: decode thread + tracker.
  {
    auto source = media::FrameSource::Open(clip);
    const auto t0 = Clock::now();
    const tracker::Track t = tracker::TrackClip(*source, tracker::TrackOptions{});
    const auto t1 = Clock::now();
    row.whole_fps = t.frames / Seconds(t0, t1);
    row.choice = t.choice;
    for (const tracker::TrackSample& s : t.samples) {
      const synth::FrameTruth& tr = truth[static_cast<size_t>(s.frame)];
      row.ours.Add(tr.marker_in_view, s.found, s.centre_px, {tr.u_px, tr.v_px});
    }
  }

  // Tracking alone, frames in memory, this thread only.
  {
    // The first frame carries the one-off whole-frame marker search; it is timed apart.
    tracker::MarkerTracker mt{tracker::TrackOptions{}};
    const double c0 = ThreadCpuSeconds();
    mt.Process(0, frames[0]);
    const double c1 = ThreadCpuSeconds();
    for (size_t i = 1; i < frames.size(); ++i) mt.Process(static_cast<int>(i), frames[i]);
    const double c2 = ThreadCpuSeconds();
    row.detect_ms = 1e3 * (c1 - c0);
    row.track_fps = (frames.size() - 1) / (c2 - c1);
  }

  // Threshold and centroid.
  for (size_t i = 0; i < frames.size(); ++i) {
    const cv::Point2d tr(truth[i].u_px, truth[i].v_px);
    cv::Point2d est;
    const bool ok = OtsuCentroid(frames[i], tr, diameter_px, est);
    row.otsu.Add(truth[i].marker_in_view, ok, est, tr);
  }

  // OpenCV general-purpose trackers.
  auto run_cv = [&](cv::Ptr<cv::Tracker> tracker, Accuracy& acc, double& fps_out) {
    const double side = 1.4 * diameter_px;
    const cv::Point2d t0p(truth[0].u_px, truth[0].v_px);
    cv::Rect box(static_cast<int>(std::lround(t0p.x - side / 2)), static_cast<int>(std::lround(t0p.y - side / 2)),
                 static_cast<int>(std::lround(side)), static_cast<int>(std::lround(side)));
    cv::Mat bgr;
    cv::cvtColor(frames[0], bgr, cv::COLOR_GRAY2BGR);
    tracker->init(bgr, box);
    auto centre = [](const cv::Rect& b) { return cv::Point2d(b.x + (b.width - 1) / 2.0, b.y + (b.height - 1) / 2.0); };
    const cv::Point2d offset = t0p - centre(box);
    const auto c0 = Clock::now();
    for (size_t i = 1; i < frames.size(); ++i) {
      cv::cvtColor(frames[i], bgr, cv::COLOR_GRAY2BGR);
      const bool ok = tracker->update(bgr, box);
      acc.Add(truth[i].marker_in_view, ok, centre(box) + offset, {truth[i].u_px, truth[i].v_px});
    }
    fps_out = (frames.size() - 1) / Seconds(c0, Clock::now());
  };
  run_cv(cv::TrackerCSRT::create(), row.csrt, row.csrt_fps);
  run_cv(cv::TrackerKCF::create(), row.kcf, row.kcf_fps);
  return row;
}

}  // namespace

int main(int argc, char** argv) {
  Args args;
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    auto next = [&]() -> std::string {
      if (i + 1 >= argc) {
        std::cerr << a << " needs a value\n";
        std::exit(2);
      }
      return argv[++i];
    };
    if (a == "--frames") {
      args.frames = std::stoi(next());
    } else if (a == "--noise") {
      args.noise.clear();
      for (const auto& s : Split(next())) args.noise.push_back(std::stod(s));
    } else if (a == "--kinds") {
      args.kinds = Split(next());
    } else if (a == "--quality") {
      args.quality = std::stoi(next());
    } else if (a == "--keep") {
      args.keep = next();
    } else {
      std::cerr << "usage: track_bench [--frames N] [--noise 2,4] [--kinds quadrant,dot] [--quality 90] [--keep DIR]\n";
      return 2;
    }
  }
  const fs::path dir = args.keep.empty()
                           ? fs::temp_directory_path() /
                                 ("dropfit_track_bench_" + std::to_string(Clock::now().time_since_epoch().count()))
                           : fs::path(args.keep);
  fs::create_directories(dir);
  std::vector<Row> rows;
  for (const std::string& kind : args.kinds) {
    for (double noise : args.noise) {
      std::fprintf(stderr, "rendering and tracking %s, read noise %g ...\n", kind.c_str(), noise);
      rows.push_back(RunOne(kind, noise, args, dir));
      std::fprintf(stderr, "  marker: %s\n", rows.back().choice.c_str());
    }
  }
  std::printf("\nRendered drop clips: 800x640, 2000 frames/s, exposure 0.2 ms, MJPG q%d, %d frames each.\n",
              args.quality, args.frames);
  std::printf(
      "RMS = radial RMS error against the mid-exposure truth [px]; %% = share of frames with the marker in "
      "view that were tracked.\n\n");
  std::printf(
      "| marker | noise | dropfit RMS | %% | Otsu+centroid RMS | CSRT RMS | %% | KCF RMS | %% | decode fps | "
      "decode+track fps | whole/decode time | one-core whole/decode (CPU) | decode fps (CPU) | track-only fps (CPU) | "
      "first-frame search ms | "
      "CSRT fps | KCF fps |\n");
  std::printf("|---|---|---|---|---|---|---|---|---|---|---|---|---|---|---|---|---|---|\n");
  for (const Row& r : rows) {
    std::printf(
        "| %s | %g | %.4f | %.2f | %.4f | %.3f | %.1f | %.3f | %.1f | %.0f | %.0f | %.3f | %.3f | %.0f | %.0f | %.0f | "
        "%.0f | "
        "%.0f |\n",
        r.kind.c_str(), r.noise, r.ours.Rms(), r.ours.Share(), r.otsu.Rms(), r.csrt.Rms(), r.csrt.Share(), r.kcf.Rms(),
        r.kcf.Share(), r.decode_fps, r.whole_fps, r.decode_fps / r.whole_fps,
        1.0 + r.decode_cpu_fps / r.track_fps + 1e-3 * r.detect_ms * r.decode_cpu_fps / args.frames, r.decode_cpu_fps,
        r.track_fps, r.detect_ms, r.csrt_fps, r.kcf_fps);
  }
  if (args.keep.empty()) fs::remove_all(dir);
  return 0;
}
