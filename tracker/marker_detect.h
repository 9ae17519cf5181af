#pragma once
// Finding hub markers in a frame without a prior position: the automatic choice of marker kind
// in the first frames, and re-acquisition after the marker was lost.
//
// Candidates are proposed, then verified by two rotation tests about the candidate centre c,
// each a Pearson correlation over the window's integer offsets d (bilinear samples):
//   half-turn    h = corr(I(c + d), I(c - d))        (+1 for any point-symmetric marker)
//   quarter-turn q = corr(I(c + d), I(c + R90 d))    (-1 for a quadrant disc, +1 for a dot)
// A quadrant disc needs h high and q strongly negative; a dot needs both high. Nothing else
// in a drop scene is likely to pass both (common practice, no source).
//
// Proposals:
// - quadrant disc: local maxima of the saddle response -det(Hessian) = Ixy² - Ixx Iyy of the
//   frame smoothed with a Gaussian of s.d. 1.5 px (an X-corner's Hessian determinant is
//   negative, an edge's is near zero);
// - dot: extrema over space and scale of the scale-normalised Laplacian of Gaussian, σ² ∇²G,
//   which for a disc of radius r peaks at σ = r / sqrt(2) (Lindeberg 1998, "Feature detection
//   with automatic scale selection", IJCV 30(2), blob detection with the normalised Laplacian).
// Radius: for a quadrant disc, the ring radius where the mean |I(c + d) - I(c + R90 d)| falls to
// half its inner value; for a dot, the radius where the ring-mean profile crosses halfway
// between the dot's level and the background's.

#include <opencv2/core.hpp>

#include <optional>
#include <string>
#include <vector>

#include "tracker/marker_kind.h"

namespace dropfit::tracker {

struct DetectOptions {
  // Least difference between a marker's light and dark parts [grey levels]; valid [5, 255].
  double min_contrast = 30.0;
  // Range of marker radii searched [px]; valid 2 <= min < max <= 300.
  double min_radius_px = 3.0;
  double max_radius_px = 60.0;
  // Verification thresholds: half-turn correlation at least, and quarter-turn correlation at
  // most (quadrant disc) or at least (dot); valid (0, 1).
  double min_half_turn_corr = 0.8;
  double max_quadrant_quarter_turn_corr = -0.6;
  double min_dot_quarter_turn_corr = 0.8;
  // Proposals verified per kind, strongest first; valid [1, 1000].
  int max_proposals = 40;
};
std::optional<std::string> ValidateDetectOptions(const DetectOptions& options);

struct MarkerCandidate {
  MarkerKind kind = MarkerKind::kQuadrant;  // kQuadrant or kDot
  cv::Point2d centre_px;                    // refined by the symmetry fit
  double radius_px = 0.0;                   // disc or dot radius
  double contrast = 0.0;                    // [grey levels] light minus dark (absolute)
  bool bright = true;                       // dots: brighter than the background
  double half_turn_corr = 0.0;
  double quarter_turn_corr = 0.0;
  double score = 0.0;  // [0, 1]; higher is more marker-like
  // One line for the user, e.g. "quadrant disc of radius 15.1 px at (402.31, 288.70): half-turn
  // correlation 0.998, quarter-turn -0.995, contrast 158".
  std::string Describe() const;
};

// Verified candidates of `kind` (kAuto: quadrant discs and dots) whose centres lie in `region`
// (clipped to the frame), best first. `grey` is CV_8UC1. Throws std::invalid_argument on bad
// options.
std::vector<MarkerCandidate> FindMarkerCandidates(const cv::Mat& grey, const cv::Rect& region, MarkerKind kind,
                                                  const DetectOptions& options);

// The two rotation correlations (see above) over offsets inner_px <= |d| <= outer_px about
// `centre_px`. Returns false when part of the window falls outside the frame or the window is
// flat (no variance).
bool RotationCorrelations(const cv::Mat& grey, cv::Point2d centre_px, double inner_px, double outer_px,
                          double& half_turn, double& quarter_turn);

}  // namespace dropfit::tracker
