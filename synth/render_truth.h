#pragma once
// What one rendered clip set drew (synth/render_set.h), as plain data: the exact answer that
// known-answer tests and benchmarks compare against. `dropfit render` writes it as truth.json
// (its JSON reading and writing, and the file's field list, are cli/truth_io.h).
//
// Units are those the names carry; times are on the clip clock of the contract (frame 0 at
// t = 0); frames and pixel convention are those of synth/camera.h.

#include <opencv2/core.hpp>

#include <cstdint>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "analysis/forward_model.h"
#include "analysis/geometry.h"
#include "synth/camera.h"
#include "synth/render.h"

namespace dropfit::synth {

// One clip of the set.
struct ClipTruth {
  std::string clip;                    // file (or folder) name in the output folder
  std::string clip_id;                 // contract clip id
  double drop_height_m = 0.0;          // nominal (manifest)
  double release_drop_height_m = 0.0;  // tyre's lowest point at release, as simulated
  double release_time_s = 0.0;         // release instant on the clip clock
  double capture_fps = 0.0;
  double container_fps = 0.0;  // rate stored in the container; 0 for a folder of PNG frames
  uint64_t noise_seed = 0;
  double onset_height_m = 0.0;  // hub height at first contact (= free radius)
  double start_x_m = 0.0, start_spin_rad = 0.0, drift_mps = 0.0, spin_radps = 0.0;
  std::vector<analysis::ImpactTruth> impacts;  // of the whole clip, even when fewer frames were drawn
  std::vector<FrameTruth> frames;              // one per frame drawn
};

// One checkerboard image (synth/render_calibration.h).
struct CalibrationViewTruth {
  std::string file;  // relative to the output folder
  bool drop_plane = false;
  cv::Vec3d board_rvec_rad, board_tvec_m;     // camera_from_board (OpenCV's pose convention)
  std::vector<cv::Point2d> inner_corners_px;  // row by row
};

struct CalibrationTruth {
  std::string board;  // "9x6"
  double square_m = 0.0;
  double corner_height_m = 0.0;  // plane view's lowest inner-corner row above the floor
  std::vector<CalibrationViewTruth> views;
};

// The whole set.
struct RenderTruth {
  std::string tool_version;  // left empty by the library; the command fills it in
  uint64_t seed = 0;
  std::string specimen;
  std::string law;
  std::vector<std::pair<std::string, double>> params;  // contract names, in ParameterNames order
  double mass_kg = 0.0;
  double gravity_mps2 = 0.0;
  analysis::TreadGeometry tread;
  PinholeCamera camera;
  WheelLook wheel;
  ExposureSettings exposure;
  std::optional<CalibrationTruth> calibration;               // nothing when no calibration images were drawn
  std::vector<ClipTruth> clips;                              // in (height, repeat) order
  std::vector<std::pair<std::string, std::string>> options;  // the effective options (render_plan.h)
};

}  // namespace dropfit::synth
