#pragma once
// Template definitions for analysis/geometry.h (read that header for the meaning).

#include <cassert>
#include <cmath>
#include <type_traits>

namespace dropfit::analysis {
namespace detail {

// The double value of a scalar: itself for arithmetic types, the value part of a
// ceres::Jet (recursively, so nested Jets work). Used for branching and step control only.
template <typename T>
double ScalarValue(const T& x) {
  if constexpr (std::is_arithmetic_v<T>) {
    return static_cast<double>(x);
  } else {
    return ScalarValue(x.a);
  }
}

// Gauss-Legendre rule on [0, 1]: kTorusQuadratureNodes nodes and weights (computed once).
inline constexpr int kTorusQuadratureNodes = 24;
const double* GaussLegendreUnitNodes();
const double* GaussLegendreUnitWeights();

}  // namespace detail

namespace detail {

// Circular-segment area with a scalar radius (see CircularSegmentArea).
template <typename T>
T SegmentArea(const T& radius_m, const T& depth_m) {
  using std::asin;
  using std::sqrt;
  const double r = ScalarValue(radius_m);
  const double d = ScalarValue(depth_m);
  if (d <= 0.0) return T(0.0);
  if (d >= 2.0 * r) return T(M_PI) * radius_m * radius_m;
  const T x = depth_m / radius_m;
  if (d < 1e-3 * r) {
    // 2 sqrt(2r) Int_0^d z^{1/2} (1 - z/(2r))^{1/2} dz, binomial series to z^{9/2}
    // (truncation ~ (d/r)^4 relative).
    return 2.0 * sqrt(2.0 * radius_m) * depth_m * sqrt(depth_m) *
           (2.0 / 3.0 - x / 10.0 - x * x / 112.0 - x * x * x / 576.0);
  }
  return 2.0 * radius_m * radius_m * asin(sqrt(x / 2.0)) -
         (radius_m - depth_m) * sqrt(depth_m * (2.0 * radius_m - depth_m));
}

}  // namespace detail

template <typename T>
T CircularSegmentArea(double radius_m, const T& depth_m) {
  return detail::SegmentArea(T(radius_m), depth_m);
}

template <typename T>
T CylinderCapVolume(double radius_m, double width_m, const T& delta_m) {
  return width_m * CircularSegmentArea(radius_m, delta_m);
}

template <typename T>
T TorusCapVolume(double centre_radius_m, double section_radius_m, const T& delta_m) {
  using std::cos;
  using std::sin;
  using std::sqrt;
  const double big_r = centre_radius_m;
  const double a = section_radius_m;
  const double d = detail::ScalarValue(delta_m);
  if (d <= 0.0) return T(0.0);
  const T delta = d > big_r + a ? T(big_r + a) : delta_m;
  const double* nodes = detail::GaussLegendreUnitNodes();
  const double* weights = detail::GaussLegendreUnitWeights();
  constexpr double kHalfPi = M_PI / 2.0;
  T volume(0.0);
  if (d < a) {
    // Only the outer ring touches. y = y_e sin(theta), theta in [0, pi/2], doubled by
    // symmetry; a^2 - y^2 = (a - delta)^2 + y_e^2 cos^2(theta) keeps the integrand analytic.
    const T gap = a - delta;                  // > 0
    const T ye2 = delta * (2.0 * a - delta);  // y_e^2
    const T ye = sqrt(ye2);
    for (int i = 0; i < detail::kTorusQuadratureNodes; ++i) {
      const double theta = kHalfPi * nodes[i];
      const double c = cos(theta);
      const T root = sqrt(gap * gap + ye2 * (c * c));  // sqrt(a^2 - y^2)
      const T depth = ye2 * (c * c) / (root + gap);    // root - gap, without cancellation
      const T area = detail::SegmentArea(T(big_r) + root, depth);
      volume += (kHalfPi * weights[i]) * area * (ye * c);
    }
    return 2.0 * volume;
  }
  // delta >= a: every slice's outer ring is cut (y = a sin(theta) over [0, pi/2]); the inner
  // ring is cut where a cos(theta) < delta - a.
  const T excess = delta - a;  // >= 0
  for (int i = 0; i < detail::kTorusQuadratureNodes; ++i) {
    const double theta = kHalfPi * nodes[i];
    const double c = cos(theta);
    volume += (kHalfPi * weights[i]) * detail::SegmentArea(T(big_r + a * c), a * c + excess) * (a * c);
  }
  // Inner ring: cut for theta in [theta_i, pi/2] with cos(theta_i) = (delta - a)/a; the
  // substitution theta = theta_i + (pi/2 - theta_i) s^2 makes the depth ~ s^2 near the edge.
  const double ratio = (d - a) / a;
  const double theta_i = ratio >= 1.0 ? 0.0 : std::acos(ratio);
  const double span = kHalfPi - theta_i;
  if (span > 0.0) {
    T inner(0.0);
    for (int i = 0; i < detail::kTorusQuadratureNodes; ++i) {
      const double s = nodes[i];
      const double theta = theta_i + span * s * s;
      const double c = cos(theta);
      inner += weights[i] * detail::SegmentArea(T(big_r - a * c), excess - a * c) * (a * c) * (2.0 * span * s);
    }
    volume -= inner;
  }
  return 2.0 * volume;
}

template <typename T>
T InterpenetrationVolume(const TreadGeometry& geometry, const T& delta_m) {
  const double d = detail::ScalarValue(delta_m);
  if (d <= 0.0) return T(0.0);
  if (geometry.shape == TreadShape::kTorus) {
    const TorusVolumeTable* table = geometry.torus_table.get();
    if (table != nullptr && table->section_radius_m == geometry.section_radius_m &&
        table->centre_radius_m == geometry.free_radius_m - geometry.section_radius_m) {
      const int intervals = static_cast<int>(table->knots.size() / 3) - 1;
      // The knot index is taken only once the depth is known to lie inside the table: a depth
      // far beyond it (a fit gone astray, e.g. at a wrong capture rate) would overflow the int
      // conversion and index outside the knots (issue 18: a segmentation fault in `run`).
      const double position = d / table->knot_step_m;
      if (position < static_cast<double>(intervals)) {
        const int i = static_cast<int>(position);
        const double* k0 = &table->knots[3 * i];
        const double* k1 = k0 + 3;
        // Quintic Hermite through (V, hV', h^2V'') at both knots (s in [0, 1]).
        const double dv = k1[0] - k0[0];
        const double c3 = 10.0 * dv - 6.0 * k0[1] - 4.0 * k1[1] - 1.5 * k0[2] + 0.5 * k1[2];
        const double c4 = -15.0 * dv + 8.0 * k0[1] + 7.0 * k1[1] + 1.5 * k0[2] - k1[2];
        const double c5 = 6.0 * dv - 3.0 * k0[1] - 3.0 * k1[1] - 0.5 * k0[2] + 0.5 * k1[2];
        const T s = delta_m / table->knot_step_m - static_cast<double>(i);
        return k0[0] + s * (k0[1] + s * (0.5 * k0[2] + s * (c3 + s * (c4 + s * c5))));
      }
    }
    return TorusCapVolume(geometry.free_radius_m - geometry.section_radius_m, geometry.section_radius_m, delta_m);
  }
  return CylinderCapVolume(geometry.free_radius_m, geometry.tread_width_m, delta_m);
}

}  // namespace dropfit::analysis
