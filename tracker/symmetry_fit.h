#pragma once
// Sub-pixel centre of a point-symmetric marker: the point c about which the image is most nearly
// symmetric under a half-turn, I(c + d) = I(c - d).
//
// Why this estimator. Both hub markers are point-symmetric about the point we want:
// - the quadrant disc (alternating black and white quarters) about its saddle point, whatever
//   its rotation, and also under an affine (oblique) view;
// - the plain dot, bright or dark, about its centre.
// Blur keeps that symmetry whenever the blur kernel is itself centrally symmetric: defocus,
// the lens' point spread, pixel integration, and linear motion blur at constant speed during
// the exposure, whose kernel is a segment centred on the MID-EXPOSURE position. So the centre of
// symmetry of a blurred frame is the marker's mid-exposure position, which is what the contract's
// track.csv asks for, with no model of the blur or of the marker's edge profile. (Common practice
// in the trade of sub-pixel target location, no source; the saddle-point Taylor fit of Chen &
// Zhang, WSCG 2005, and the localized Radon transform of Duda & Frese, BMVC 2018, cited in
// docs/methods.md §9, exploit the same structure in other ways.)
//
// Uneven light. A gain G(x) = G0 (1 + g·(x - c)) and an offset B(x) = B0 + h·(x - c), both
// varying linearly across the window, make the half-turn difference linear in d:
//   I(c + d) - I(c - d) = a·d S(d) + b·d,   S(d) = (I(c + d) + I(c - d)) / 2,
// with a = 2g and b = 2(h - B0 g). The fit estimates the four numbers a, b with the centre, so
// such light does not pull the centre.
//
// Method: Gauss-Newton on the residuals r(d) = I(c+d) - I(c-d) - a·d S(d) - b·d over the integer
// offsets d with inner_radius_px <= |d| <= window_radius_px (one of each pair d, -d), sampling
// the image at c ± d with four-point Lagrange weights, which reproduce cubics: bilinear (or Keys
// cubic) weights leave a third-order term in the difference that pulls the centre periodically
// with its sub-pixel fraction, by up to ~0.01 px on sharp edges (symmetry_fit.cpp derives it).
// Jacobian w.r.t. c: ∇I(c+d) - ∇I(c-d) from central differences, sampled bilinearly.
//
// Quality: q = 1 - Σ r² / Σ((I(c+d) - m)² + (I(c-d) - m)²), m the mean sample, clamped to [0, 1].
// It is 1 for a perfectly symmetric, noise-free window and about 0 for pure noise or an
// anti-symmetric pattern; with contrast C and noise σ it is near 1 - σ²/var(window).
//
// Robust shift: how far the centre would move if pairs that disagree much more than the rest
// were discounted: the length of one Gauss-Newton step from the fitted centre with every pair
// weighted by Tukey's biweight of its residual, w = (1 - (r / (c s))²)² for |r| < c s, else 0,
// c = 4.685 (Holland & Welsch 1977, "Robust regression using iteratively reweighted
// least-squares", Commun. Stat. A6(9); the constant from memory), s = 1.4826 median |r| (at
// least 1 grey level). The fitted (unweighted) centre sets Jᵀr = 0, so this step is the first
// iteration of the reweighted fit: near 0 for a clean marker, and about the pull of the pixels
// that do not fit when part of the marker is hidden (a card edge over the rim, a glint). The
// tracker judges it against the clip's own frames (tracker/track.h); the centre reported is the
// unweighted one.
//
// Robust centre: the reweighted fit carried to convergence (Gauss-Newton steps with the same
// Tukey weights, their scale fixed from the fitted centre's residuals, resampling the window at
// each step): the centre the pixels that fit agree on. The tracker reports it for a frame whose
// robust shift stands out from the clip's (tracker/track.h).

#include <opencv2/core.hpp>

#include <optional>
#include <string>
#include <vector>

namespace dropfit::tracker {

struct SymmetryFitOptions {
  // Outer radius of the window of offsets [px]; valid (1, 200]. For a quadrant disc of radius
  // R, about 0.75 R keeps the window inside the disc; for a dot of radius R, R + 3 takes the
  // whole blurred edge and a ring of background.
  double window_radius_px = 10.0;
  // Offsets closer than this to the centre are left out [px]; valid [0, window_radius_px).
  double inner_radius_px = 0.0;
  // The fit fails (returns converged = false) when the centre moves farther than this from the
  // start [px]; valid (0, 100].
  double max_shift_px = 4.0;
  // Gauss-Newton iterations at most; valid [1, 100].
  int max_iterations = 12;
  // Converged when a step moves the centre by less than this [px]; valid (0, 0.1].
  double tolerance_px = 1e-4;
  // Gaussian smoothing of the window before the fit [px s.d.]; valid [0, 3]. A centrally
  // symmetric filter keeps the centre of symmetry, and a little smoothing makes the interpolated
  // samples of sharp edges more accurate (less "pixel locking"). 0 = none.
  double presmooth_sigma_px = 0.7;
  // Estimate the linear light terms a, b (see above); false fits the centre alone.
  bool fit_light_gradient = true;
  // Also carry the reweighted fit to convergence (SymmetryFitResult::robust_centre_px, "Robust
  // centre" above): a few more Gauss-Newton steps per fit, so only where it is used (dots).
  bool robust_centre = false;
};
// A message naming the first field out of range, or nothing.
std::optional<std::string> ValidateSymmetryFitOptions(const SymmetryFitOptions& options);

struct SymmetryFitResult {
  cv::Point2d centre_px;          // OpenCV pixel convention (centre of the top-left pixel is (0, 0))
  double quality = 0.0;           // [0, 1], see above
  double residual_rms = 0.0;      // RMS of r(d) [grey levels]
  double window_sd = 0.0;         // s.d. of the window's samples (unsmoothed) [grey levels]: its contrast
  double robust_shift_px = -1.0;  // see "Robust shift" above; -1 when not converged
  // See "Robust centre" above; set when converged and options.robust_centre.
  std::optional<cv::Point2d> robust_centre_px;
  int iterations = 0;
  bool converged = false;  // false: did not settle, moved too far, or left the image
  bool inside = true;      // false: part of the window fell outside the image
};

// Holds the offset list for one set of options; cheap to call many times, no shared state
// (one fitter per thread).
class SymmetryFitter {
 public:
  // Throws std::invalid_argument with ValidateSymmetryFitOptions' message.
  explicit SymmetryFitter(const SymmetryFitOptions& options);

  // `grey` is CV_8UC1; `start_px` the initial centre (within about a pixel or two of the truth).
  SymmetryFitResult Fit(const cv::Mat& grey, cv::Point2d start_px) const;

  const SymmetryFitOptions& options() const { return options_; }

 private:
  SymmetryFitOptions options_;
  std::vector<cv::Point> offsets_;  // one of each pair (d, -d)
};

}  // namespace dropfit::tracker
