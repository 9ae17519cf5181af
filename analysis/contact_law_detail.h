#pragma once
// Template definitions for analysis/contact_law.h (read that header for the meaning).

#include <cassert>
#include <cmath>

#include "analysis/geometry.h"

namespace dropfit::analysis {
namespace detail {

// sign(delta) |delta|^n: the odd continuation of delta^n; exactly 0 (with zero derivative)
// at delta == 0, where pow's derivative with respect to n would be 0 * log(0).
template <typename T, typename N>
T SignedPower(const T& delta, const N& n) {
  using std::pow;
  const double d = ScalarValue(delta);
  if (d > 0.0) return pow(delta, n);
  if (d < 0.0) return -pow(-delta, n);
  return T(0.0);
}

// The damping factor d of a multiplicative law F = K(delta) (1 + d delta_dot).
template <typename T>
const T& MultiplicativeDamping(LawId law, const T* params) {
  assert(IsMultiplicativeDamping(law));
  if (law == LawId::kBottoming) return params[3];
  return law == LawId::kVolumetric ? params[1] : params[2];
}

// The damping c of an additive law F = S(delta) + c delta_dot.
template <typename T>
const T& AdditiveDamping(LawId law, const T* params) {
  assert(!IsMultiplicativeDamping(law));
  return law == LawId::kBilinear ? params[3] : params[1];
}

}  // namespace detail

template <typename T>
T ElasticContactForce(LawId law, const T* params, const TreadGeometry& geometry, const T& delta_m) {
  switch (law) {
    case LawId::kKelvinVoigt:
      return params[0] * delta_m;
    case LawId::kHuntCrossley:
      return params[0] * detail::SignedPower(delta_m, params[1]);
    case LawId::kHertz:
      return params[0] * detail::SignedPower(delta_m, 1.5);
    case LawId::kBilinear: {
      const T& knee = params[2];
      if (detail::ScalarValue(delta_m) <= detail::ScalarValue(knee)) return params[0] * delta_m;
      return params[0] * knee + params[1] * (delta_m - knee);
    }
    case LawId::kVolumetric: {
      if (detail::ScalarValue(delta_m) >= 0.0) return params[0] * InterpenetrationVolume(geometry, delta_m);
      return -params[0] * InterpenetrationVolume(geometry, T(-delta_m));
    }
    case LawId::kBottoming: {
      const T beyond = delta_m - params[2];
      if (detail::ScalarValue(beyond) <= 0.0) return params[0] * delta_m;
      return params[0] * delta_m + params[1] * beyond * beyond * beyond;
    }
  }
  assert(false && "unknown law");
  return T(0.0);
}

template <typename T>
T UnclampedContactForce(LawId law, const T* params, const TreadGeometry& geometry, const T& delta_m,
                        const T& delta_dot_mps) {
  const T elastic = ElasticContactForce(law, params, geometry, delta_m);
  switch (law) {
    case LawId::kKelvinVoigt:
      return elastic + params[1] * delta_dot_mps;
    case LawId::kHuntCrossley:
    case LawId::kHertz:
      return elastic * (1.0 + params[2] * delta_dot_mps);
    case LawId::kBilinear:
      return elastic + params[3] * delta_dot_mps;
    case LawId::kVolumetric:
      return elastic * (1.0 + params[1] * delta_dot_mps);
    case LawId::kBottoming:
      return elastic * (1.0 + params[3] * delta_dot_mps);
  }
  assert(false && "unknown law");
  return T(0.0);
}

template <typename T>
T ContactForce(LawId law, const T* params, const TreadGeometry& geometry, const T& delta_m, const T& delta_dot_mps) {
  if (detail::ScalarValue(delta_m) <= 0.0) return T(0.0);
  const T force = UnclampedContactForce(law, params, geometry, delta_m, delta_dot_mps);
  if (detail::ScalarValue(force) <= 0.0) return T(0.0);
  return force;
}

}  // namespace dropfit::analysis
