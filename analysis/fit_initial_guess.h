#pragma once
// Starting values for the contact-law fits (analysis/law_fit.h) from the law-free impact
// figures of a bounce: impact speed v, coefficient of restitution e, contact duration t_c and
// maximum deflection delta_max. Every relation here is exact for its idealised impact (a
// mass m hitting a rigid floor at speed v, no gravity during contact); gravity and the
// track's late separation make the measured figures differ from that idealisation by a few
// per cent, which the fit then removes. The published approximate damping-COR relations
// (Hunt & Crossley 1975, Lankarani & Nikravesh 1990, ...) are deliberately NOT used: they
// miss the target COR by up to 0.16 (docs/methods.md §5, table).
//
// Relations (all in SI units):
//  * Kelvin-Voigt, separation where the force returns to zero (Schwager & Poeschel 2007,
//    Granular Matter 9:465-469, eq. 21; docs/methods.md §3b): with zeta = c / (2 sqrt(k m)),
//      underdamped  omega0 t_c = (pi - atan2(2 zeta sqrt(1 - zeta^2), 1 - 2 zeta^2)) / sqrt(1 - zeta^2)
//      critical     omega0 t_c = 2
//      overdamped   omega0 t_c = 2 ln(zeta + Omega) / Omega,  Omega = sqrt(zeta^2 - 1)
//    and e = exp(-zeta omega0 t_c) in every branch; e depends on zeta only, so zeta follows
//    from e (KelvinVoigtZetaFromCor), then omega0 from t_c or from delta_max.
//    Maximum deflection (DERIVED from x(t) = (v/omega_d) exp(-beta t) sin(omega_d t), the
//    no-gravity solution of docs/methods.md §3b; common textbook result):
//      underdamped  delta_max = (v/omega0) exp(-zeta/sqrt(1-zeta^2) atan(sqrt(1-zeta^2)/zeta))
//      critical     delta_max = (v/omega0) / e_Euler
//      overdamped   delta_max = (v/omega0) exp(-zeta/Omega atanh(Omega/zeta))
//  * Multiplicative damping F = K(delta) (1 + alpha delta_dot) (Hunt-Crossley, Hertz,
//    volumetric): the exact COR solves  w - ln(1 + w) = -e w - ln(1 - e w),  w = alpha v,
//    for any K(delta) (docs/methods.md §5, DERIVED there; checked by ODE for n = 1, 1.5, 2).
//    The compression phase gives, also exactly,
//      Int_0^delta_max K(d) dd = m (w - ln(1 + w)) / alpha^2   (-> m v^2 / 2 as alpha -> 0),
//    so for K = k delta^n:  k = (n + 1) m (w - ln(1 + w)) / (alpha^2 delta_max^(n+1)).
//  * Power-law elastic impact: t_c = C_n delta_max / v with C_n = (2/(n+1)) B(1/(n+1), 1/2)
//    (docs/methods.md §4, DERIVED there: C_1 = pi, C_1.5 = 2.943275184, C_2 = 2.804364211);
//    inverting it gives a starting exponent from the measured figures.

#include <optional>
#include <string>
#include <vector>

#include "analysis/contact_law.h"
#include "analysis/geometry.h"

namespace dropfit::analysis {

// Schwager & Poeschel (2007) eq. 21: omega0 t_c and e for a damping ratio zeta >= 0.
double KelvinVoigtOmegaContactTime(double zeta);
double KelvinVoigtCor(double zeta);
// Inverse of KelvinVoigtCor: the damping ratio giving COR e, for 0 < e < 1 (bisection to
// 1e-14). Throws std::invalid_argument for e outside (0, 1).
double KelvinVoigtZetaFromCor(double cor);
// delta_max omega0 / v for a damping ratio zeta >= 0 (no gravity).
double KelvinVoigtDeflectionFactor(double zeta);

// The exact w = alpha v of a multiplicative-damping law for COR e in (0, 1]; 0 for e = 1.
// Throws std::invalid_argument for e outside (0, 1].
double MultiplicativeDampingFromCor(double cor);
// Its inverse: the exact COR for w = alpha v >= 0.
double CorFromMultiplicativeDamping(double w);

// C_n = (2/(n+1)) B(1/(n+1), 1/2) for n > 0.
double PowerLawContactTimeConstant(double n);
// Inverse of C_n on [kHuntCrossleyExponentMin, kHuntCrossleyExponentMax] = [0.5, 4] (C_n
// decreases with n): clamped to that range when c is outside [C_4, C_0.5].
double PowerLawExponentFromContactTimeConstant(double c);

// The law-free figures of one bounce from which a fit starts. NaN (or <= 0) = not known.
struct ImpactGuessFigures {
  double impact_speed_mps = 0.0;    // > 0
  double cor = 0.0;                 // (0, 1]
  double contact_duration_s = 0.0;  // track-only; late by ~1 ms
  double max_deflection_m = 0.0;    // onset height - lowest hub height
};

// Starting law parameters (ParameterNames(law) order) for the law, one set per start of a
// multi-start. The first start is the preferred one. Returns nothing with a reason when the
// figures do not allow any start (no speed, or neither a deflection nor a duration).
//   mass_kg            dropped mass, > 0.
//   tread              the volumetric law's geometry.
struct InitialGuess {
  std::vector<std::vector<double>> starts;
  std::string note;  // how the values were obtained (which figures were used)
};
struct InitialGuessResult {
  std::optional<InitialGuess> guess;
  std::string failure;  // set when guess is empty
};
InitialGuessResult GuessLawParameters(LawId law, const ImpactGuessFigures& figures, double mass_kg,
                                      const TreadGeometry& tread);

}  // namespace dropfit::analysis
