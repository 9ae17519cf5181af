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

#include <string>
#include <vector>

namespace dropfit::analysis {

enum class LawId { kKelvinVoigt, kHuntCrossley, kHertz, kBilinear, kVolumetric };

// All laws, in the order results list them.
const std::vector<LawId>& AllLaws();

// "kelvin-voigt", "hunt-crossley", "hertz", "bilinear", "volumetric".
std::string ToString(LawId law);
// Throws std::invalid_argument naming the unknown id and listing the valid ones.
LawId LawIdFromString(const std::string& text);

// The parameter names the contract fixes for each law, in a fixed order.
const std::vector<std::string>& ParameterNames(LawId law);

}  // namespace dropfit::analysis
