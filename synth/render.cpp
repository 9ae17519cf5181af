#include "synth/render.h"

#include <opencv2/imgproc.hpp>

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>
#include <mutex>
#include <numbers>
#include <sstream>
#include <stdexcept>

namespace dropfit::synth {

namespace {

// Radiances [grey levels] of the drawn materials.
constexpr double kTyreGrey = 38.0;
constexpr double kRimGrey = 170.0;
constexpr double kRimLipGrey = 135.0;
constexpr double kHoleGrey = 22.0;
constexpr double kMarkerBlackGrey = 24.0;
constexpr double kMarkerWhiteGrey = 232.0;

// Rim decoration, as fractions of the rim radius.
constexpr int kRimHoles = 5;
constexpr double kHoleRingFraction = 0.62;
constexpr double kHoleRadiusFraction = 0.12;
constexpr double kLipFraction = 0.92;

// Supersampling grid sizes (see render.h, "Anti-aliasing").
constexpr int kEdgeSamples = 4;
constexpr int kMarkerSamples = 8;

constexpr std::pair<MarkerShape, const char*> kShapes[] = {{MarkerShape::kQuadrant, "quadrant"},
                                                           {MarkerShape::kDot, "dot"}};

double Ramp(double x) { return std::clamp(0.5 + x, 0.0, 1.0); }

uint64_t SplitMix64(uint64_t x) {
  x += 0x9E3779B97F4A7C15ull;
  x = (x ^ (x >> 30)) * 0xBF58476D1CE4E5B9ull;
  x = (x ^ (x >> 27)) * 0x94D049BB133111EBull;
  return x ^ (x >> 31);
}

// Smooth lattice (value) noise in [-1, 1]: hashed lattice values, smoothstep interpolation.
double ValueNoise(double x, double y, uint64_t seed) {
  const double fx = std::floor(x), fy = std::floor(y);
  const auto ix = static_cast<int64_t>(fx), iy = static_cast<int64_t>(fy);
  auto lattice = [seed](int64_t i, int64_t j) {
    const uint64_t h =
        SplitMix64(seed ^ SplitMix64(static_cast<uint64_t>(i) * 0x632BE59BD9B4E019ull + static_cast<uint64_t>(j)));
    return static_cast<double>(h >> 11) * (2.0 / 9007199254740992.0) - 1.0;
  };
  const double tx = x - fx, ty = y - fy;
  const double sx = tx * tx * (3 - 2 * tx), sy = ty * ty * (3 - 2 * ty);
  const double a = lattice(ix, iy), b = lattice(ix + 1, iy), c = lattice(ix, iy + 1), d = lattice(ix + 1, iy + 1);
  return (a + (b - a) * sx) * (1 - sy) + (c + (d - c) * sx) * sy;
}

double WallRadiance(double x_m, double y_m, uint64_t seed) {
  if (y_m < 0.03) return 108.0 + 4.0 * ValueNoise(x_m / 0.05, y_m / 0.05, seed + 7);  // skirting board
  return 150.0 + 10.0 * ValueNoise(x_m / 0.12, y_m / 0.12, seed) + 5.0 * ValueNoise(x_m / 0.03, y_m / 0.03, seed + 1);
}

double FloorRadiance(double x_m, double z_m, const SceneLook& scene) {
  double value = 96.0 + 7.0 * ValueNoise(x_m / 0.07, z_m / 0.07, scene.texture_seed + 2) +
                 3.0 * ValueNoise(x_m / 0.015, z_m / 0.015, scene.texture_seed + 3);
  const double from_wall = z_m + scene.wall_distance_m;
  if (from_wall < 0.06) value -= 15.0 * (1.0 - from_wall / 0.06);  // shade where floor meets wall
  return value;
}

// Radiance seen along a ray from the camera centre: floor (y = 0, z in [-wall, front]),
// the dark space below the floor's front edge, the wall (z = -wall), or a plain ceiling.
double StaticRayRadiance(const cv::Vec3d& origin, const cv::Vec3d& ray, const SceneLook& scene) {
  double best_s = std::numeric_limits<double>::infinity();
  double value = 120.0;  // ceiling / far away
  if (ray[1] < 0) {
    const double s = -origin[1] / ray[1];
    const cv::Vec3d p = origin + s * ray;
    if (p[2] >= -scene.wall_distance_m) {
      best_s = s;
      value = p[2] <= scene.floor_front_m ? FloorRadiance(p[0], p[2], scene) : 18.0;
    }
  }
  if (ray[2] < 0) {
    const double s = (-scene.wall_distance_m - origin[2]) / ray[2];
    const cv::Vec3d p = origin + s * ray;
    if (s > 0 && s < best_s && p[1] >= 0) value = WallRadiance(p[0], p[1], scene.texture_seed);
  }
  return value;
}

// What ShadeWheel needs of one pose, computed once per pose.
struct PoseGeometry {
  double hx, hy, cos_spin, sin_spin;
  double tyre_r, rim_r, lip_r, hole_ring_r, hole_r, cap_r, marker_r;
  bool quadrant;
  bool clip_floor;                               // the tyre reaches the floor: cut it at y = 0
  std::array<double, kRimHoles> hole_x, hole_y;  // hole centres relative to the hub
};

PoseGeometry MakePoseGeometry(const WheelLook& look, const WheelPose& pose, double reach_m) {
  PoseGeometry g{};
  g.hx = pose.x_m;
  g.hy = pose.y_m;
  g.cos_spin = std::cos(pose.spin_rad);
  g.sin_spin = std::sin(pose.spin_rad);
  g.tyre_r = look.free_radius_m;
  g.rim_r = look.rim_radius_m;
  g.lip_r = kLipFraction * look.rim_radius_m;
  g.hole_ring_r = kHoleRingFraction * look.rim_radius_m;
  g.hole_r = kHoleRadiusFraction * look.rim_radius_m;
  g.cap_r = CapRadius(look);
  g.marker_r = look.marker_diameter_m / 2;
  g.quadrant = look.marker == MarkerShape::kQuadrant;
  g.clip_floor = pose.y_m - look.free_radius_m < 2 * reach_m;
  for (int k = 0; k < kRimHoles; ++k) {
    const double a = pose.spin_rad + 2 * std::numbers::pi * k / kRimHoles + std::numbers::pi / kRimHoles;
    g.hole_x[k] = g.hole_ring_r * std::cos(a);
    g.hole_y[k] = g.hole_ring_r * std::sin(a);
  }
  return g;
}

// Radiance at a drop-plane sample (dx, dy relative to the hub; py = world y) whose footprint is
// w metres, over background `bg`. Edges ramp over w (render.h, "Anti-aliasing").
double ShadeSample(const PoseGeometry& g, double dx, double dy, double r, double w, double bg) {
  if (r >= g.tyre_r + w) return bg;
  const double inv_w = 1.0 / w;
  double a_tyre = Ramp((g.tyre_r - r) * inv_w);
  if (g.clip_floor) a_tyre *= Ramp((g.hy + dy) * inv_w);
  double value = bg + (kTyreGrey - bg) * a_tyre;
  if (r < g.rim_r + w) {
    double rim = kRimGrey + (kRimLipGrey - kRimGrey) * Ramp((r - g.lip_r) * inv_w);
    if (std::abs(r - g.hole_ring_r) < g.hole_r + w) {
      for (int k = 0; k < kRimHoles; ++k) {
        const double hx = dx - g.hole_x[k], hy = dy - g.hole_y[k];
        const double dh = std::sqrt(hx * hx + hy * hy);
        if (dh < g.hole_r + w) rim += (kHoleGrey - rim) * Ramp((g.hole_r - dh) * inv_w);
      }
    }
    value += (rim - value) * Ramp((g.rim_r - r) * inv_w);
  }
  if (r < g.cap_r + w) value += (kMarkerBlackGrey - value) * Ramp((g.cap_r - r) * inv_w);
  if (r < g.marker_r + w) {
    double white = 1.0;
    if (g.quadrant) {
      const double a = dx * g.cos_spin + dy * g.sin_spin;   // along the first quarter edge
      const double b = -dx * g.sin_spin + dy * g.cos_spin;  // along the second
      const double s1 = std::clamp(2 * a * inv_w, -1.0, 1.0), s2 = std::clamp(2 * b * inv_w, -1.0, 1.0);
      white = 0.5 * (1 + s1 * s2);
    }
    const double marker = kMarkerBlackGrey + white * (kMarkerWhiteGrey - kMarkerBlackGrey);
    value += (marker - value) * Ramp((g.marker_r - r) * inv_w);
  }
  return value;
}

// Distance [m] from (dx, dy) to the nearest drawn edge, and whether it is a marker-area edge.
double NearestEdge(const PoseGeometry& g, double dx, double dy, double r, double reach, bool* near_marker) {
  double e = std::abs(r - g.tyre_r);
  if (g.clip_floor && r < g.tyre_r + reach) e = std::min(e, std::abs(g.hy + dy));
  e = std::min({e, std::abs(r - g.rim_r), std::abs(r - g.lip_r), std::abs(r - g.cap_r), std::abs(r - g.marker_r)});
  if (std::abs(r - g.hole_ring_r) < g.hole_r + reach) {
    double nearest2 = std::numeric_limits<double>::infinity();
    for (int k = 0; k < kRimHoles; ++k) {
      const double hx = dx - g.hole_x[k], hy = dy - g.hole_y[k];
      nearest2 = std::min(nearest2, hx * hx + hy * hy);
    }
    e = std::min(e, std::abs(std::sqrt(nearest2) - g.hole_r));
  }
  *near_marker = r < g.cap_r + reach;
  if (g.quadrant && r < g.marker_r + reach) {
    const double a = dx * g.cos_spin + dy * g.sin_spin;
    const double b = -dx * g.sin_spin + dy * g.cos_spin;
    e = std::min({e, std::abs(a), std::abs(b)});
  }
  return e;
}

}  // namespace

std::string ToString(MarkerShape shape) { return shape == MarkerShape::kDot ? "dot" : "quadrant"; }

MarkerShape MarkerShapeFromString(const std::string& text) {
  for (const auto& [value, name] : kShapes) {
    if (text == name) return value;
  }
  throw std::invalid_argument("unknown marker shape '" + text + "'; valid: quadrant, dot");
}

double CapRadius(const WheelLook& look) {
  return (look.marker == MarkerShape::kQuadrant ? 1.6 : 1.8) * look.marker_diameter_m / 2;
}

std::optional<std::string> ValidateWheelLook(const WheelLook& look) {
  std::ostringstream msg;
  if (!(look.free_radius_m >= 0.02 && look.free_radius_m <= 1.0)) {
    msg << "free radius " << look.free_radius_m << " m is outside [0.02, 1] m";
    return msg.str();
  }
  if (!(look.marker_offset_m >= -0.5 && look.marker_offset_m <= 0.5)) {
    msg << "marker offset " << look.marker_offset_m << " m is outside [-0.5, 0.5] m";
    return msg.str();
  }
  if (!(look.marker_diameter_m >= 0.004 && look.marker_diameter_m <= 0.2)) {
    msg << "marker diameter " << look.marker_diameter_m << " m is outside [0.004, 0.2] m";
    return msg.str();
  }
  const double min_rim = CapRadius(look) / 0.45;
  if (!(look.rim_radius_m >= min_rim && look.rim_radius_m < look.free_radius_m)) {
    msg << "rim radius " << look.rim_radius_m << " m must be at least " << min_rim << " m (room for the hub cap of a "
        << look.marker_diameter_m * 1000 << " mm marker) and below the free radius " << look.free_radius_m
        << " m; use a smaller marker or a larger wheel";
    return msg.str();
  }
  return std::nullopt;
}

ExposureSettings WithoutImperfections(ExposureSettings e) {
  e.subframes = 1;
  e.read_noise_grey = 0;
  e.electrons_per_grey = 0;
  e.vignetting_fraction = 0;
  e.flicker_fraction = 0;
  e.psf_sigma_px = 0;
  return e;
}

std::optional<std::string> ValidateExposure(const ExposureSettings& e, double capture_fps) {
  std::ostringstream msg;
  if (!(capture_fps > 0 && std::isfinite(capture_fps))) {
    msg << "capture rate " << capture_fps << " frames/s must be positive";
    return msg.str();
  }
  if (!(e.exposure_s > 0 && e.exposure_s <= 1.0 / capture_fps * (1 + 1e-12))) {
    msg << "exposure " << e.exposure_s << " s must be positive and at most the frame interval " << 1.0 / capture_fps
        << " s";
    return msg.str();
  }
  if (!(e.subframes >= 1 && e.subframes <= 64)) {
    msg << "sub-frames " << e.subframes << " is outside 1..64";
    return msg.str();
  }
  if (!(e.read_noise_grey >= 0 && e.read_noise_grey <= 50)) {
    msg << "read noise " << e.read_noise_grey << " grey levels is outside [0, 50]";
    return msg.str();
  }
  if (!(e.electrons_per_grey == 0 || (e.electrons_per_grey >= 0.1 && e.electrons_per_grey <= 1e6))) {
    msg << "electrons per grey level " << e.electrons_per_grey << " must be 0 (no shot noise) or in [0.1, 1e6]";
    return msg.str();
  }
  if (!(e.vignetting_fraction >= 0 && e.vignetting_fraction <= 0.9)) {
    msg << "vignetting " << e.vignetting_fraction << " is outside [0, 0.9]";
    return msg.str();
  }
  if (!(e.flicker_fraction >= 0 && e.flicker_fraction <= 0.5)) {
    msg << "flicker " << e.flicker_fraction << " is outside [0, 0.5]";
    return msg.str();
  }
  if (!(e.flicker_hz > 0 && e.flicker_hz <= 1e5) || !std::isfinite(e.flicker_phase_rad)) {
    msg << "flicker frequency " << e.flicker_hz << " Hz is outside (0, 1e5]";
    return msg.str();
  }
  if (!(e.psf_sigma_px >= 0 && e.psf_sigma_px <= 5)) {
    msg << "lens blur " << e.psf_sigma_px << " px is outside [0, 5]";
    return msg.str();
  }
  return std::nullopt;
}

SceneRenderer::SceneRenderer(const PinholeCamera& camera, const WheelLook& wheel, const SceneLook& scene)
    : camera_(camera), wheel_(wheel), scene_(scene) {
  if (auto msg = ValidateWheelLook(wheel)) throw std::invalid_argument("wheel: " + *msg);
  if (!(scene.wall_distance_m >= 0.05 && scene.wall_distance_m <= 20 && scene.floor_front_m >= 0 &&
        scene.floor_front_m <= 20)) {
    throw std::invalid_argument("scene: wall distance must be in [0.05, 20] m and the floor front in [0, 20] m");
  }
  const CameraIntrinsics& k = camera.intrinsics;
  const int width = k.image_size.width, height = k.image_size.height;
  const cv::Matx33d world_from_camera = CameraFromWorldRotation(camera).t();
  const cv::Vec3d origin = CameraCentreInWorld(camera);
  const double wheel_z = wheel.marker_offset_m;  // the plane the wheel is drawn in
  if (!(origin[2] > wheel_z) || !(origin[2] > 0) || !(origin[1] > 0)) {
    throw std::invalid_argument(
        "the camera must be in front of the drop plane and the wheel's plane, and above the floor");
  }
  auto ray_of = [&](double u, double v) {
    const cv::Point2d n = UndistortNormalized(k, {(u - k.cx_px) / k.fx_px, (v - k.cy_px) / k.fy_px});
    return world_from_camera * cv::Vec3d(n.x, n.y, 1.0);
  };
  plane_x_.create(height, width);
  plane_y_.create(height, width);
  static_radiance_.create(height, width);
  vignetting_unit_.create(height, width);
  double corner2 = 0;
  for (double u : {-0.5, width - 0.5}) {
    for (double v : {-0.5, height - 0.5}) {
      corner2 = std::max(corner2, (u - k.cx_px) * (u - k.cx_px) + (v - k.cy_px) * (v - k.cy_px));
    }
  }
  for (int v = 0; v < height; ++v) {
    for (int u = 0; u < width; ++u) {
      const cv::Vec3d ray = ray_of(u, v);
      if (!(ray[2] < 0))
        throw std::invalid_argument("a pixel's ray does not meet the drop plane; tilt the camera less");
      const double s = (wheel_z - origin[2]) / ray[2];
      plane_x_(v, u) = origin[0] + s * ray[0];
      plane_y_(v, u) = origin[1] + s * ray[1];
      // 2 x 2 supersampled static scene (its texture is smooth; only its few edges need it).
      double sum = 0;
      for (double du : {-0.25, 0.25}) {
        for (double dv : {-0.25, 0.25}) sum += StaticRayRadiance(origin, ray_of(u + du, v + dv), scene);
      }
      static_radiance_(v, u) = static_cast<float>(sum / 4);
      const double r2 = (u - k.cx_px) * (u - k.cx_px) + (v - k.cy_px) * (v - k.cy_px);
      vignetting_unit_(v, u) = static_cast<float>(r2 / corner2);
    }
  }
  jacobian_.create(height, width);
  pixel_size_m_.create(height, width);
  for (int v = 0; v < height; ++v) {
    const int v0 = std::max(v - 1, 0), v1 = std::min(v + 1, height - 1);
    for (int u = 0; u < width; ++u) {
      const int u0 = std::max(u - 1, 0), u1 = std::min(u + 1, width - 1);
      const double dxdu = (plane_x_(v, u1) - plane_x_(v, u0)) / (u1 - u0);
      const double dydu = (plane_y_(v, u1) - plane_y_(v, u0)) / (u1 - u0);
      const double dxdv = (plane_x_(v1, u) - plane_x_(v0, u)) / (v1 - v0);
      const double dydv = (plane_y_(v1, u) - plane_y_(v0, u)) / (v1 - v0);
      jacobian_(v, u) = cv::Vec4f(static_cast<float>(dxdu), static_cast<float>(dxdv), static_cast<float>(dydu),
                                  static_cast<float>(dydv));
      const float size = static_cast<float>(std::sqrt(std::abs(dxdu * dydv - dxdv * dydu)));
      pixel_size_m_(v, u) = size;
      max_pixel_size_m_ = std::max(max_pixel_size_m_, size);
    }
  }
}

cv::Point2d SceneRenderer::PlaneAtPixel(int u, int v) const { return {plane_x_(v, u), plane_y_(v, u)}; }

cv::Point2d SceneRenderer::ImageFromWheelPlane(cv::Point2d p_m) const {
  return ProjectWorldPoint(camera_, cv::Vec3d(p_m.x, p_m.y, wheel_.marker_offset_m));
}

cv::Rect SceneRenderer::WheelBoundingBox(const WheelPose& pose) const {
  const cv::Size size = image_size();
  double u0 = 1e18, v0 = 1e18, u1 = -1e18, v1 = -1e18;
  const double r = wheel_.free_radius_m * 1.02 + 0.002;
  for (int i = 0; i < 32; ++i) {
    const double a = 2 * std::numbers::pi * i / 32;
    // The 32-gon's edge midpoints lie at r cos(pi/32) from the hub: r / cos(pi/32) encloses the circle.
    const cv::Point2d p = ImageFromWheelPlane({pose.x_m + r / std::cos(std::numbers::pi / 32) * std::cos(a),
                                               pose.y_m + r / std::cos(std::numbers::pi / 32) * std::sin(a)});
    u0 = std::min(u0, p.x);
    u1 = std::max(u1, p.x);
    v0 = std::min(v0, p.y);
    v1 = std::max(v1, p.y);
  }
  const int margin = 3;
  const int left = std::max(0, static_cast<int>(std::floor(u0)) - margin);
  const int top = std::max(0, static_cast<int>(std::floor(v0)) - margin);
  const int right = std::min(size.width, static_cast<int>(std::ceil(u1)) + margin + 1);
  const int bottom = std::min(size.height, static_cast<int>(std::ceil(v1)) + margin + 1);
  if (right <= left || bottom <= top) return {};
  return {left, top, right - left, bottom - top};
}

bool SceneRenderer::MarkerInView(const WheelPose& pose) const {
  const cv::Size size = image_size();
  const double margin_px = 2.0;
  for (int i = 0; i < 16; ++i) {
    const double a = 2 * std::numbers::pi * i / 16;
    const double r = CapRadius(wheel_);
    const cv::Point2d p = ImageFromWheelPlane({pose.x_m + r * std::cos(a), pose.y_m + r * std::sin(a)});
    if (p.x < -0.5 + margin_px || p.y < -0.5 + margin_px || p.x > size.width - 0.5 - margin_px ||
        p.y > size.height - 0.5 - margin_px) {
      return false;
    }
  }
  return true;
}

void SceneRenderer::ShadeWheel(const WheelPose& pose, const cv::Rect& region, cv::Mat1f& accumulator) const {
  const float reach_scale = 0.75f;  // a pixel's half-diagonal, with room for anisotropy
  const PoseGeometry g = MakePoseGeometry(wheel_, pose, max_pixel_size_m_);
  const double outer2 = std::pow(g.tyre_r + max_pixel_size_m_, 2);
  for (int v = region.y; v < region.y + region.height; ++v) {
    float* acc = accumulator.ptr<float>(v - region.y);
    for (int u = region.x; u < region.x + region.width; ++u) {
      const double bg = static_radiance_(v, u);
      const double dx = plane_x_(v, u) - g.hx, dy = plane_y_(v, u) - g.hy;
      const double r2 = dx * dx + dy * dy;
      if (r2 > outer2) {
        acc[u - region.x] += static_cast<float>(bg);
        continue;
      }
      const double size = pixel_size_m_(v, u);
      const double reach = reach_scale * size;
      bool near_marker = false;
      const double r = std::sqrt(r2);
      const double edge = NearestEdge(g, dx, dy, r, reach, &near_marker);
      double value;
      if (edge > reach) {
        value = ShadeSample(g, dx, dy, r, 1e-12, bg);
      } else {
        const int n = near_marker ? kMarkerSamples : kEdgeSamples;
        const cv::Vec4f& j = jacobian_(v, u);
        const double w = size / n;
        double sum = 0;
        for (int iv = 0; iv < n; ++iv) {
          const double ov = (iv + 0.5) / n - 0.5;
          for (int iu = 0; iu < n; ++iu) {
            const double ou = (iu + 0.5) / n - 0.5;
            const double sx = dx + j[0] * ou + j[1] * ov, sy = dy + j[2] * ou + j[3] * ov;
            sum += ShadeSample(g, sx, sy, std::sqrt(sx * sx + sy * sy), w, bg);
          }
        }
        value = sum / (n * n);
      }
      acc[u - region.x] += static_cast<float>(value);
    }
  }
}

const cv::Mat1f& SceneRenderer::BlurredStatic(double psf_sigma_px) const {
  std::lock_guard<std::mutex> lock(blurred_static_mutex_);
  auto it = blurred_static_.find(psf_sigma_px);
  if (it == blurred_static_.end()) {
    cv::Mat1f blurred = static_radiance_.clone();
    ApplyLensBlur(blurred, psf_sigma_px);
    it = blurred_static_.emplace(psf_sigma_px, blurred).first;
  }
  return it->second;
}

cv::Mat1f SceneRenderer::RenderRadiance(const std::vector<WheelPose>& subframe_poses, double psf_sigma_px) const {
  cv::Mat1f out = (psf_sigma_px > 0 ? BlurredStatic(psf_sigma_px) : static_radiance_).clone();
  if (subframe_poses.empty()) return out;
  cv::Rect region;
  for (const WheelPose& pose : subframe_poses) region |= WheelBoundingBox(pose);
  if (region.empty()) return out;
  // The lens blur reaches 4 s.d.: shade a margin of static pixels around the wheel so that the
  // blurred patch matches the blurred static scene at its edge, then keep the inner part.
  const int reach = psf_sigma_px > 0 ? static_cast<int>(std::ceil(4 * psf_sigma_px)) + 1 : 0;
  const cv::Rect image_rect(cv::Point(0, 0), image_size());
  const cv::Rect padded =
      cv::Rect(region.x - 2 * reach, region.y - 2 * reach, region.width + 4 * reach, region.height + 4 * reach) &
      image_rect;
  cv::Mat1f accumulator(padded.size(), 0.0f);
  for (const WheelPose& pose : subframe_poses) ShadeWheel(pose, padded, accumulator);
  accumulator *= 1.0 / static_cast<double>(subframe_poses.size());
  ApplyLensBlur(accumulator, psf_sigma_px);
  const cv::Rect inner =
      cv::Rect(region.x - reach, region.y - reach, region.width + 2 * reach, region.height + 2 * reach) & image_rect;
  accumulator(inner - padded.tl()).copyTo(out(inner));
  return out;
}

cv::Mat1b SceneRenderer::Expose(const cv::Mat1f& radiance, double t_s, const ExposureSettings& e,
                                std::mt19937_64* rng) const {
  const double flicker =
      1.0 + e.flicker_fraction * std::sin(2 * std::numbers::pi * e.flicker_hz * t_s + e.flicker_phase_rad);
  const double shot_scale = e.electrons_per_grey > 0 ? 1.0 / e.electrons_per_grey : 0.0;
  // Noise s.d. by mean level, tabulated every 1/4 grey level (mu changes it slowly).
  constexpr int kLevelsPerGrey = 4;
  std::array<float, 300 * kLevelsPerGrey> sigma{};
  for (size_t i = 0; i < sigma.size(); ++i) {
    sigma[i] = static_cast<float>(
        std::sqrt(static_cast<double>(i) / kLevelsPerGrey * shot_scale + e.read_noise_grey * e.read_noise_grey));
  }
  const std::vector<float>& normal = StandardNormalTable();
  cv::Mat1b out(radiance.size());
  uint64_t bits = 0;
  int bits_left = 0;
  for (int v = 0; v < radiance.rows; ++v) {
    const float* in = radiance.ptr<float>(v);
    const float* vig = vignetting_unit_.ptr<float>(v);
    uint8_t* o = out.ptr<uint8_t>(v);
    for (int u = 0; u < radiance.cols; ++u) {
      float mu = static_cast<float>(in[u] * (1.0 - e.vignetting_fraction * vig[u]) * flicker);
      if (rng) {
        if (bits_left == 0) {
          bits = (*rng)();
          bits_left = 4;
        }
        const float z = normal[bits & 0xFFFFu];
        bits >>= 16;
        --bits_left;
        const int level =
            std::clamp(static_cast<int>(mu * kLevelsPerGrey + 0.5f), 0, static_cast<int>(sigma.size()) - 1);
        mu += z * sigma[static_cast<size_t>(level)];
      }
      o[u] = static_cast<uint8_t>(std::clamp(std::lround(mu), 0L, 255L));
    }
  }
  return out;
}

void ApplyLensBlur(cv::Mat1f& radiance, double psf_sigma_px) {
  if (psf_sigma_px > 0) {
    cv::GaussianBlur(radiance, radiance, cv::Size(0, 0), psf_sigma_px, psf_sigma_px, cv::BORDER_REPLICATE);
  }
}

const std::vector<float>& StandardNormalTable() {
  static const std::vector<float> table = [] {
    std::vector<float> t(65536);
    for (size_t i = 0; i < t.size(); ++i) {
      // Solve Phi(z) = p by Newton's method on Phi(z) = erfc(-z / sqrt 2) / 2.
      const double p = (static_cast<double>(i) + 0.5) / 65536.0;
      double z = 0;
      for (int k = 0; k < 60; ++k) {
        const double f = 0.5 * std::erfc(-z / std::numbers::sqrt2) - p;
        const double pdf = std::exp(-0.5 * z * z) / std::sqrt(2 * std::numbers::pi);
        const double step = std::clamp(f / pdf, -1.0, 1.0);
        z -= step;
        if (std::abs(step) < 1e-13) break;
      }
      t[i] = static_cast<float>(z);
    }
    return t;
  }();
  return table;
}

std::optional<std::string> ValidateOccluder(const Occluder& o) {
  std::ostringstream msg;
  if (!o.active()) return std::nullopt;
  if (!(o.first_frame >= 0 && o.first_frame <= 10000000 && o.last_frame >= o.first_frame && o.last_frame <= 10000000)) {
    msg << "occluder frames " << o.first_frame << ":" << o.last_frame << " must satisfy 0 <= first <= last <= 10000000";
    return msg.str();
  }
  if (!(o.cover_from >= 0 && o.cover_from <= 1 && o.cover_to >= 0 && o.cover_to <= 1)) {
    msg << "occluder cover " << o.cover_from << ":" << o.cover_to << " must lie in [0, 1]";
    return msg.str();
  }
  if (!std::isfinite(o.angle_deg)) return std::string("occluder angle must be finite");
  if (!(o.grey >= 0 && o.grey <= 300)) {
    msg << "occluder grey " << o.grey << " is outside [0, 300] grey levels";
    return msg.str();
  }
  return std::nullopt;
}

double OccluderCover(const Occluder& o, int frame) {
  if (!o.active() || frame < o.first_frame || frame > o.last_frame) return 0.0;
  if (o.last_frame == o.first_frame) return o.cover_from;
  return o.cover_from + (o.cover_to - o.cover_from) * (frame - o.first_frame) / (o.last_frame - o.first_frame);
}

void DrawOccluder(const SceneRenderer& renderer, const WheelPose& pose, const Occluder& occluder, double cover,
                  double psf_sigma_px, cv::Mat1f& radiance) {
  const double angle = occluder.angle_deg * std::numbers::pi / 180.0;
  const cv::Point2d n(std::cos(angle), std::sin(angle));
  const cv::Point2d centre = ImageFromDropPlane(renderer.camera(), {pose.x_m, pose.y_m});
  // The marker disc's extent along n: its rim's image, finely sampled.
  const double r = renderer.wheel().marker_diameter_m / 2;
  double lo = 1e300, hi = -1e300;
  for (int i = 0; i < 720; ++i) {
    const double a = 2 * std::numbers::pi * i / 720;
    const cv::Point2d p =
        ImageFromDropPlane(renderer.camera(), {pose.x_m + r * std::cos(a), pose.y_m + r * std::sin(a)});
    const double s = (p - centre).dot(n);
    lo = std::min(lo, s);
    hi = std::max(hi, s);
  }
  const double edge = lo + std::clamp(cover, 0.0, 1.0) * (hi - lo);  // along n, from the centre [px]
  // Card fraction of a point at signed distance s = edge - (p - centre).n (positive on the card).
  constexpr int kSub = 8;
  const double reach = 1.0 + 5.0 * psf_sigma_px;
  auto fraction = [&](double s) {
    if (psf_sigma_px > 0) return 0.5 * std::erfc(-s / (psf_sigma_px * std::numbers::sqrt2));
    return std::clamp(0.5 + s * kSub, 0.0, 1.0);  // ramp over one sub-sample (render.h, "Anti-aliasing")
  };
  const float grey = static_cast<float>(occluder.grey);
  for (int v = 0; v < radiance.rows; ++v) {
    float* row = radiance.ptr<float>(v);
    for (int u = 0; u < radiance.cols; ++u) {
      const double s = edge - ((u - centre.x) * n.x + (v - centre.y) * n.y);
      double a;
      if (s > reach) {
        a = 1.0;
      } else if (s < -reach) {
        continue;
      } else {
        double sum = 0;
        for (int iv = 0; iv < kSub; ++iv) {
          const double ov = (iv + 0.5) / kSub - 0.5;
          for (int iu = 0; iu < kSub; ++iu) sum += fraction(s - ((iu + 0.5) / kSub - 0.5) * n.x - ov * n.y);
        }
        a = sum / (kSub * kSub);
      }
      row[u] = static_cast<float>(row[u] + (grey - row[u]) * a);
    }
  }
}

FrameTruth TruthOfFrame(const SceneRenderer& renderer, const analysis::Trajectory& trajectory, int frame,
                        double capture_fps) {
  FrameTruth truth;
  truth.frame = frame;
  truth.t_s = frame / capture_fps;
  const analysis::HubState s = trajectory.At(truth.t_s);
  truth.x_m = s.x_m;
  truth.y_m = s.y_m;
  truth.spin_rad = s.spin_angle_rad;
  truth.vy_mps = s.vy_mps;
  truth.contact_force_n = s.contact_force_n;
  truth.in_contact = s.in_contact;
  const cv::Point2d image = renderer.ImageFromWheelPlane({s.x_m, s.y_m});
  truth.u_px = image.x;
  truth.v_px = image.y;
  truth.marker_in_view = renderer.MarkerInView({s.x_m, s.y_m, s.spin_angle_rad});
  return truth;
}

std::vector<WheelPose> SubframePoses(const analysis::Trajectory& trajectory, int frame, double capture_fps,
                                     const ExposureSettings& exposure) {
  const double t_mid = frame / capture_fps;
  std::vector<WheelPose> poses;
  for (int j = 0; j < exposure.subframes; ++j) {
    const double t =
        exposure.subframes == 1 ? t_mid : t_mid + ((j + 0.5) / exposure.subframes - 0.5) * exposure.exposure_s;
    const analysis::HubState s = trajectory.At(t);
    poses.push_back({s.x_m, s.y_m, s.spin_angle_rad});
  }
  return poses;
}

std::vector<FrameTruth> RenderClip(const SceneRenderer& renderer, const analysis::Trajectory& trajectory, int frames,
                                   double capture_fps, const ExposureSettings& exposure, bool add_noise,
                                   uint64_t noise_seed, media::FrameSink& sink, const Occluder& occluder) {
  if (auto msg = ValidateExposure(exposure, capture_fps)) throw std::invalid_argument("exposure: " + *msg);
  if (auto msg = ValidateOccluder(occluder)) throw std::invalid_argument(*msg);
  if (frames < 1) throw std::invalid_argument("a clip needs at least one frame (got " + std::to_string(frames) + ")");
  std::mt19937_64 rng(noise_seed);
  std::vector<FrameTruth> truth;
  truth.reserve(static_cast<size_t>(frames));
  for (int i = 0; i < frames; ++i) {
    cv::Mat1f radiance =
        renderer.RenderRadiance(SubframePoses(trajectory, i, capture_fps, exposure), exposure.psf_sigma_px);
    FrameTruth frame_truth = TruthOfFrame(renderer, trajectory, i, capture_fps);
    if (i >= occluder.first_frame && i <= occluder.last_frame && occluder.active()) {
      frame_truth.marker_covered_fraction = OccluderCover(occluder, i);
      DrawOccluder(renderer, {frame_truth.x_m, frame_truth.y_m, frame_truth.spin_rad}, occluder,
                   frame_truth.marker_covered_fraction, exposure.psf_sigma_px, radiance);
    }
    sink.Write(renderer.Expose(radiance, i / capture_fps, exposure, add_noise ? &rng : nullptr));
    truth.push_back(frame_truth);
  }
  return truth;
}

}  // namespace dropfit::synth
