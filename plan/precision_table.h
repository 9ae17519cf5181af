#pragma once
// The tracker's centre precision, measured (bench/plan_precision_bench.cpp regenerates the
// rows; docs/methods.md §22 says how): the robust s.d. (1.4826 x the median absolute deviation)
// of the vertical centre error of the real tracker (tracker/track.h) on frames of the clip
// renderer (synth/render.h), the marker moving straight down at constant speed, by marker kind,
// marker diameter in pixels, motion blur during the exposure in pixels and read noise in grey
// levels, at the renderer's marker contrast (kReferenceContrastGrey), shot noise 16 e-/grey and
// lens blur 0.5 px; and the fraction of frames the tracker found.
//
// Between the measured cells the precision is interpolated linearly in the logarithm of the
// diameter and linearly in blur and noise (cells where the tracker found nothing are left out of
// the interpolation); outside them it is held at the nearest edge, except the noise, beyond whose
// last cell the s.d. grows in proportion (a centroid's error is linear in the noise; common
// practice, no source). Another contrast C enters as the noise scaled by
// kReferenceContrastGrey / C (the same proportionality).

#include <vector>

#include "synth/render.h"

namespace dropfit::plan {

// White minus black quarter of the renderer's marker [grey levels] (synth/render.cpp).
inline constexpr double kReferenceContrastGrey = 232.0 - 24.0;

struct PrecisionCell {
  synth::MarkerShape marker = synth::MarkerShape::kQuadrant;
  double diameter_px = 0.0;
  double blur_px = 0.0;
  double read_noise_grey = 0.0;
  double centre_sd_px = 0.0;  // NaN where the tracker found fewer than 3 frames
  double found_fraction = 0.0;
};

// The measured cells (plan/precision_table.cpp).
const std::vector<PrecisionCell>& PrecisionTable();

struct Precision {
  double centre_sd_px = 0.0;    // NaN when no cell near it was tracked
  double found_fraction = 0.0;  // [0, 1]
};
// The precision at a marker diameter [px] > 0, blur [px] >= 0, read noise [grey levels] >= 0
// and marker contrast [grey levels] > 0, interpolated as stated above.
Precision LookUpPrecision(synth::MarkerShape marker, double diameter_px, double blur_px, double read_noise_grey,
                          double contrast_grey = kReferenceContrastGrey);

}  // namespace dropfit::plan
