#include "synth/rig_truth.h"

#include <cmath>
#include <stdexcept>
#include <string>

#include "calib/rig_uncertainty.h"

namespace dropfit::synth {

namespace {

constexpr double kAboveRowM = 0.1;  // issue 14: heights 100 mm above the lowest corner row
constexpr double kFarAboveRowM = 0.3;

}  // namespace

cv::Point2d RigErrorAt(const calib::Rig& rig, const PinholeCamera& camera, cv::Point2d plane_m, double corner_row_m) {
  cv::Point2d mapped = calib::PlaneFromImage(rig, ImageFromDropPlane(camera, plane_m));
  if (rig.y_origin == calib::YOrigin::kBoard) mapped.y += corner_row_m;
  return mapped - plane_m;
}

RigAccuracy MeasureRigAccuracy(const calib::Rig& rig, const PinholeCamera& camera, double corner_row_m, int points) {
  if (points < 2) throw std::invalid_argument("MeasureRigAccuracy: points = " + std::to_string(points) + " (>= 2)");
  const cv::Size size = camera.intrinsics.image_size;
  const cv::Point2d centre(0.5 * (size.width - 1), 0.5 * (size.height - 1));
  RigAccuracy out;
  out.x_centre_m = DropPlaneFromImage(camera, centre).x;
  const auto error_y = [&](double x_m, double y_m) { return RigErrorAt(rig, camera, {x_m, y_m}, corner_row_m).y; };
  const double row = corner_row_m;
  out.row_error_centre_m = error_y(out.x_centre_m, row);
  out.height100_error_centre_m = error_y(out.x_centre_m, row + kAboveRowM);
  out.height300_error_centre_m = error_y(out.x_centre_m, row + kFarAboveRowM);
  out.floor_error_centre_m = error_y(out.x_centre_m, 0.0);
  // The true line y = const between the image's left and right edges.
  const auto across = [&](double y_m, int i) {
    const double v = ImageFromDropPlane(camera, {out.x_centre_m, y_m}).y;
    const double left = DropPlaneFromImage(camera, {0.0, v}).x,
                 right = DropPlaneFromImage(camera, {size.width - 1.0, v}).x;
    return left + (right - left) * i / (points - 1.0);
  };
  for (int i = 0; i < points; ++i) {
    const double x100 = across(row + kAboveRowM, i);
    const double e100 = error_y(x100, row + kAboveRowM);
    out.height100_mean_abs_error_m += std::abs(e100) / points;
    out.floor_mean_abs_error_m += std::abs(error_y(across(0.0, i), 0.0)) / points;
    out.vertical_scale_error += ((e100 - error_y(x100, row)) / kAboveRowM) / points;
  }
  const calib::Rig exact = RigFromCamera(camera, std::nullopt, std::nullopt);
  out.scale_centre_error = calib::MetresPerPxAt(rig, centre) / calib::MetresPerPxAt(exact, centre) - 1.0;
  return out;
}

}  // namespace dropfit::synth
