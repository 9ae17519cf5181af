#pragma once
// Tread geometry for the volumetric contact law: how much of the unloaded tread lies below
// the floor plane when the hub is pressed a depth delta_m below the contact-onset height.
//
// Conventions (as in analysis/contact_law.h): delta_m >= 0 is the penetration of the
// unloaded tread outline into the rigid floor, i.e. how far the hub is below the height at
// which the tread first touches. The wheel axle is horizontal and parallel to the floor;
// the drop plane (x_m, y_m) is perpendicular to the axle.
//
// Shapes:
//   cylinder  a straight tread of radius r = free_radius_m and width tread_width_m.
//             V(delta) = w * A(r, delta), with A the circular-segment area below.
//   torus     a tyre whose cross-section is a circle of radius a = section_radius_m; the
//             tube's centre circle has radius R = free_radius_m - a around the axle, so the
//             outer radius is R + a = free_radius_m.
//             V(delta) by Gauss-Legendre quadrature of slice areas (docs/methods.md
//             §7b, DERIVED there): slices perpendicular to the axle at lateral offset y are
//             annuli with radii R +- sqrt(a^2 - y^2); the part of each annulus below the
//             floor line is A(r+, r+ - h) - A(r-, r- - h), h = R + a - delta the axle-to-floor
//             distance, and V = integral over y in [-a, a]. After the substitution
//             y = y_e sin(theta) the integrand is analytic on the interval (for delta < a), so
//             24 nodes reproduce §7b's table to 1e-9 relative or better (16 would miss the
//             delta = a row, where the integrand has an end-point singularity).
//             Small-depth limit: V ~ pi sqrt(a (R + a)) delta^2 (osculating paraboloid).
//
// The geometry functions are templated on the scalar type so that the contact-law fitter can
// differentiate through them with ceres::Jet; the geometry itself (radii, width) is data,
// only the depth is differentiated.

#include <cmath>
#include <memory>
#include <optional>
#include <string>
#include <vector>

namespace dropfit::analysis {

enum class TreadShape { kCylinder, kTorus };

// "cylinder", "torus".
std::string ToString(TreadShape shape);
// Throws std::invalid_argument naming the unknown string and listing the valid ones.
TreadShape TreadShapeFromString(const std::string& text);

// The tread the volumetric law assumes. Fields:
//   shape              cylinder or torus.
//   free_radius_m      unloaded radius, hub centre to the outermost tread point; (0, 10] m.
//   tread_width_m      cylinder only: tread width; (0, 10] m. Default 1 m (the contract's
//                      "cylinder of unit width" when the manifest gives no geometry).
//   section_radius_m   torus only: cross-section radius a; 0 < a < free_radius_m.
//   note               human-readable statement of what was assumed (written into results).
//   torus_table        optional cache (filled by MakeTreadGeometry / AttachTorusTable):
//                      V(delta) of the torus tabulated for 0 <= delta < a as a piecewise
//                      quintic Hermite interpolant of V, V', V'' at 64 knots (relative error
//                      < 1e-10, checked in the test), about 20x cheaper than the quadrature
//                      inside the fitter. Without it, or for delta >= a, the quadrature is used.
struct TorusVolumeTable {
  double centre_radius_m = 0.0;
  double section_radius_m = 0.0;
  double knot_step_m = 0.0;
  std::vector<double> knots;  // per knot: V, h V', h^2 V'' (h = knot_step_m)
};
struct TreadGeometry {
  TreadShape shape = TreadShape::kCylinder;
  double free_radius_m = 1.0;
  double tread_width_m = 1.0;
  double section_radius_m = 0.0;
  std::string note;
  std::shared_ptr<const TorusVolumeTable> torus_table;
  // Why the geometry is not the specimen's (MakeTreadGeometry assumed the width or the radius);
  // empty when known. The volumetric law is then not fitted nor ranked (analysis/law_fit.h).
  std::string unknown;
};

// Fills geometry.torus_table for a torus tread (no-op for a cylinder). Call again after
// changing the radii by hand.
void AttachTorusTable(TreadGeometry& geometry);

// Empty string when valid, otherwise a message naming the offending field and value.
std::optional<std::string> Validate(const TreadGeometry& geometry);

// The geometry the volumetric law uses for a manifest row, following the contract:
// a torus when section_radius_m > 0 (wins over the width), else a cylinder of the given
// width, else a cylinder of unit width (1 m). When the free radius is unknown (<= 0 passed),
// a radius of 1 m is assumed. Non-positive values mean "not given". `note` says which of
// these assumptions were made (and a torus gets its volume table), e.g. "volumetric law: no tread width or section
// radius given; assumed a cylinder of unit width (1 m)". Throws std::invalid_argument on a section radius not below the
// free radius.
TreadGeometry MakeTreadGeometry(double free_radius_m, double tread_width_m, double section_radius_m);

// Area of a circular segment of a circle of radius r cut off by a chord at depth d below
// the top of the circle (d measured inward from the circle, 0 <= d <= 2r):
//   A(d) = r^2 acos((r - d)/r) - (r - d) sqrt(2 r d - d^2)      (handbook formula,
//   docs/methods.md §7a; which handbook FROM MEMORY).
// Evaluated as 2 r^2 asin(sqrt(d/(2r))) - (r - d) sqrt(d (2r - d)), and by its series
// (4/3) sqrt(2r) d^{3/2} (1 - 3d/(20r) - ...) for d < 1e-3 r, which avoids cancellation.
// Returns 0 for d <= 0 and pi r^2 for d >= 2r. dA/dd = 2 sqrt(d (2r - d)).
template <typename T>
T CircularSegmentArea(double radius_m, const T& depth_m);

// Cylinder tread: V = w A(r, delta), r = free radius, w = width.
template <typename T>
T CylinderCapVolume(double radius_m, double width_m, const T& delta_m);

// Torus tread with tube centre-circle radius R and section radius a, pressed delta into the
// floor (0 <= delta <= R + a; clamped there). See the header comment for the method.
template <typename T>
T TorusCapVolume(double centre_radius_m, double section_radius_m, const T& delta_m);

// Interpenetration volume for the given tread: dispatches to the two functions above.
// Returns 0 for delta <= 0.
template <typename T>
T InterpenetrationVolume(const TreadGeometry& geometry, const T& delta_m);

}  // namespace dropfit::analysis

#include "analysis/geometry_detail.h"
