// Partly hidden marker benchmark: a card edge swept across the hub marker in eighths of its
// extent, both marker kinds, under the reference conditions (the `dropfit render` defaults:
// 800x640, 2,000 frames/s, 0.2 ms exposure, 4 sub-frames, read and shot noise, lens blur,
// vignetting, flicker, MJPG q90), tracked by the tracker as `dropfit track` runs it.
//
//   occlusion_bench [--kinds quadrant,dot] [--angles 0,45,...] [--at FRAME] [--clean-frames N]
//                   [--grey G] [--keep DIR] [--dump] [--no-judge]
//
// Per marker kind and card direction (--angles, degrees; default eight directions 45° apart),
// one clip of FRAME + 9 + 12 frames is rendered with `--occluder FRAME:FRAME+8
// --occluder-cover 0:1`: on frame FRAME + k the card covers k/8 of the marker (truth.json's
// marker_covered_fraction), then the card is gone. Per cover fraction over all directions:
//   kept      frames with a centre in the track
//   empty     frames left empty (not found, or judged untrustworthy: Track::left_empty)
//   max err   largest distance of a kept centre from the truth [px]
//   RMS err   radial RMS error of the kept centres [px]
// Acceptance (issue 16): no kept frame off by more than 0.05 px; frames with more than about an
// eighth covered left empty. Then, per kind, a whole clip without a card (`--clean-frames`
// frames, 0 = the whole default clip: three bounces) and the frames it left empty (false
// alarms; should be 0) with the reasons. --dump prints every frame; --no-judge tracks without
// the judgement against the clip (TrackOptions::judge_against_clip), for comparison. A
// benchmark, not a test: nothing is asserted.

#include <cmath>
#include <cstdio>
#include <filesystem>
#include <iostream>
#include <map>
#include <sstream>
#include <string>
#include <vector>

#include "media/frame_source.h"
#include "synth/render_plan.h"
#include "synth/render_set.h"
#include "synth/render_truth.h"
#include "tracker/track.h"

namespace {

using namespace dropfit;
namespace fs = std::filesystem;

struct Args {
  std::vector<std::string> kinds = {"quadrant", "dot"};
  std::vector<double> angles = {0, 45, 90, 135, 180, 225, 270, 315};
  int at = 30;
  int clean_frames = 0;
  double grey = 20.0;
  std::string keep;
  bool dump = false;
  bool judge = true;
};

std::vector<std::string> Split(const std::string& s) {
  std::vector<std::string> out;
  std::stringstream ss(s);
  std::string item;
  while (std::getline(ss, item, ',')) out.push_back(item);
  return out;
}

struct Cell {
  int kept = 0, empty = 0;
  double max_err = 0, sum2 = 0;
  void Add(bool found, double err) {
    if (!found) {
      ++empty;
      return;
    }
    ++kept;
    max_err = std::max(max_err, err);
    sum2 += err * err;
  }
  double Rms() const { return kept ? std::sqrt(sum2 / kept) : NAN; }
};

// Renders one clip with the reference options and the given card; returns its truth and track.
struct Outcome {
  synth::ClipTruth truth;
  tracker::Track track;
};

Outcome RenderAndTrack(const std::string& kind, const fs::path& dir, int frames, const std::string& occluder,
                       double angle, double grey, bool judge) {
  synth::RenderOptions o;
  o.out_dir = dir.string();
  o.marker = kind;
  o.calibration = false;
  o.first_frames = frames;
  o.occluder = occluder;
  o.occluder_angle_deg = angle;
  o.occluder_grey = grey;
  const synth::RenderSetPlan set = synth::PlanRenderSet(o);
  synth::RenderTruth truth = synth::RenderSet(set);
  Outcome out;
  out.truth = truth.clips.at(0);
  auto source = media::FrameSource::Open(dir / out.truth.clip);
  tracker::TrackOptions track_options;
  track_options.judge_against_clip = judge;
  out.track = tracker::TrackClip(*source, track_options);
  return out;
}

double ErrorOf(const tracker::TrackSample& s, const synth::FrameTruth& t) {
  return std::hypot(s.centre_px.x - t.u_px, s.centre_px.y - t.v_px);
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
    if (a == "--kinds") {
      args.kinds = Split(next());
    } else if (a == "--angles") {
      args.angles.clear();
      for (const auto& s : Split(next())) args.angles.push_back(std::stod(s));
    } else if (a == "--at") {
      args.at = std::stoi(next());
    } else if (a == "--clean-frames") {
      args.clean_frames = std::stoi(next());
    } else if (a == "--grey") {
      args.grey = std::stod(next());
    } else if (a == "--keep") {
      args.keep = next();
    } else if (a == "--dump") {
      args.dump = true;
    } else if (a == "--no-judge") {
      args.judge = false;
    } else {
      std::cerr << "usage: occlusion_bench [--kinds quadrant,dot] [--angles 0,45,...] [--at FRAME] "
                   "[--clean-frames N] [--grey G] [--keep DIR] [--dump] [--no-judge]\n";
      return 2;
    }
  }
  const fs::path root = args.keep.empty() ? fs::temp_directory_path() / "dropfit_occlusion_bench" : fs::path(args.keep);
  fs::create_directories(root);

  std::printf("Card edge swept across the marker in eighths (reference conditions, card grey %g), frames %d-%d.\n",
              args.grey, args.at, args.at + 8);
  for (const std::string& kind : args.kinds) {
    std::map<int, Cell> cells;  // by eighths covered
    Cell clean_near;            // frames without the card in the same clips
    int clean_dropped_near = 0;
    for (double angle : args.angles) {
      std::fprintf(stderr, "%s, card moving at %g deg ...\n", kind.c_str(), angle);
      const fs::path dir = root / (kind + "_" + std::to_string(static_cast<int>(angle)));
      const Outcome r =
          RenderAndTrack(kind, dir, args.at + 9 + 12, std::to_string(args.at) + ":" + std::to_string(args.at + 8),
                         angle, args.grey, args.judge);
      for (const tracker::TrackSample& s : r.track.samples) {
        const synth::FrameTruth& t = r.truth.frames.at(static_cast<size_t>(s.frame));
        const double err = s.found ? ErrorOf(s, t) : NAN;
        const bool carded = s.frame >= args.at && s.frame <= args.at + 8;
        if (carded) {
          cells[static_cast<int>(std::lround(8 * t.marker_covered_fraction))].Add(s.found, err);
        } else if (t.marker_in_view) {
          clean_near.Add(s.found, err);
          if (!s.found) ++clean_dropped_near;
        }
        if (args.dump) {
          std::printf("  %s %3g deg frame %3d cover %.3f found %d quality %.5f err %.4f\n", kind.c_str(), angle,
                      s.frame, t.marker_covered_fraction, s.found ? 1 : 0, s.quality, err);
        }
      }
      for (const tracker::EmptyFrame& e : r.track.left_empty) {
        if (args.dump) std::printf("  left empty: frame %d: %s\n", e.frame, e.reason.c_str());
      }
    }
    std::printf("\n%s marker, %zu directions:\n\n", kind.c_str(), args.angles.size());
    std::printf("| covered | kept | empty | max err px | RMS err px |\n|---|---|---|---|---|\n");
    for (const auto& [eighths, c] : cells) {
      std::printf("| %d/8 | %d | %d | %.4f | %.4f |\n", eighths, c.kept, c.empty, c.kept ? c.max_err : NAN, c.Rms());
    }
    std::printf("| none (same clips) | %d | %d | %.4f | %.4f |\n", clean_near.kept, clean_near.empty,
                clean_near.max_err, clean_near.Rms());
  }

  std::printf(
      "\nClips without a card (false alarms), %s:\n\n",
      args.clean_frames > 0 ? (std::to_string(args.clean_frames) + " frames each").c_str() : "whole default clips");
  std::printf("| marker | frames | marker in view | tracked | left empty | max err px | RMS err px |\n");
  std::printf("|---|---|---|---|---|---|---|\n");
  for (const std::string& kind : args.kinds) {
    std::fprintf(stderr, "%s, no card ...\n", kind.c_str());
    const Outcome r = RenderAndTrack(kind, root / (kind + "_clean"), args.clean_frames, "", 0, args.grey, args.judge);
    Cell c;
    int in_view = 0;
    for (const tracker::TrackSample& s : r.track.samples) {
      const synth::FrameTruth& t = r.truth.frames.at(static_cast<size_t>(s.frame));
      if (!t.marker_in_view) continue;
      ++in_view;
      c.Add(s.found, s.found ? ErrorOf(s, t) : NAN);
    }
    std::printf("| %s | %d | %d | %d | %zu | %.4f | %.4f |\n", kind.c_str(), r.track.frames, in_view, c.kept,
                r.track.left_empty.size(), c.max_err, c.Rms());
    for (const tracker::EmptyFrame& e : r.track.left_empty)
      std::printf("    frame %d: %s\n", e.frame, e.reason.c_str());
  }
  if (args.keep.empty()) fs::remove_all(root);
  return 0;
}
