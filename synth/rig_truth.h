#pragma once
// A rig measured against the renderer's camera: how far the heights a calibrated rig maps are
// from the truth (issue 14's acceptance figures; bench/rig_accuracy_bench.cpp, tests).
//
// Truth: the renderer's world frame (synth/camera.h) is the contract's plane frame with
// "y_origin": "floor" — the drop plane is z_m = 0, the floor y_m = 0, and x_m = 0 the plane
// view's leftmost inner-corner column (synth/render_calibration.h places the board so). The true
// pixel of a plane point is ImageFromDropPlane(camera, p) and the true plane point of a pixel
// DropPlaneFromImage(camera, u) (synth/camera.h). A rig's error at plane point p is what it maps
// at p's true pixel minus p: PlaneFromImage(rig, ImageFromDropPlane(camera, p)) - p. A rig whose
// origin is the board ("y_origin": "board") is compared after adding the corner row's height.

#include <opencv2/core.hpp>

#include "calib/rig.h"
#include "synth/camera.h"

namespace dropfit::synth {

// The rig's error [m] at plane point `plane_m` (above), in the floor frame. `corner_row_m` is the
// true height of the plane view's lowest inner-corner row above the floor; it is added to what a
// "board"-origin rig maps.
cv::Point2d RigErrorAt(const calib::Rig& rig, const PinholeCamera& camera, cv::Point2d plane_m, double corner_row_m);

// The figures of issue 14 for one rig. "Centre" is the true plane x_m of the image centre's
// pixel; "across the width" are `points` plane points evenly spaced along the true line between
// the points seen at the left and right image edges on the centre point's image row.
struct RigAccuracy {
  double x_centre_m = 0.0;
  double row_error_centre_m = 0.0;          // height error at the lowest corner row
  double height100_error_centre_m = 0.0;    // ... 100 mm above it
  double height300_error_centre_m = 0.0;    // ... 300 mm above it
  double floor_error_centre_m = 0.0;        // ... at the floor (y_m = 0)
  double height100_mean_abs_error_m = 0.0;  // mean |error| 100 mm above the row, across the width
  double floor_mean_abs_error_m = 0.0;      // mean |error| at the floor, across the width
  // Vertical scale error [-]: mean over the points across the width of
  // (mapped y(row + 100 mm) - mapped y(row)) / 100 mm - 1.
  double vertical_scale_error = 0.0;
  // calib::MetresPerPxAt at the image centre against the exact rig's (RigFromCamera), minus 1.
  double scale_centre_error = 0.0;
};
// Throws std::invalid_argument when points < 2.
RigAccuracy MeasureRigAccuracy(const calib::Rig& rig, const PinholeCamera& camera, double corner_row_m,
                               int points = 41);

}  // namespace dropfit::synth
