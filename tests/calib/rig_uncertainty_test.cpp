// Tests of the rig's uncertainty (calib/rig_uncertainty.h, calibrate_steps.h step 5).
//
// References: the definition of a standard uncertainty checked by Monte Carlo, JCGM 101:2008
// ("Evaluation of measurement data - Supplement 1 to the GUM: propagation of distributions
// using a Monte Carlo method"; title from memory): repeat the fit on corners with known Gaussian
// noise and compare the spread of the results with the linearised propagation. And OpenCV 4.6's
// cv::calibrateCamera, which returns the standard deviations of the intrinsics it fitted
// (stdDeviationsIntrinsics), as the reference for the lens fit's covariance.
#include "calib/rig_uncertainty.h"

#include <gtest/gtest.h>
#include <opencv2/calib3d.hpp>

#include <algorithm>
#include <cfloat>
#include <cmath>
#include <random>
#include <vector>

#include "calib/calibrate_steps.h"
#include "tests/support/synthetic_board.h"

namespace dropfit::calib {
namespace {

using test::PoseLookingAt;
using test::SyntheticCamera;

const BoardSpec kBoard{9, 6, 0.025};
constexpr int kRealisations = 200;
// Monte-Carlo sd from 200 realisations: its own relative sd is 1/sqrt(2 x 199) = 5 %; 15 % is 3x.
constexpr double kMonteCarloTolFraction = 0.15;
// Mean of s^2 over 200 fits with 2 x 54 - 8 = 100 degrees of freedom each: relative sd
// sqrt(2 / 100) / sqrt(200) = 1 %; 5 % is 5x.
constexpr double kVarianceMeanTolFraction = 0.05;
// Our Jacobian and OpenCV's agree to the rounding of a 75 x 75 inverse and OpenCV's own
// convergence; a different Jacobian or parameter count would show by several per cent.
constexpr double kOpenCvSdTolFraction = 0.002;

// A camera without distortion looking at the board from 1.44 m, slightly turned: ~1.2 mm/px.
struct PlaneScene {
  SyntheticCamera cam;
  cv::Matx33d undistorted_from_board;
  std::vector<cv::Point2d> corners_px;
};
PlaneScene MakePlaneScene() {
  PlaneScene s;
  s.cam.size = cv::Size(800, 640);
  s.cam.camera_matrix = cv::Matx33d(1200, 0, 402.7, 0, 1200, 317.4, 0, 0, 1);
  s.cam.distortion.clear();
  cv::Vec3d rvec, tvec;
  PoseLookingAt(s.cam, kBoard, 400, 520, 1.44, 0.05, 0.03, 0.02, rvec, tvec);
  cv::Matx33d r;
  cv::Rodrigues(rvec, r);
  const cv::Matx33d rt(r(0, 0), r(0, 1), tvec[0], r(1, 0), r(1, 1), tvec[1], r(2, 0), r(2, 1), tvec[2]);
  s.undistorted_from_board = s.cam.camera_matrix * rt;
  s.undistorted_from_board *= 1.0 / s.undistorted_from_board(2, 2);
  for (const cv::Point3f& b : BoardPoints3d(kBoard)) {
    const cv::Vec3d q = s.undistorted_from_board * cv::Vec3d(b.x, b.y, 1);
    s.corners_px.emplace_back(q[0] / q[2], q[1] / q[2]);
  }
  return s;
}

TEST(RigUncertaintyTest, PropagatedSdOfAMappedPointMatchesTheMonteCarloSpreadOfRepeatedFits) {
  // JCGM 101:2008: the spread of the mapped point over repeated fits to corners with known noise
  // is the standard uncertainty the linearised propagation must give.
  const PlaneScene scene = MakePlaneScene();
  constexpr double kSigmaPx = 0.1;
  const size_t n = scene.corners_px.size();
  // The rig maps undistorted pixels to board coordinates (plane_from_board = identity).
  Rig rig;
  rig.image_size = scene.cam.size;
  rig.plane_from_undistorted = scene.undistorted_from_board.inv();
  rig.plane_from_undistorted *= 1.0 / rig.plane_from_undistorted(2, 2);
  PlaneHomography exact{scene.undistorted_from_board, kSigmaPx * std::sqrt((2.0 * n - 8) / n)};
  rig.uncertainty =
      EstimateRigUncertainty(rig, std::vector<cv::Point2f>(scene.corners_px.begin(), scene.corners_px.end()), kBoard,
                             exact, cv::Matx33d::eye(), std::nullopt, 0.0);
  ASSERT_NEAR(rig.uncertainty->plane_corner_sd_px, kSigmaPx, 1e-12);
  // On the board, just outside it, and far outside (the board's own -Y is up in this view).
  const std::vector<cv::Point2d> points{{0.1, 0.06}, {0.1, -0.1}, {0.1, -0.3}, {-0.2, 0.2}};
  std::vector<std::vector<cv::Point2d>> mapped(points.size());
  std::mt19937_64 rng(20240514);
  std::normal_distribution<double> noise(0.0, kSigmaPx);
  double s2_sum = 0;
  for (int r = 0; r < kRealisations; ++r) {
    std::vector<cv::Point2f> noisy;
    for (const cv::Point2d& c : scene.corners_px) noisy.emplace_back(c.x + noise(rng), c.y + noise(rng));
    const std::optional<PlaneHomography> fit = FitPlaneHomography(noisy, kBoard, std::nullopt);
    ASSERT_TRUE(fit);
    s2_sum += std::pow(CornerSdFromRms(fit->rms_px, n, 8), 2);
    const cv::Matx33d inv = fit->undistorted_from_board.inv();
    for (size_t i = 0; i < points.size(); ++i) {
      const cv::Vec3d u = scene.undistorted_from_board * cv::Vec3d(points[i].x, points[i].y, 1);
      const cv::Vec3d p = inv * u;
      mapped[i].emplace_back(p[0] / p[2], p[1] / p[2]);
    }
  }
  EXPECT_NEAR(s2_sum / kRealisations, kSigmaPx * kSigmaPx, kVarianceMeanTolFraction * kSigmaPx * kSigmaPx);
  for (size_t i = 0; i < points.size(); ++i) {
    cv::Point2d mean(0, 0);
    for (const cv::Point2d& p : mapped[i]) mean += p * (1.0 / kRealisations);
    double vx = 0, vy = 0;
    for (const cv::Point2d& p : mapped[i]) {
      vx += (p.x - mean.x) * (p.x - mean.x) / (kRealisations - 1);
      vy += (p.y - mean.y) * (p.y - mean.y) / (kRealisations - 1);
    }
    const cv::Matx22d cov = PlanePointCovariance(rig, points[i]);
    SCOPED_TRACE("point (" + std::to_string(points[i].x) + ", " + std::to_string(points[i].y) + ")");
    EXPECT_NEAR(std::sqrt(vx), std::sqrt(cov(0, 0)), kMonteCarloTolFraction * std::sqrt(cov(0, 0)));
    EXPECT_NEAR(std::sqrt(vy), std::sqrt(cov(1, 1)), kMonteCarloTolFraction * std::sqrt(cov(1, 1)));
  }
}

TEST(RigUncertaintyTest, LensIntrinsicsSdsAreThoseOpenCvReports) {
  SyntheticCamera cam;
  const double poses[][6] = {{560, 430, 0.70, 0.03, -0.05, 0.0},  {300, 230, 0.50, 0.45, -0.35, 0.1},
                             {720, 230, 0.50, 0.45, 0.35, -0.1},  {300, 540, 0.50, -0.45, -0.35, -0.05},
                             {720, 540, 0.50, -0.45, 0.35, 0.05}, {512, 384, 0.45, 0.0, 0.6, 0.0},
                             {512, 384, 0.45, 0.6, 0.0, 0.0},     {512, 384, 0.55, 0.25, 0.25, 1.5707963}};
  std::mt19937_64 rng(7);
  std::normal_distribution<double> noise(0.0, 0.05);
  std::vector<std::vector<cv::Point2f>> corners;
  for (const auto& p : poses) {
    cv::Vec3d rvec, tvec;
    PoseLookingAt(cam, kBoard, p[0], p[1], p[2], p[3], p[4], p[5], rvec, tvec);
    std::vector<cv::Point2f> c;
    cv::projectPoints(BoardPoints3d(kBoard), rvec, tvec, cam.camera_matrix, cam.distortion, c);
    for (cv::Point2f& q : c) q += cv::Point2f(static_cast<float>(noise(rng)), static_cast<float>(noise(rng)));
    corners.push_back(c);
  }
  const std::vector<std::vector<cv::Point3f>> object(corners.size(), BoardPoints3d(kBoard));
  const LensFit fit = FitLens(object, corners, cam.size);
  const LensCovariance ours = LensIntrinsicsCovariance(fit, corners, kBoard);
  // OpenCV's fit of the same term set, with its standard deviations.
  int flags = 0;
  if (fit.terms == "k1") flags = cv::CALIB_FIX_K2 | cv::CALIB_FIX_K3 | cv::CALIB_ZERO_TANGENT_DIST;
  if (fit.terms == "k1,k2") flags = cv::CALIB_FIX_K3 | cv::CALIB_ZERO_TANGENT_DIST;
  if (fit.terms == "k1,k2,p1,p2") flags = cv::CALIB_FIX_K3;
  cv::Mat k, dist, sd_intrinsics, sd_extrinsics, per_view;
  std::vector<cv::Mat> rvecs, tvecs;
  cv::calibrateCamera(object, corners, cam.size, k, dist, rvecs, tvecs, sd_intrinsics, sd_extrinsics, per_view, flags,
                      cv::TermCriteria(cv::TermCriteria::COUNT | cv::TermCriteria::EPS, 100, DBL_EPSILON));
  SCOPED_TRACE("terms " + fit.terms);
  // OpenCV 4.6 estimates the noise variance as RSS / (N - P), N the corners (measured here: its
  // sds are ours x sqrt((2N - P) / (N - P)) to the tolerance); ours is RSS / (2N - P), the
  // unbiased estimate for 2N coordinates. Compared after that factor.
  const int corner_count = static_cast<int>(corners.size() * corners[0].size());
  const int terms = static_cast<int>(std::count(fit.terms.begin(), fit.terms.end(), ',')) + 1;
  const int params = 4 + terms + 6 * static_cast<int>(corners.size());
  const double convention = std::sqrt((corner_count - params) / (2.0 * corner_count - params));
  for (int i = 0; i < 9; ++i) {
    const double theirs = convention * sd_intrinsics.at<double>(i);
    const double mine = std::sqrt(ours.intrinsics.at<double>(i, i));
    SCOPED_TRACE("intrinsic " + std::to_string(i));
    if (theirs == 0) {
      EXPECT_EQ(mine, 0.0);
    } else {
      EXPECT_NEAR(mine, theirs, kOpenCvSdTolFraction * theirs);
    }
  }
}

TEST(RigUncertaintyTest, ARigWhoseCovarianceDoesNotMatchItsParametersIsRefused) {
  Rig rig;
  rig.image_size = cv::Size(800, 640);
  rig.plane_from_undistorted = cv::Matx33d(1e-3, 0, -0.4, 0, -1e-3, 0.3, 0, 0, 1);
  RigUncertainty u;
  u.parameters = MappingParameterNames(rig);
  u.covariance.assign(8 * 8, 0.0);
  rig.uncertainty = u;
  EXPECT_FALSE(ValidateRig(rig));
  rig.uncertainty->covariance.pop_back();
  EXPECT_TRUE(ValidateRig(rig));
  EXPECT_THROW(PlanePointCovariance(rig, {0.1, 0.1}), std::invalid_argument);
}

}  // namespace
}  // namespace dropfit::calib
