#pragma once
// The clip renderer: draws a wheel (tyre, rim, hub marker) moving in the drop plane in front
// of a textured wall and floor, as the camera of synth/camera.h sees it, and exposes it like
// a high-speed camera: motion blur, vignetting, lighting flicker, shot and read noise, 8 bits.
// It animates a simulated drop (analysis/forward_model.h) and reports, per frame, where the
// marker centre was drawn: known-answer clips for the tracker and the analysis.
//
// Frames and conventions: those of synth/camera.h (world x_m right, y_m up, z_m towards the
// camera; drop plane z_m = 0, floor y_m = 0; OpenCV pixel convention).
//
// Radiance unit: the grey level a pixel at the image centre would record, noise-free, with the
// lighting at its mean (no vignetting, no flicker). Values stay well inside 0..255.
//
// Geometry drawn (all in the drop plane, side view): the tyre is a disc of the free radius,
// cut flat where it would cross the floor (y_m < 0: the flattened contact patch); the rim a
// disc of rim_radius_m with five round holes turning with the spin and a darker lip; the hub a
// black cap carrying the marker:
//   quadrant  a disc of marker_diameter_m split into four quarters, alternately white and
//             black, turning with the spin (the black quarters merge with the black cap);
//             its centre is the saddle point where the quarter edges cross;
//   dot       a white disc of marker_diameter_m on the black cap.
// The marker centre is the hub centre, in the drop plane, so its image is exactly
// ImageFromDropPlane(camera, hub) (camera.h). With WheelLook::marker_offset_m = d the whole wheel
// is drawn in the parallel plane z_m = d instead (hub (x_m, y_m) there, heights still above the
// floor y_m = 0), and the marker's image is ProjectWorldPoint(camera, (x_m, y_m, d)).
//
// Anti-aliasing (why the drawn centre is exact): every edge is drawn with a coverage ramp that
// is odd-symmetric about the true edge: a sample at signed distance s (metres) from an edge
// takes the fraction clamp(1/2 + s / w, 0, 1) of the inner colour, w being the sample's
// footprint; the quadrant's white fraction is (1 + S1 S2) / 2 with S = clamp(2 s / w, -1, 1)
// for the two quarter edges, point-symmetric about the centre. Pixels within a footprint of an
// edge are supersampled on a K x K grid (K = 4, and 8 near the marker) mapped through the local
// Jacobian of the pixel-to-plane mapping, with w = pixel size / K. So no edge is displaced by
// the drawing: the marker's drawn centre is its geometric centre to far better than 0.01 px
// (tests/synth/render_test.cpp measures it by intensity moments).
//
// Exposure model per frame (common practice for sensor simulation, no source):
//   mu = (radiance * PSF) x vignetting(u, v) x flicker(t)   [grey levels], PSF a Gaussian
//        (applied by RenderRadiance)
//   vignetting = 1 - vignetting_fraction (r / r_corner)^2, r from the principal point
//   flicker = 1 + flicker_fraction sin(2 pi flicker_hz t + phase)   (mains lighting)
//   value = round(mu + n sqrt(mu / electrons_per_grey + read_noise_grey^2)), n ~ N(0, 1),
//           clamped to 0..255 (shot noise as its Gaussian limit; mu in electrons is
//           mu x electrons_per_grey, its Poisson s.d. sqrt(mu x electrons_per_grey)).
// Motion blur: the frame's radiance is the mean of `subframes` renderings at the times
// t_mid + ((j + 1/2)/subframes - 1/2) x exposure_s, j = 0..subframes-1, centred on the frame's
// mid-exposure time t_mid; the truth of a frame is the hub position at t_mid.

#include <opencv2/core.hpp>

#include <cstdint>
#include <map>
#include <mutex>
#include <optional>
#include <random>
#include <string>
#include <vector>

#include "analysis/forward_model.h"
#include "media/video_out.h"
#include "synth/camera.h"

namespace dropfit::synth {

enum class MarkerShape { kQuadrant, kDot };
// "quadrant", "dot".
std::string ToString(MarkerShape shape);
// Throws std::invalid_argument naming the unknown string and listing the valid ones.
MarkerShape MarkerShapeFromString(const std::string& text);

// What the wheel looks like (drop-plane metres).
struct WheelLook {
  double free_radius_m = 0.2;  // tyre outer radius (hub centre to tread); [0.02, 1]
  double rim_radius_m = 0.11;  // rim outer radius; (cap radius / 0.45, free_radius_m)
  MarkerShape marker = MarkerShape::kQuadrant;
  double marker_diameter_m = 0.030;  // quadrant disc or dot diameter; [0.004, 0.2]
  // The plane the wheel is drawn in, z_m = marker_offset_m: its hub face, which carries the
  // marker, lies this far in front of (> 0, toward the camera) or behind the drop plane [m];
  // [-0.5, 0.5]. 0: the wheel in the drop plane. The tyre is drawn in the same plane (only the
  // marker is measured).
  double marker_offset_m = 0.0;
};
// Radius of the black hub cap around the marker [m]: 1.6 x the marker radius for a quadrant,
// 1.8 x for a dot.
double CapRadius(const WheelLook& look);
// A message naming the first bad field and its valid range, or nothing.
std::optional<std::string> ValidateWheelLook(const WheelLook& look);

// The static scene around the drop plane.
struct SceneLook {
  double wall_distance_m = 0.4;  // textured wall behind the drop plane (z_m = -this); [0.05, 20]
  double floor_front_m = 0.3;    // the floor reaches this far towards the camera; [0, 20]
  uint64_t texture_seed = 1;     // wall and floor texture
};

// Sensor and lighting settings of one clip.
struct ExposureSettings {
  double exposure_s = 2e-4;          // exposure time; (0, 1/capture_fps]
  int subframes = 4;                 // renderings averaged per frame; 1..64 (1 = no motion blur)
  double read_noise_grey = 2.0;      // read-noise s.d. [grey levels]; [0, 50]
  double electrons_per_grey = 16.0;  // sensor gain for shot noise [e-/grey level]; 0 = no shot
                                     // noise, else [0.1, 1e6]
  double vignetting_fraction = 0.2;  // brightness lost at the image corner; [0, 0.9]
  double flicker_fraction = 0.02;    // lighting flicker amplitude; [0, 0.5]
  double flicker_hz = 100.0;         // flicker frequency (twice the mains); (0, 1e5]
  double flicker_phase_rad = 0.0;    // flicker phase at t = 0
  double psf_sigma_px = 0.5;         // lens blur: s.d. of a Gaussian point-spread function [px];
                                     // [0, 5], 0 = none. Symmetric, so it moves no centre.
};
// `e` with every imperfection switched off: one sub-frame (no motion blur), no read or shot noise,
// no vignetting, flicker or lens blur; the exposure time is kept. The "clean" variant.
ExposureSettings WithoutImperfections(ExposureSettings e);
// `capture_fps` bounds the exposure time. A message naming the bad field, or nothing.
std::optional<std::string> ValidateExposure(const ExposureSettings& exposure, double capture_fps);

// Where the wheel is: hub centre in the drop plane and rotation (counter-clockwise positive
// as seen by the camera, i.e. from +z_m).
struct WheelPose {
  double x_m = 0.0;
  double y_m = 0.0;
  double spin_rad = 0.0;
};

class SceneRenderer {
 public:
  // Precomputes the pixel-to-plane map and the static scene. Throws std::invalid_argument
  // with ValidateWheelLook's message.
  SceneRenderer(const PinholeCamera& camera, const WheelLook& wheel, const SceneLook& scene);

  const PinholeCamera& camera() const { return camera_; }
  const WheelLook& wheel() const { return wheel_; }
  cv::Size image_size() const { return camera_.intrinsics.image_size; }

  // Radiance of the scene without the wheel (CV_32F).
  const cv::Mat1f& static_radiance() const { return static_radiance_; }
  // Wheel-plane point (x_m, y_m) seen at the centre of each pixel (the plane z_m =
  // wheel().marker_offset_m; the drop plane when it is 0).
  cv::Point2d PlaneAtPixel(int u, int v) const;
  // Image of the wheel-plane point (x_m, y_m, wheel().marker_offset_m).
  cv::Point2d ImageFromWheelPlane(cv::Point2d p_m) const;

  // Radiance with the wheel at the mean of the given sub-frame poses (motion blur), seen
  // through a Gaussian lens blur of s.d. psf_sigma_px (0 = none). Thread-safe.
  cv::Mat1f RenderRadiance(const std::vector<WheelPose>& subframe_poses, double psf_sigma_px = 0.0) const;

  // Exposes a radiance image (already lens-blurred) at mid-exposure time t_s: vignetting,
  // flicker and, when `rng` is given, shot and read noise; rounds to 8 bits. The normal
  // deviates come from StandardNormalTable indexed by 16 bits of the generator's output.
  cv::Mat1b Expose(const cv::Mat1f& radiance, double t_s, const ExposureSettings& exposure, std::mt19937_64* rng) const;

  // Pixel rectangle (clipped to the image) that holds the whole wheel at `pose`.
  cv::Rect WheelBoundingBox(const WheelPose& pose) const;
  // True when the marker disc (and a 2 px margin) lies inside the image.
  bool MarkerInView(const WheelPose& pose) const;

 private:
  void ShadeWheel(const WheelPose& pose, const cv::Rect& region, cv::Mat1f& accumulator) const;
  const cv::Mat1f& BlurredStatic(double psf_sigma_px) const;

  PinholeCamera camera_;
  WheelLook wheel_;
  SceneLook scene_;
  cv::Mat1d plane_x_, plane_y_;  // drop-plane point per pixel centre [m]
  cv::Mat4f jacobian_;           // d(x, y)/d(u, v) per pixel: (dx/du, dx/dv, dy/du, dy/dv) [m/px]
  cv::Mat1f pixel_size_m_;       // sqrt |det J| [m]
  float max_pixel_size_m_ = 0.0f;
  cv::Mat1f static_radiance_;
  cv::Mat1f vignetting_unit_;  // (r / r_corner)^2 per pixel
  mutable std::mutex blurred_static_mutex_;
  mutable std::map<double, cv::Mat1f> blurred_static_;  // static scene per lens blur
};

// Gaussian lens blur of s.d. psf_sigma_px (0 = none), in place, edges replicated.
void ApplyLensBlur(cv::Mat1f& radiance, double psf_sigma_px);

// 65,536 standard normal deviates, the quantiles Phi^-1((i + 1/2) / 65536) (|z| <= 4.3): a
// table-driven normal generator, indexed by 16 random bits (the discreteness, 1/65536 in
// probability, is far below what a noise model needs).
const std::vector<float>& StandardNormalTable();

// A card held in front of the wheel that crosses the marker over chosen frames: a known-answer
// case of a partly hidden marker (a guide rail, a hand, a cable passing in front of the hub).
// The card is an opaque half-plane of uniform radiance `grey`, bounded by one straight edge. It is
// positioned per frame relative to the marker's drawn centre at mid-exposure: on frame f in
// [first_frame, last_frame] it covers the fraction
//   cover(f) = cover_from + (cover_to - cover_from) (f - first_frame) / (last_frame - first_frame)
// (cover_from when first = last) of the marker's extent along the edge's direction of travel
// n = (cos angle, sin angle) in the image (u right, v down: angle 0 = the edge moves right, the
// card comes from the left; 90 = it moves down, the card comes from the top). The extent is that of
// the marker disc's image, so cover 0 leaves the card's edge touching the marker and 1 hides it
// whole. The card is still during the exposure (no motion blur) and is seen through the same
// lens blur as the scene: its edge profile is the pixel-integrated Gaussian edge,
// Phi(s / psf_sigma_px) at signed distance s, supersampled 8 x 8 within reach of the edge
// (common practice for an ideal edge, no source). It then goes through the exposure model
// (vignetting, flicker, noise) like everything else.
struct Occluder {
  int first_frame = -1;     // first frame the card is drawn; -1 = no card; [-1, 1e7]
  int last_frame = -1;      // last frame it is drawn (inclusive); [first_frame, 1e7]
  double cover_from = 0.0;  // marker fraction covered at first_frame; [0, 1]
  double cover_to = 1.0;    // ... at last_frame; [0, 1]
  double angle_deg = 0.0;   // direction the edge moves in the image [deg]; finite
  double grey = 20.0;       // card radiance [grey levels]; [0, 300]
  bool active() const { return first_frame >= 0; }
};
// A message naming the first bad field and its valid range, or nothing.
std::optional<std::string> ValidateOccluder(const Occluder& occluder);
// The fraction of the marker covered on `frame` (0 when the card is not drawn then).
double OccluderCover(const Occluder& occluder, int frame);
// Draws the card into `radiance` (already lens-blurred, psf_sigma_px its blur) so that it covers
// the fraction `cover` in [0, 1] of the marker whose hub is at `pose` (at 0 its edge touches the
// marker).
void DrawOccluder(const SceneRenderer& renderer, const WheelPose& pose, const Occluder& occluder, double cover,
                  double psf_sigma_px, cv::Mat1f& radiance);

// Truth of one frame: the hub at the frame's mid-exposure time.
struct FrameTruth {
  int frame = 0;
  double t_s = 0.0;  // mid-exposure time on the clip clock (frame / capture_fps)
  double x_m = 0.0;  // hub (marker centre) in the drop plane
  double y_m = 0.0;
  double u_px = 0.0;  // its image: the drawn marker centre
  double v_px = 0.0;
  double spin_rad = 0.0;
  double vy_mps = 0.0;  // vertical velocity, up positive
  double contact_force_n = 0.0;
  bool in_contact = false;
  bool marker_in_view = true;
  double marker_covered_fraction = 0.0;  // of the marker's extent hidden by the Occluder card
                                         // (0 when none is drawn on this frame)
};

// The frame truth for frame `frame` of a clip at `capture_fps`.
FrameTruth TruthOfFrame(const SceneRenderer& renderer, const analysis::Trajectory& trajectory, int frame,
                        double capture_fps);

// The sub-frame poses of frame `frame` (see "Motion blur" above).
std::vector<WheelPose> SubframePoses(const analysis::Trajectory& trajectory, int frame, double capture_fps,
                                     const ExposureSettings& exposure);

// Renders frames 0..frames-1 of a clip of `trajectory` (clip clock: frame i at i / capture_fps)
// into `sink` and returns their truth. `noise_seed` seeds the clip's own std::mt19937_64;
// `add_noise` false renders noise-free frames; `occluder` (inactive by default) draws a card
// over the marker on its frames. Deterministic for a given seed.
std::vector<FrameTruth> RenderClip(const SceneRenderer& renderer, const analysis::Trajectory& trajectory, int frames,
                                   double capture_fps, const ExposureSettings& exposure, bool add_noise,
                                   uint64_t noise_seed, media::FrameSink& sink, const Occluder& occluder = {});

}  // namespace dropfit::synth
