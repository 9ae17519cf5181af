#pragma once
// The conditions of a drop that every analysis of it shares: the dropped mass, the gravity it
// falls under and the tread that meets the floor (for the volumetric law), as one value.

#include "analysis/constants.h"
#include "analysis/geometry.h"

namespace dropfit::analysis {

struct DropConditions {
  double mass_kg = 0.0;                        // dropped mass [kg], > 0
  double gravity_mps2 = kStandardGravityMps2;  // standard or local gravity [m/s^2], (0, 100]
  TreadGeometry tread;                         // MakeTreadGeometry (radius 0: no tread known)
};

}  // namespace dropfit::analysis
