#pragma once
// The rig's standard uncertainty: how far a height the rig maps may be off because the
// calibration's corners were measured with noise (docs/methods.md §18).
//
// Method (linearised least-squares propagation; Hartley & Zisserman 2004, "Multiple View
// Geometry in Computer Vision", 2nd ed., ch. 5, "Covariance of the estimated transformation":
// the covariance of parameters fitted by least squares is sigma^2 (J^T J)^-1, and a function of
// them gets J_f Sigma J_f^T; chapter and wording FROM MEMORY):
// 1. The plane view's homography board -> undistorted pixels (8 parameters, H(2,2) = 1) is
//    fitted to N corners: Sigma_h = s_p^2 (J_h^T J_h)^-1, J_h the 2N x 8 Jacobian of the projected
//    corners, s_p^2 = RSS / (2N - 8) from the fit's own residuals.
// 2. With a lens model, its intrinsics theta = (fx, fy, cx, cy, distortion...) were fitted to all
//    lens views: Sigma_theta = s_l^2 [(J^T J)^-1] restricted to the intrinsics, J over every view's
//    corners and every free parameter (intrinsics fitted plus 6 pose parameters per view), from
//    cv::projectPoints' Jacobian, s_l^2 = RSS / (2N - P). A change of theta moves the plane
//    view's undistorted corners (D = d corners / d theta) and so the homography:
//    dh = (J_h^T J_h)^-1 J_h^T D dtheta (the Gauss-Newton sensitivity at the optimum).
//    The plane view's own corners also enter the lens fit; that correlation is neglected.
// 3. The rig's mapping parameters are g = plane_from_undistorted (8, g(2,2) = 1) and theta:
//    g = P_b H^-1 normalised, P_b the fixed board -> plane axes and origin. Their joint
//    covariance (stored in the rig) is
//      Sigma_gg = A (Sigma_h + S Sigma_theta S^T) A^T,  Sigma_g,theta = A S Sigma_theta,
//    A = dg/dh, S = dh/dtheta.
// 4. A plane point's covariance is J Sigma J^T, J the derivative of PlaneFromImage at its pixel
//    with respect to (g, theta) (central differences, steps of 0.1 sd of each parameter). The
//    height above the floor adds the corner height's variance (the hand measurement,
//    `--corner-height-sd`), independent of the rest.
// The unit test checks step 1 against the Monte-Carlo spread of repeated fits (JCGM 101:2008,
// propagation of distributions by Monte Carlo) and step 2 against OpenCV's own
// stdDeviationsIntrinsics.

#include <opencv2/core.hpp>

#include <functional>
#include <string>
#include <vector>

#include "calib/rig.h"

namespace dropfit::calib {

// The mapping's parameters: g11 g12 g13 g21 g22 g23 g31 g32 of plane_from_undistorted scaled to
// g33 = 1, then, with a lens, fx fy cx cy and the distortion coefficients in OpenCV's order
// (k1 k2 p1 p2 [k3 [k4 k5 k6]]).
std::vector<std::string> MappingParameterNames(const Rig& rig);
std::vector<double> MappingParameters(const Rig& rig);
// The rig with its mapping parameters replaced (same order and count; throws
// std::invalid_argument otherwise).
Rig WithMappingParameters(const Rig& rig, const std::vector<double>& parameters);

// Scale at an image point [m/px]: the square root of the area, in the plane, of one pixel there
// (PlaneFromImage half a pixel either side along u and v).
double MetresPerPxAt(const Rig& rig, cv::Point2d image_px);

// Covariance [m^2] of the plane point the rig maps at the pixel where `plane_m` is seen
// (mapping only). Throws std::invalid_argument when the rig has no uncertainty or its
// covariance does not match the mapping's parameters.
cv::Matx22d PlanePointCovariance(const Rig& rig, cv::Point2d plane_m);

// Standard uncertainty [m] of the height y_m the rig maps at plane point `plane_m`: the mapping's,
// and with y_origin "floor" the corner height's in quadrature. The onset height's prior uses it.
// Throws as PlanePointCovariance.
double HeightSdAt(const Rig& rig, cv::Point2d plane_m);

// Relative standard uncertainty [-] of MetresPerPxAt(rig, image_px). Throws as PlanePointCovariance.
double ScaleRelSdAt(const Rig& rig, cv::Point2d image_px);

// Standard uncertainty of any function of the rig's mapping, f(rig), from the mapping's
// covariance (step 4's J Sigma J^T with J of f by central differences). E.g. the ratio of two
// heights mapped at different pixels, which a uniform scale error leaves alone but a
// non-uniform one does not. Throws as PlanePointCovariance.
double MappedSd(const Rig& rig, const std::function<double(const Rig&)>& f);

// Fills the summary figures of rig.uncertainty (heights at the image's horizontal centre, floor,
// scale) from its covariance and corner_height_sd_m. Throws as PlanePointCovariance.
void SummariseUncertainty(Rig& rig);

}  // namespace dropfit::calib
