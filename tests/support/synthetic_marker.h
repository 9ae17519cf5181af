#pragma once
// Synthetic frames of one hub marker at a known sub-pixel centre, for the tracker's tests and
// benchmark. (Whole drop clips with physics come from `dropfit render`; this draws one frame.)
//
// Image formation, in order:
// 1. the ideal marker (quadrant disc or dot, hard edges) over a uniform background, averaged
//    over `supersample`² points per pixel (pixel integration) and over `motion_steps` positions
//    spread evenly along the motion during the exposure, centred on `centre_px` (so the given
//    centre is the mid-exposure position, as in the contract's track.csv);
// 2. optical blur: a Gaussian of s.d. `optical_blur_px` (skipped when 0);
// 3. uneven light: the value is multiplied by 1 + light_gradient_per_px · (x - centre);
// 4. noise: Gaussian with variance read_noise² + shot_noise_per_level · value [grey levels²];
// 5. rounding to 8 bits, then optionally JPEG (cv::imencode at `jpeg_quality`, 0 = none).
// Pixel convention: OpenCV's (the centre of the top-left pixel is (0, 0)).

#include <opencv2/core.hpp>

#include "tracker/marker_kind.h"

namespace dropfit::test {

struct SyntheticMarkerOptions {
  tracker::MarkerKind kind = tracker::MarkerKind::kQuadrant;  // kQuadrant or kDot
  double radius_px = 15.0;                                    // disc or dot radius [px]
  double rotation_rad = 0.3;                                  // quadrant disc rotation [rad]
  double dark = 40.0;                                         // [grey levels] black quarters; a dark dot
  double bright = 200.0;                                      // [grey levels] white quarters; a bright dot
  double background = 120.0;                                  // [grey levels] around the marker
  bool bright_dot = true;                                     // dot: bright on the background (else dark)
  cv::Point2d motion_px{0.0, 0.0};                            // displacement during the exposure [px]
  int motion_steps = 9;                                       // positions averaged along the motion
  int supersample = 6;                                        // points per pixel side
  double optical_blur_px = 0.5;                               // Gaussian s.d. [px]
  double light_gradient_per_px = 0.0;                         // relative gain change per px along x
  double read_noise = 2.0;                                    // [grey levels] s.d.
  double shot_noise_per_level = 0.0;                          // [grey levels² per grey level]
  int jpeg_quality = 0;                                       // 0: no JPEG; else 1..100
};

// Draws one frame of `size` with the marker's mid-exposure centre at `centre_px`; `rng` seeds
// the noise (the caller owns and seeds it).
cv::Mat RenderSyntheticMarker(cv::Size size, cv::Point2d centre_px, const SyntheticMarkerOptions& options,
                              cv::RNG& rng);

}  // namespace dropfit::test
