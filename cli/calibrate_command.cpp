#include "cli/calibrate_command.h"

#include <iomanip>
#include <iostream>
#include <sstream>
#include <stdexcept>

#include "calib/calibrate.h"
#include "calib/calibration_input.h"
#include "cli/exit_status.h"
#include "cli/rig_io.h"

namespace dropfit::cli {

namespace {

std::string Fixed(double v, int decimals) {
  std::ostringstream s;
  s << std::fixed << std::setprecision(decimals) << v;
  return s.str();
}

void PrintSummary(const calib::Rig& rig, const std::string& path, std::ostream& out) {
  const calib::RigQuality& q = rig.quality;
  out << "rig written: " << path << "\n";
  out << "  image " << rig.image_size.width << "x" << rig.image_size.height << " px, board "
      << calib::BoardSizeToString(rig.board) << " inner corners of " << Fixed(rig.board.square_m * 1e3, 1) << " mm\n";
  if (rig.lens) {
    const cv::Matx33d& k = rig.lens->camera_matrix;
    out << "  lens: fx " << Fixed(k(0, 0), 1) << " px, fy " << Fixed(k(1, 1), 1) << " px, centre (" << Fixed(k(0, 2), 1)
        << ", " << Fixed(k(1, 2), 1) << ") px, terms " << q.distortion_terms << "\n";
    out << "  RMS reprojection error " << Fixed(q.rms_reprojection_px, 3) << " px over " << q.view_names.size()
        << " views (worst view ";
    size_t worst = 0;
    for (size_t i = 1; i < q.view_rms_px.size(); ++i) {
      if (q.view_rms_px[i] > q.view_rms_px[worst]) worst = i;
    }
    if (!q.view_rms_px.empty()) out << q.view_names[worst] << ", " << Fixed(q.view_rms_px[worst], 3) << " px)\n";
    out << "  views' tilt spread " << Fixed(q.tilt_spread_deg, 0) << " deg, frame covered "
        << Fixed(100 * q.views_coverage_fraction, 0) << " %\n";
  } else {
    out << "  lens: none (plane mapping only)\n";
  }
  for (const std::string& d : q.dropped_views) out << "  left out: " << d << "\n";
  out << "  plane view " << rig.plane_view << ": mapping residual " << Fixed(q.plane_rms_px, 3) << " px, board covers "
      << Fixed(100 * q.board_coverage_fraction, 1) << " % of the frame\n";
  out << "  square size measured back: mean error " << Fixed(q.square_error_mean_mm, 3) << " mm, worst "
      << Fixed(q.square_error_max_mm, 3) << " mm (of " << Fixed(rig.board.square_m * 1e3, 1) << " mm)\n";
  out << "  scale at the image centre " << Fixed(q.metres_per_px_centre * 1e3, 4) << " mm/px\n";
  out << "  up: image " << calib::ToString(rig.up) << "; y_m = 0 at the "
      << (rig.y_origin == calib::YOrigin::kFloor
              ? "floor (lowest corner row at " + Fixed(*rig.corner_height_m, 4) + " m)"
              : std::string("plane view's lowest inner-corner row"))
      << "\n";
  if (rig.uncertainty) {
    const calib::RigUncertainty& u = *rig.uncertainty;
    const auto mm = [](double m) { return Fixed(m * 1e3, 4); };
    out << "  uncertainty (1 sd; corner noise " << Fixed(u.plane_corner_sd_px, 3) << " px in the plane view";
    if (rig.lens) out << ", " << Fixed(u.lens_corner_sd_px, 3) << " px in the lens views";
    out << "):\n    heights at the image's centre column: " << mm(u.height_sd_at_corner_row_m)
        << " mm at the lowest corner row, " << mm(u.height_sd_100mm_m) << " mm 100 mm above it, "
        << mm(u.height_sd_300mm_m) << " mm 300 mm above it\n    ";
    if (u.floor_sd_m) {
      out << "floor " << mm(*u.floor_sd_m) << " mm (with the corner height's " << mm(u.corner_height_sd_m) << " mm), ";
    }
    out << "scale at the image centre " << Fixed(100 * u.scale_rel_sd_centre, 4) << " %\n";
  }
}

// A number as the user would type it ("35", "0.035").
std::string Num(double v) {
  std::ostringstream s;
  s << v;
  return s.str();
}

}  // namespace

int RunCalibrate(const CalibrateCommandOptions& options, std::ostream& out, std::ostream& err) {
  const auto fail = [&err](const std::string& msg) {
    err << "dropfit calibrate: " << msg << "; nothing was written\n";
    return kExitBadUsage;
  };
  // Required, no silent default: a wrong board size or square size makes a rig that looks fine.
  if (options.board.empty()) {
    return fail(
        "--board is required: give the board's inner corners, columns x rows (a board of 10 x 7 squares has 9x6 "
        "inner corners)");
  }
  if (!options.square_m) {
    return fail("--square is required: give the side of one square in metres (e.g. --square 0.025 for 25 mm)");
  }
  if (!(*options.square_m >= calib::kMinSquareM && *options.square_m <= calib::kMaxSquareM)) {
    return fail("--square " + Num(*options.square_m) + " is outside the plausible " + Num(calib::kMinSquareM) + "-" +
                Num(calib::kMaxSquareM) + " m; " + calib::kRigMillimetresHint + " Give it in metres (e.g. --square " +
                Num(*options.square_m / 1000) + ")");
  }
  if (options.corner_height_m && *options.corner_height_m > calib::kMaxCornerHeightM) {
    return fail("--corner-height " + Num(*options.corner_height_m) + " is above the plausible " +
                Num(calib::kMaxCornerHeightM) + " m; " + calib::kRigMillimetresHint +
                " Give it in metres (e.g. --corner-height " + Num(*options.corner_height_m / 1000) + ")");
  }
  calib::CalibrateOptions opts;
  try {
    opts.board = calib::BoardSizeFromString(options.board, *options.square_m);
    opts.up = calib::UpSideFromString(options.up);
  } catch (const std::invalid_argument& e) {
    return fail(e.what());
  }
  opts.corner_height_m = options.corner_height_m;
  opts.corner_height_sd_m = options.corner_height_sd_m;
  opts.capture_fps = options.fps;
  opts.force = options.force;
  if (const auto problem = calib::ValidateCalibrateOptions(opts)) return fail(*problem);
  if (options.out_path.empty()) return fail("no output file given: pass -o rig.json");
  if (options.inputs.empty()) return fail("no input given: pass images, folders of images or a video of the board");

  calib::CalibrationInputs inputs;
  try {
    inputs = calib::LoadCalibrationInputs(options.inputs, options.plane_image, opts);
  } catch (const std::exception& e) {
    return fail(e.what());
  }
  for (const std::string& note : inputs.notes) out << note << "\n";

  calib::CalibrationOutcome outcome;
  try {
    outcome = calib::Calibrate(inputs.views, inputs.plane, opts);
  } catch (const std::exception& e) {
    return fail(e.what());
  }
  for (const std::string& w : outcome.warnings) err << "dropfit calibrate: warning: " << w << "\n";
  if (!outcome.rig) return fail(outcome.refusal);

  calib::Rig rig = std::move(*outcome.rig);
  rig.input_hashes = inputs.hashes;
  std::string input_list;
  for (size_t i = 0; i < options.inputs.size(); ++i) input_list += (i ? " " : "") + options.inputs[i];
  rig.settings.insert(rig.settings.begin(),
                      {{"inputs", input_list}, {"plane", options.plane_image}, {"output", options.out_path}});
  try {
    WriteRigFile(options.out_path, rig);
  } catch (const std::exception& e) {
    return fail(e.what());
  }
  PrintSummary(rig, options.out_path, out);
  return kExitDone;
}

int RunCalibrate(const CalibrateCommandOptions& options) { return RunCalibrate(options, std::cout, std::cerr); }

}  // namespace dropfit::cli
