#include "analysis/geometry.h"

#include <ceres/jet.h>

#include <algorithm>
#include <array>
#include <cmath>
#include <sstream>
#include <stdexcept>

namespace dropfit::analysis {

namespace detail {
namespace {

struct GaussLegendreRule {
  std::array<double, kTorusQuadratureNodes> nodes{};
  std::array<double, kTorusQuadratureNodes> weights{};
};

// Nodes are the roots of P_n found by Newton from the Chebyshev-like initial guess
// cos(pi (i + 3/4)/(n + 1/2)); weights 2/((1 - x^2) P_n'(x)^2). Mapped from [-1, 1] to [0, 1].
GaussLegendreRule MakeRule() {
  GaussLegendreRule rule;
  const int n = kTorusQuadratureNodes;
  for (int i = 0; i < n; ++i) {
    double x = std::cos(M_PI * (i + 0.75) / (n + 0.5));
    double derivative = 0.0;
    for (int iteration = 0; iteration < 100; ++iteration) {
      double p0 = 1.0;
      double p1 = x;
      for (int k = 2; k <= n; ++k) {
        const double p2 = ((2.0 * k - 1.0) * x * p1 - (k - 1.0) * p0) / k;
        p0 = p1;
        p1 = p2;
      }
      derivative = n * (x * p1 - p0) / (x * x - 1.0);
      const double step = p1 / derivative;
      x -= step;
      if (std::abs(step) < 1e-16) break;
    }
    rule.nodes[i] = 0.5 * (1.0 - x);
    rule.weights[i] = 0.5 * 2.0 / ((1.0 - x * x) * derivative * derivative);
  }
  return rule;
}

const GaussLegendreRule& Rule() {
  static const GaussLegendreRule rule = MakeRule();
  return rule;
}

}  // namespace

const double* GaussLegendreUnitNodes() { return Rule().nodes.data(); }
const double* GaussLegendreUnitWeights() { return Rule().weights.data(); }

}  // namespace detail

std::string ToString(TreadShape shape) {
  switch (shape) {
    case TreadShape::kCylinder:
      return "cylinder";
    case TreadShape::kTorus:
      return "torus";
  }
  throw std::logic_error("tread shape missing from ToString");
}

TreadShape TreadShapeFromString(const std::string& text) {
  if (text == "cylinder") return TreadShape::kCylinder;
  if (text == "torus") return TreadShape::kTorus;
  throw std::invalid_argument("unknown tread shape '" + text + "'; valid: cylinder, torus");
}

std::optional<std::string> Validate(const TreadGeometry& geometry) {
  std::ostringstream message;
  if (!(geometry.free_radius_m > 0.0 && geometry.free_radius_m <= 10.0)) {
    message << "tread geometry: free_radius_m = " << geometry.free_radius_m << " is outside (0, 10] m";
  } else if (geometry.shape == TreadShape::kCylinder &&
             !(geometry.tread_width_m > 0.0 && geometry.tread_width_m <= 10.0)) {
    message << "tread geometry: tread_width_m = " << geometry.tread_width_m << " is outside (0, 10] m";
  } else if (geometry.shape == TreadShape::kTorus &&
             !(geometry.section_radius_m > 0.0 && geometry.section_radius_m < geometry.free_radius_m)) {
    message << "tread geometry: section_radius_m = " << geometry.section_radius_m
            << " must be positive and below free_radius_m = " << geometry.free_radius_m;
  }
  if (message.str().empty()) return std::nullopt;
  return message.str();
}

void AttachTorusTable(TreadGeometry& geometry) {
  if (geometry.shape != TreadShape::kTorus) {
    geometry.torus_table.reset();
    return;
  }
  if (const auto problem = Validate(geometry))
    throw std::invalid_argument(*problem + "; fix the tread geometry before tabulating it");
  constexpr int kIntervals = 64;
  auto table = std::make_shared<TorusVolumeTable>();
  table->centre_radius_m = geometry.free_radius_m - geometry.section_radius_m;
  table->section_radius_m = geometry.section_radius_m;
  table->knot_step_m = geometry.section_radius_m / kIntervals;
  const double h = table->knot_step_m;
  const double big_r = table->centre_radius_m, a = table->section_radius_m;
  // V and V' by the quadrature in Jets; V'' by a central difference of V' (step 1e-5 a:
  // truncation ~1e-10, rounding ~1e-11 relative; V'' enters the interpolant scaled by h^2).
  using Jet = ceres::Jet<double, 1>;
  auto slope = [&](double delta) { return TorusCapVolume(big_r, a, Jet(delta, 0)).v[0]; };
  table->knots.reserve(3 * (kIntervals + 1));
  for (int i = 0; i <= kIntervals; ++i) {
    const double delta = i * h;
    if (i == 0) {
      // V = pi sqrt(a (R + a)) delta^2 + O(delta^3): V(0) = V'(0) = 0, V''(0) = 2 pi sqrt(a (R + a)).
      table->knots.insert(table->knots.end(), {0.0, 0.0, h * h * 2.0 * M_PI * std::sqrt(a * (big_r + a))});
      continue;
    }
    // The last knot (delta = a) sits on the quadrature's branch point: evaluate just below it.
    const double at = i == kIntervals ? delta * (1.0 - 1e-13) : delta;
    const double eta = 1e-5 * a;
    const Jet v = TorusCapVolume(big_r, a, Jet(at, 0));
    const double curvature = (slope(std::min(at + eta, a * (1.0 - 1e-13))) - slope(at - eta)) /
                             (std::min(at + eta, a * (1.0 - 1e-13)) - (at - eta));
    table->knots.insert(table->knots.end(), {v.a, h * v.v[0], h * h * curvature});
  }
  geometry.torus_table = std::move(table);
}

TreadGeometry MakeTreadGeometry(double free_radius_m, double tread_width_m, double section_radius_m) {
  TreadGeometry geometry;
  std::string note = "volumetric law: ";
  bool assumed_radius = false;
  if (free_radius_m > 0.0) {
    geometry.free_radius_m = free_radius_m;
  } else {
    geometry.free_radius_m = 1.0;
    assumed_radius = true;
  }
  if (section_radius_m > 0.0) {
    if (section_radius_m >= geometry.free_radius_m) {
      std::ostringstream message;
      message << "section_radius_m = " << section_radius_m << " must be below the free radius "
              << geometry.free_radius_m << " m; give a smaller tyre section radius";
      throw std::invalid_argument(message.str());
    }
    geometry.shape = TreadShape::kTorus;
    geometry.section_radius_m = section_radius_m;
    std::ostringstream text;
    text << "torus tread, section radius " << section_radius_m << " m";
    note += text.str();
  } else if (tread_width_m > 0.0) {
    geometry.shape = TreadShape::kCylinder;
    geometry.tread_width_m = tread_width_m;
    std::ostringstream text;
    text << "cylinder tread, width " << tread_width_m << " m";
    note += text.str();
  } else {
    geometry.shape = TreadShape::kCylinder;
    geometry.tread_width_m = 1.0;
    note += "no tread width or section radius given; assumed a cylinder of unit width (1 m)";
    geometry.unknown = "no tread width or section radius given";
  }
  if (assumed_radius) {
    note += "; free radius unknown, assumed 1 m (kv then depends on this assumption)";
    geometry.unknown += std::string(geometry.unknown.empty() ? "" : ", ") + "no free radius given";
  } else {
    std::ostringstream text;
    text << "; free radius " << geometry.free_radius_m << " m";
    note += text.str();
  }
  geometry.note = note;
  AttachTorusTable(geometry);
  return geometry;
}

}  // namespace dropfit::analysis
