// Tread geometry for the volumetric law, checked against docs/methods.md §7a-§7b.
#include "analysis/geometry.h"

#include <ceres/jet.h>
#include <gtest/gtest.h>

#include <cmath>
#include <random>
#include <stdexcept>

namespace dropfit::analysis {
namespace {

// Table values are printed to 10 significant digits (rounded in the last one).
constexpr double kTableRelative = 1e-9;

// docs/methods.md §7a: circular-segment area, handbook formula (which handbook FROM MEMORY),
// verified there against quadrature to 1e-15.
TEST(Geometry, CircularSegmentAreaMatchesTheHandbookTable) {
  struct Row {
    double r, d, area;
  };
  const Row rows[] = {{0.25, 0.005, 3.323315406e-4},
                      {0.25, 0.010, 9.371318255e-4},
                      {0.25, 0.020, 2.634434465e-3},
                      {0.30, 0.010, 1.027616112e-3},
                      {1.0, 0.5, 0.6141848493},
                      {1.0, 1.0, M_PI / 2.0},
                      {1.0, 2.0, M_PI}};
  for (const Row& row : rows) {
    EXPECT_NEAR(CircularSegmentArea(row.r, row.d), row.area, kTableRelative * row.area) << row.r << " " << row.d;
    // The handbook form itself, evaluated directly.
    const double direct = row.r * row.r * std::acos((row.r - row.d) / row.r) -
                          (row.r - row.d) * std::sqrt(2 * row.r * row.d - row.d * row.d);
    EXPECT_NEAR(CircularSegmentArea(row.r, row.d), direct, 1e-13 * row.area);
  }
  EXPECT_EQ(CircularSegmentArea(0.3, -0.01), 0.0);
  EXPECT_DOUBLE_EQ(CircularSegmentArea(0.3, 0.7), M_PI * 0.09);
}

TEST(Geometry, SmallDepthSeriesJoinsTheClosedFormSmoothly) {
  // The series branch (d < 1e-3 r) and the closed form agree across the switch; both tend to
  // (4/3) sqrt(2r) d^{3/2} (docs/methods.md §7a small-depth limit).
  const double r = 0.25;
  const double below = CircularSegmentArea(r, 0.999999e-3 * r);
  const double above = CircularSegmentArea(r, 1.000001e-3 * r);
  const double slope = 2.0 * std::sqrt(1e-3 * r * (2.0 * r - 1e-3 * r));  // dA/dd
  EXPECT_NEAR(above - below, slope * 2e-9 * r, 1e-12 * below);
  const double d = 1e-9;
  EXPECT_NEAR(CircularSegmentArea(r, d), 4.0 / 3.0 * std::sqrt(2.0 * r) * std::pow(d, 1.5),
              1e-8 * CircularSegmentArea(r, d));
}

TEST(Geometry, SegmentAreaJetDerivativeIsTheChordLength) {
  // dA/dd = 2 sqrt(d (2r - d)): the chord at depth d (calculus on the handbook formula).
  using Jet = ceres::Jet<double, 1>;
  for (double d : {1e-6, 1e-4, 0.005, 0.1, 0.4}) {
    const Jet area = CircularSegmentArea(0.25, Jet(d, 0));
    EXPECT_NEAR(area.v[0], 2.0 * std::sqrt(d * (0.5 - d)), 1e-10 * area.v[0]) << d;
  }
}

// docs/methods.md §7b (DERIVED there; 1-D and 2-D quadrature and Monte-Carlo agree):
// torus R = 0.25 m, a = 0.05 m.
TEST(Geometry, TorusCapVolumeMatchesTheQuadratureTable) {
  const double depths_mm[] = {1, 5, 10, 20, 50};
  const double volumes[] = {3.835351258e-7, 9.465030870e-6, 3.723994233e-5, 1.439478429e-4, 8.024347326e-4};
  for (int i = 0; i < 5; ++i) {
    const double v = TorusCapVolume(0.25, 0.05, depths_mm[i] * 1e-3);
    EXPECT_NEAR(v, volumes[i], kTableRelative * volumes[i]) << depths_mm[i] << " mm";
  }
  // Pressed to the axle plane: exactly half the torus, pi^2 R a^2 (docs/methods.md §7b).
  EXPECT_NEAR(TorusCapVolume(0.25, 0.05, 0.30), M_PI * M_PI * 0.25 * 0.05 * 0.05, 1e-9 * 0.0062);
  // Small-depth limit pi sqrt(a (R + a)) delta^2 (osculating paraboloid).
  const double tiny = 1e-6;
  EXPECT_NEAR(TorusCapVolume(0.25, 0.05, tiny), M_PI * std::sqrt(0.05 * 0.30) * tiny * tiny,
              1e-3 * M_PI * std::sqrt(0.05 * 0.30) * tiny * tiny);
}

TEST(Geometry, TorusVolumeIsContinuousAcrossTheSectionRadius) {
  // The quadrature switches form at delta = a (inner ring starts to cut); volume and slope
  // must not jump there.
  const double below = TorusCapVolume(0.25, 0.05, 0.05 - 1e-9);
  const double at = TorusCapVolume(0.25, 0.05, 0.05);
  const double above = TorusCapVolume(0.25, 0.05, 0.05 + 1e-9);
  EXPECT_NEAR(at - below, above - at, 1e-6 * (above - at));
  // Deep presses (past a, and past 2a) stay monotone.
  double previous = 0.0;
  for (double d = 0.001; d < 0.3; d += 0.001) {
    const double v = TorusCapVolume(0.25, 0.05, d);
    EXPECT_GT(v, previous) << d;
    previous = v;
  }
}

TEST(Geometry, TorusJetDerivativeMatchesFiniteDifference) {
  using Jet = ceres::Jet<double, 1>;
  for (double d : {0.001, 0.01, 0.03, 0.07, 0.12}) {
    const Jet v = TorusCapVolume(0.25, 0.05, Jet(d, 0));
    const double h = 1e-7;
    const double numeric = (TorusCapVolume(0.25, 0.05, d + h) - TorusCapVolume(0.25, 0.05, d - h)) / (2 * h);
    EXPECT_NEAR(v.v[0], numeric, 1e-7 * numeric) << d;
  }
}

TEST(Geometry, ManifestGeometryFollowsTheContract) {
  // Contract: torus when a section radius is given (wins over the width), else a cylinder of
  // the given width, else a cylinder of unit width, and the result says so.
  const TreadGeometry torus = MakeTreadGeometry(0.3, 0.1, 0.05);
  EXPECT_EQ(torus.shape, TreadShape::kTorus);
  EXPECT_DOUBLE_EQ(torus.section_radius_m, 0.05);
  const TreadGeometry cylinder = MakeTreadGeometry(0.3, 0.1, 0.0);
  EXPECT_EQ(cylinder.shape, TreadShape::kCylinder);
  EXPECT_DOUBLE_EQ(cylinder.tread_width_m, 0.1);
  const TreadGeometry unit = MakeTreadGeometry(0.3, 0.0, 0.0);
  EXPECT_EQ(unit.shape, TreadShape::kCylinder);
  EXPECT_DOUBLE_EQ(unit.tread_width_m, 1.0);
  EXPECT_NE(unit.note.find("assumed a cylinder of unit width"), std::string::npos) << unit.note;
  EXPECT_FALSE(Validate(unit).has_value());
  EXPECT_THROW(MakeTreadGeometry(0.3, 0.0, 0.4), std::invalid_argument);
  EXPECT_EQ(TreadShapeFromString(ToString(TreadShape::kTorus)), TreadShape::kTorus);
  try {
    TreadShapeFromString("sphere");
    FAIL() << "no exception";
  } catch (const std::invalid_argument& e) {
    EXPECT_STREQ(e.what(), "unknown tread shape 'sphere'; valid: cylinder, torus");
  }
  TreadGeometry bad;
  bad.free_radius_m = -1.0;
  EXPECT_EQ(Validate(bad), "tread geometry: free_radius_m = -1 is outside (0, 10] m");
}

TEST(Geometry, TabulatedTorusVolumeAgreesWithTheQuadrature) {
  // The fitter's fast path (quintic Hermite table) against the quadrature it was built from,
  // and against docs/methods.md §7b's table.
  constexpr double kTableAgreement = 1e-10;  // relative; the interpolation error is ~ (1/64)^6
  const TreadGeometry tabulated = MakeTreadGeometry(0.30, 0.0, 0.05);
  ASSERT_NE(tabulated.torus_table, nullptr);
  std::mt19937 generator(20240611);
  std::uniform_real_distribution<double> depth(1e-5, 0.0499);
  for (int i = 0; i < 200; ++i) {
    const double d = depth(generator);
    const double exact = TorusCapVolume(0.25, 0.05, d);
    EXPECT_NEAR(InterpenetrationVolume(tabulated, d), exact, kTableAgreement * exact) << d;
  }
  EXPECT_NEAR(InterpenetrationVolume(tabulated, 0.010), 3.723994233e-5, kTableRelative * 3.723994233e-5);
  // Jet derivative of the table is the patch area dV/ddelta.
  using Jet = ceres::Jet<double, 1>;
  const Jet v = InterpenetrationVolume(tabulated, Jet(0.012, 0));
  const Jet exact = TorusCapVolume(0.25, 0.05, Jet(0.012, 0));
  EXPECT_NEAR(v.v[0], exact.v[0], 1e-8 * exact.v[0]);
  // Past the table (delta >= a) the quadrature takes over.
  EXPECT_DOUBLE_EQ(InterpenetrationVolume(tabulated, 0.06), TorusCapVolume(0.25, 0.05, 0.06));
}

TEST(Geometry, ADepthFarBeyondTheTorusTableIsClampedNotIndexedOutside) {
  // Regression (issue 18): with a capture rate 2x too high, a law fit tried depths of ~1e10 m;
  // the table's knot index overflowed its int conversion and `run` died in a segmentation fault.
  // The contract (analysis/geometry.h): depths beyond R + a are clamped there (the floor through
  // the axle), so the volume is half the torus, pi^2 R a^2 (Pappus's centroid theorem for the whole
  // torus, 2 pi^2 R a^2; common practice, no source).
  constexpr double kHalfTorusRelative = 1e-9;  // the quadrature's accuracy at the clamp
  const TreadGeometry tabulated = MakeTreadGeometry(0.10, 0.0, 0.025);
  ASSERT_NE(tabulated.torus_table, nullptr);
  const double whole = M_PI * M_PI * 0.075 * 0.025 * 0.025;  // half the torus
  for (double depth : {1.0, 1e10, 3e9, 1e300, HUGE_VAL}) {
    EXPECT_NEAR(InterpenetrationVolume(tabulated, depth), whole, kHalfTorusRelative * whole) << depth;
  }
  EXPECT_TRUE(std::isnan(InterpenetrationVolume(tabulated, std::nan(""))));
}

}  // namespace
}  // namespace dropfit::analysis
