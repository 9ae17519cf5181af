#pragma once
// Contact-law identities and parameter names, as fixed by the output contract.
//
// Sign convention (stated once, here): penetration delta_m >= 0 is how far the hub is below
// the contact-onset height; its rate delta_dot_mps > 0 while compressing. The contact force
// is upward (positive) and never tensile: it is max(0, F(delta, delta_dot)).
//
// Laws (ids as written in result files):
//   kelvin-voigt   F = k delta + c delta_dot                       k_n_per_m, c_ns_per_m
//   hunt-crossley  F = k delta^n (1 + alpha delta_dot)             k, n, alpha_s_per_m
//                  (Hunt & Crossley 1975; their damping coefficient is alpha*k)
//   hertz          the same with n = 1.5 fixed                      k, n (reported), alpha_s_per_m
//   bilinear       F = k1 delta (delta <= knee),
//                      k1 knee + k2 (delta - knee) beyond, + c delta_dot
//                                                                   k1_n_per_m, k2_n_per_m, knee_m, c_ns_per_m
//   volumetric     F = kv V(delta) (1 + a delta_dot)               kv_n_per_m3, a_s_per_m
//                  (Gonthier et al. 2004; V the interpenetration volume of the tread)
//   bottoming      F = (k delta + k3 <delta - knee>^3) (1 + a delta_dot)
//                                                                   k_n_per_m, k3_n_per_m3, knee_m, a_s_per_m
//                  a rendering truth outside the fitted laws (never fitted): a tyre whose
//                  stiffness grows with the cube of the deflection beyond a knee, as when it
//                  bottoms on its rim, with damping proportional to the force (to the
//                  deflection below the knee); <x> = max(x, 0)

#include <optional>
#include <string>
#include <vector>

#include "analysis/geometry.h"

namespace dropfit::analysis {

enum class LawId { kKelvinVoigt, kHuntCrossley, kHertz, kBilinear, kVolumetric, kBottoming };

// The fitted laws, in the order results list them (bottoming is not among them).
const std::vector<LawId>& AllLaws();
// Every law the forward model and the renderer know: AllLaws() and bottoming.
const std::vector<LawId>& RenderableLaws();

// "kelvin-voigt", "hunt-crossley", "hertz", "bilinear", "volumetric".
std::string ToString(LawId law);
// Throws std::invalid_argument naming the unknown id and listing the valid ones.
LawId LawIdFromString(const std::string& text);

// The parameter names the contract fixes for each law, in a fixed order.
const std::vector<std::string>& ParameterNames(LawId law);

// ---------------------------------------------------------------------------------------
// Force evaluation.
//
// Parameter arrays hold the law's parameters in ParameterNames(law) order, in the units of
// those names:
//   kelvin-voigt   {k_n_per_m, c_ns_per_m}
//   hunt-crossley  {k [N/m^n], n [-], alpha_s_per_m}
//   hertz          {k [N/m^1.5], n (must be 1.5; the force always uses 1.5), alpha_s_per_m}
//   bilinear       {k1_n_per_m, k2_n_per_m, knee_m, c_ns_per_m}
//   volumetric     {kv_n_per_m3, a_s_per_m}   (+ the TreadGeometry, which is data)
//   bottoming      {k_n_per_m, k3_n_per_m3, knee_m, a_s_per_m}
// Valid ranges (checked by ValidateLawParameters): stiffnesses > 0 and finite; damping
// c, alpha, a >= 0; kHuntCrossleyExponentMin <= n <= kHuntCrossleyExponentMax (hunt-crossley);
// n == 1.5 (hertz); knee_m > 0.
//
// Equations and sources:
//   kelvin-voigt   F = k delta + c delta_dot (linear spring-dashpot; with separation where
//                  F returns to zero: Schwager & Poeschel 2007, Granular Matter 9, eq. 21).
//   hunt-crossley  F = k delta^n (1 + alpha delta_dot)  (Hunt & Crossley 1975, ASME J. Appl.
//                  Mech. 42:440-445; their damping coefficient lambda = alpha k).
//   hertz          F = k delta^1.5 (1 + alpha delta_dot) (Hertz contact of a sphere;
//                  K. L. Johnson, Contact Mechanics 1985, section 11.4, FROM MEMORY).
//   bilinear       F = S(delta) + c delta_dot, S = k1 delta for delta <= knee,
//                  k1 knee + k2 (delta - knee) beyond (continuous; common practice, no source).
//   volumetric     F = kv V(delta) (1 + a delta_dot), V the interpenetration volume of the
//                  tread (Gonthier et al. 2004, Multibody Syst. Dyn. 11:209-233; equation
//                  number unconfirmed). With no geometry a cylinder of unit width.
constexpr int kMaxLawParameters = 4;

// The range of the hunt-crossley exponent n, for rendering and fitting alike. n = 1 is the
// linear Hunt-Crossley law (Hunt & Crossley 1975 treat the general power), n = 1.5 Hertz;
// exponents below 1 describe contacts that stiffen less than linearly with the deflection
// (softening, e.g. foam-like or conforming contacts), above 2 contacts that stiffen sharply.
// [0.5, 4] covers those with room to spare (docs/methods.md §13; common practice, no source).
constexpr double kHuntCrossleyExponentMin = 0.5;
constexpr double kHuntCrossleyExponentMax = 4.0;

// Number of parameters of the law (= ParameterNames(law).size()).
int ParameterCount(LawId law);

// Empty string when the parameters are valid for the law; otherwise a message naming the
// law, the parameter and its value, e.g. "hunt-crossley: n = 7 is outside [0.5, 4]".
std::optional<std::string> ValidateLawParameters(LawId law, const std::vector<double>& params);

// The law's force before clamping, F_raw(delta, delta_dot) in newtons, for delta > 0.
// For delta <= 0 it returns a smooth odd continuation (the power-law and volumetric terms
// become -K(-delta); the linear ones stay linear) so that an integrator may evaluate stages
// just past separation; callers that want the physical force use ContactForce.
// `params` points to ParameterCount(law) values. `geometry` is used by volumetric only.
template <typename T>
T UnclampedContactForce(LawId law, const T* params, const TreadGeometry& geometry, const T& delta_m,
                        const T& delta_dot_mps);

// The physical contact force: 0 for delta <= 0, else max(0, F_raw). Never tensile.
template <typename T>
T ContactForce(LawId law, const T* params, const TreadGeometry& geometry, const T& delta_m, const T& delta_dot_mps);

// The elastic part S(delta) = F_raw(delta, 0) >= 0 (delta >= 0), e.g. for the static
// deflection m g = S(delta_static).
template <typename T>
T ElasticContactForce(LawId law, const T* params, const TreadGeometry& geometry, const T& delta_m);

// True for the laws whose force factors as K(delta) (1 + d delta_dot) (hunt-crossley, hertz,
// volumetric): their force is zero exactly where delta = 0 or 1 + d delta_dot = 0.
// False for the additive laws (kelvin-voigt, bilinear): F = S(delta) + c delta_dot.
bool IsMultiplicativeDamping(LawId law);

}  // namespace dropfit::analysis

#include "analysis/contact_law_detail.h"
