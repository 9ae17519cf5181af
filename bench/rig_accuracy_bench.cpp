// Rig accuracy benchmark (issue 14): rigs calibrated from the renderer's checkerboard images,
// measured against the renderer's camera (synth/rig_truth.h), next to the standard
// uncertainties the calibration reports (calib/rig_uncertainty.h).
//
//   rig_accuracy_bench [--seeds N] [--rigs reference,fine]
//
// Rigs: "reference" = the `dropfit render` defaults (800x640, focal 1200 px at 1.2 m: ~1.0 mm/px,
// 9x6 board of 50 mm squares, 10 lens views); "fine" = the same with 25 mm squares at 1.44 m
// (~1.2 mm/px). The corner height is taken as exact (`--corner-height-sd 0`), so the floor's sd
// is the mapping's alone. Per rig type:
//   (a) the rig of the default calibration seed (CalibrationNoiseSeed of --seed 1): mean |error|
//       of the heights 100 mm above the lowest corner row at 41 points across the width, the
//       vertical scale error, the floor error, next to the reported sds;
//   (b) over calibration noise seeds 1..N (default 20): per seed one line, then the share of
//       |error| <= 2 sd pooled over the height 100 mm above the row and the floor (at the image's
//       centre column, where the sds are reported), and the RMS of error / sd.
// Acceptance (issue 14): mean |error| at 100 mm <= 0.02 mm, vertical scale <= 0.02 %, floor
// <= 0.03 mm; coverage >= 90 %.
#include <cmath>
#include <cstdio>
#include <cstring>
#include <string>
#include <vector>

#include "calib/calibrate.h"
#include "calib/rig_uncertainty.h"
#include "synth/render_calibration.h"
#include "synth/render_plan.h"
#include "synth/render_set.h"
#include "synth/rig_truth.h"

namespace {

using namespace dropfit;

struct RigCase {
  std::string name;
  synth::RenderOptions options;
};

struct Outcome {
  bool ok = false;
  std::string problem;
  calib::Rig rig;
  synth::RigAccuracy accuracy;
};

Outcome CalibrateRendered(const synth::RenderSetPlan& set, uint64_t seed) {
  const std::vector<synth::CalibrationImage> images = synth::RenderCalibrationImages(
      *set.renderer, set.plan.board, set.options.lens_views, set.plan.exposure, set.plan.add_noise, seed);
  std::vector<calib::CalibrationImage> views;
  calib::CalibrationImage plane;
  for (const synth::CalibrationImage& image : images) {
    calib::CalibrationImage c{image.name, image.image};
    if (image.drop_plane) plane = c;
    views.push_back(c);
  }
  calib::CalibrateOptions co;
  co.board = calib::BoardSpec{set.plan.board.inner_cols, set.plan.board.inner_rows, set.plan.board.square_m};
  const double corner_row_m = synth::PlaneBoardCornerHeight(set.plan.board);
  co.corner_height_m = corner_row_m;
  co.corner_height_sd_m = 0.0;  // the renderer's corner height is exact
  const calib::CalibrationOutcome calibrated = calib::Calibrate(views, plane, co);
  Outcome out;
  if (!calibrated.rig) {
    out.problem = calibrated.refusal;
    return out;
  }
  out.ok = true;
  out.rig = *calibrated.rig;
  out.accuracy = synth::MeasureRigAccuracy(out.rig, set.camera, corner_row_m);
  return out;
}

void PrintRig(const Outcome& o) {
  const calib::RigUncertainty& u = *o.rig.uncertainty;
  const synth::RigAccuracy& a = o.accuracy;
  std::printf("    RMS reprojection %.4f px, plane residual %.4f px; corner sd: plane %.4f px, lens %.4f px\n",
              o.rig.quality.rms_reprojection_px, o.rig.quality.plane_rms_px, u.plane_corner_sd_px, u.lens_corner_sd_px);
  std::printf(
      "    height 100 mm above the row: mean |error| %.4f mm over 41 points (limit 0.02); at the centre %+.4f mm, sd "
      "%.4f mm\n",
      1e3 * a.height100_mean_abs_error_m, 1e3 * a.height100_error_centre_m, 1e3 * u.height_sd_100mm_m);
  std::printf("    lowest corner row at the centre %+.4f mm, sd %.4f mm; 300 mm above %+.4f mm, sd %.4f mm\n",
              1e3 * a.row_error_centre_m, 1e3 * u.height_sd_at_corner_row_m, 1e3 * a.height300_error_centre_m,
              1e3 * u.height_sd_300mm_m);
  std::printf("    vertical scale error %+.4f %% (limit 0.02); scale at the centre %+.4f %%, sd %.4f %%\n",
              100 * a.vertical_scale_error, 100 * a.scale_centre_error, 100 * u.scale_rel_sd_centre);
  std::printf(
      "    floor (corner height exact): at the centre %+.4f mm, sd %.4f mm; mean |error| across %.4f mm (limit 0.03)\n",
      1e3 * a.floor_error_centre_m, 1e3 * u.floor_sd_m.value_or(NAN), 1e3 * a.floor_mean_abs_error_m);
}

void RunCase(const RigCase& c, int seeds) {
  const synth::RenderSetPlan set = synth::PlanRenderSet(c.options);
  std::printf("== %s: %dx%d, %.3f mm/px at the centre, board %s of %.0f mm, %d lens views\n", c.name.c_str(),
              set.camera.intrinsics.image_size.width, set.camera.intrinsics.image_size.height,
              1e3 * synth::MetresPerPixelAtCentre(set.camera), c.options.board.c_str(), 1e3 * c.options.square_m,
              c.options.lens_views);
  const uint64_t default_seed = synth::CalibrationNoiseSeed(c.options);
  std::printf("  (a) default calibration seed %llu\n", static_cast<unsigned long long>(default_seed));
  const Outcome first = CalibrateRendered(set, default_seed);
  if (first.ok) {
    PrintRig(first);
  } else {
    std::printf("    refused: %s\n", first.problem.c_str());
  }
  std::printf("  (b) calibration seeds 1..%d: errors and sds [mm] at the centre column\n", seeds);
  std::printf("    seed  h100_err  h100_sd  floor_err floor_sd  mean|h100| vscale%%   scale%%  scale_sd%%\n");
  int inside = 0, pooled = 0, scale_inside = 0, rigs = 0;
  double z2 = 0, mean_abs_h100 = 0, mean_abs_vscale = 0, mean_abs_floor = 0;
  for (int s = 1; s <= seeds; ++s) {
    const Outcome o = CalibrateRendered(set, static_cast<uint64_t>(s));
    if (!o.ok) {
      std::printf("    %4d  refused: %s\n", s, o.problem.c_str());
      continue;
    }
    const calib::RigUncertainty& u = *o.rig.uncertainty;
    const synth::RigAccuracy& a = o.accuracy;
    std::printf("    %4d  %+8.4f  %7.4f  %+8.4f  %7.4f   %8.4f  %+7.4f  %+7.4f  %7.4f\n", s,
                1e3 * a.height100_error_centre_m, 1e3 * u.height_sd_100mm_m, 1e3 * a.floor_error_centre_m,
                1e3 * *u.floor_sd_m, 1e3 * a.height100_mean_abs_error_m, 100 * a.vertical_scale_error,
                100 * a.scale_centre_error, 100 * u.scale_rel_sd_centre);
    for (auto [err, sd] : {std::pair{a.height100_error_centre_m, u.height_sd_100mm_m},
                           std::pair{a.floor_error_centre_m, *u.floor_sd_m}}) {
      ++pooled;
      inside += std::abs(err) <= 2 * sd ? 1 : 0;
      z2 += (err / sd) * (err / sd);
    }
    scale_inside += std::abs(a.scale_centre_error) <= 2 * u.scale_rel_sd_centre ? 1 : 0;
    ++rigs;
    mean_abs_h100 += a.height100_mean_abs_error_m;
    mean_abs_vscale += std::abs(a.vertical_scale_error);
    mean_abs_floor += std::abs(a.floor_error_centre_m);
  }
  if (rigs == 0) return;
  std::printf("  over %d rigs: mean of mean|h100| %.4f mm, mean |vertical scale| %.4f %%, mean |floor| %.4f mm\n", rigs,
              1e3 * mean_abs_h100 / rigs, 100 * mean_abs_vscale / rigs, 1e3 * mean_abs_floor / rigs);
  std::printf(
      "  coverage |error| <= 2 sd, pooled height@100mm + floor: %d of %d = %.0f %% (target >= 90 %%); "
      "RMS error/sd %.2f; scale at the centre %d of %d\n",
      inside, pooled, 100.0 * inside / pooled, std::sqrt(z2 / pooled), scale_inside, rigs);
}

}  // namespace

int main(int argc, char** argv) {
  int seeds = 20;
  std::string which = "reference,fine";
  for (int i = 1; i < argc; ++i) {
    if (!std::strcmp(argv[i], "--seeds") && i + 1 < argc) {
      seeds = std::atoi(argv[++i]);
    } else if (!std::strcmp(argv[i], "--rigs") && i + 1 < argc) {
      which = argv[++i];
    } else {
      std::fprintf(stderr, "usage: rig_accuracy_bench [--seeds N] [--rigs reference,fine]\n");
      return 2;
    }
  }
  std::vector<RigCase> cases;
  synth::RenderOptions reference;
  reference.out_dir = "unused";  // nothing is written: only the calibration images are drawn, in memory
  if (which.find("reference") != std::string::npos) cases.push_back({"reference (dropfit render defaults)", reference});
  if (which.find("fine") != std::string::npos) {
    synth::RenderOptions fine = reference;
    fine.square_m = 0.025;
    fine.camera_distance_m = 1.44;
    cases.push_back({"fine (25 mm squares, ~1.2 mm/px)", fine});
  }
  for (const RigCase& c : cases) RunCase(c, seeds);
  return 0;
}
