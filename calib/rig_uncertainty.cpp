#include "calib/rig_uncertainty.h"

#include <cmath>
#include <stdexcept>

namespace dropfit::calib {

namespace {

// Central-difference step, as a share of each parameter's standard uncertainty: small enough
// that the mapping is linear over it, large enough to stay far above rounding.
constexpr double kStepPerSd = 0.1;

const char* const kDistortionNames[] = {"k1", "k2", "p1", "p2", "k3", "k4", "k5", "k6"};

// The covariance as a matrix, checked against the rig's parameters.
cv::Mat Covariance(const Rig& rig) {
  if (!rig.uncertainty) throw std::invalid_argument("the rig holds no uncertainty (made before dropfit knew it)");
  const size_t n = MappingParameters(rig).size();
  const RigUncertainty& u = *rig.uncertainty;
  if (u.parameters != MappingParameterNames(rig) || u.covariance.size() != n * n) {
    throw std::invalid_argument("the rig's uncertainty covariance does not match its mapping parameters (" +
                                std::to_string(n) + " parameters)");
  }
  return cv::Mat(static_cast<int>(n), static_cast<int>(n), CV_64F, const_cast<double*>(u.covariance.data())).clone();
}

// Derivative of f (values of any length) with respect to every parameter, by central differences
// with steps of kStepPerSd x each parameter's sd (0 where the sd is 0).
template <typename F>
cv::Mat Jacobian(const Rig& rig, const cv::Mat& cov, F f) {
  const std::vector<double> p0 = MappingParameters(rig);
  const std::vector<double> f0 = f(rig);
  cv::Mat j = cv::Mat::zeros(static_cast<int>(f0.size()), static_cast<int>(p0.size()), CV_64F);
  for (size_t k = 0; k < p0.size(); ++k) {
    const double var = cov.at<double>(static_cast<int>(k), static_cast<int>(k));
    if (!(var > 0)) continue;
    const double step = kStepPerSd * std::sqrt(var);
    std::vector<double> p = p0;
    p[k] = p0[k] + step;
    const std::vector<double> fp = f(WithMappingParameters(rig, p));
    p[k] = p0[k] - step;
    const std::vector<double> fm = f(WithMappingParameters(rig, p));
    for (size_t i = 0; i < f0.size(); ++i)
      j.at<double>(static_cast<int>(i), static_cast<int>(k)) = (fp[i] - fm[i]) / (2 * step);
  }
  return j;
}

}  // namespace

std::vector<std::string> MappingParameterNames(const Rig& rig) {
  std::vector<std::string> names{"g11", "g12", "g13", "g21", "g22", "g23", "g31", "g32"};
  if (rig.lens) {
    for (const char* n : {"fx", "fy", "cx", "cy"}) names.emplace_back(n);
    for (size_t i = 0; i < rig.lens->distortion.size() && i < std::size(kDistortionNames); ++i) {
      names.emplace_back(kDistortionNames[i]);
    }
  }
  return names;
}

std::vector<double> MappingParameters(const Rig& rig) {
  const cv::Matx33d g = rig.plane_from_undistorted * (1.0 / rig.plane_from_undistorted(2, 2));
  std::vector<double> p(g.val, g.val + 8);
  if (rig.lens) {
    const cv::Matx33d& k = rig.lens->camera_matrix;
    p.insert(p.end(), {k(0, 0), k(1, 1), k(0, 2), k(1, 2)});
    p.insert(p.end(), rig.lens->distortion.begin(), rig.lens->distortion.end());
  }
  return p;
}

Rig WithMappingParameters(const Rig& rig, const std::vector<double>& p) {
  const size_t n = 8 + (rig.lens ? 4 + rig.lens->distortion.size() : 0);
  if (p.size() != n) {
    throw std::invalid_argument("WithMappingParameters: " + std::to_string(p.size()) +
                                " parameters given, the rig has " + std::to_string(n));
  }
  Rig out = rig;
  for (int i = 0; i < 8; ++i) out.plane_from_undistorted.val[i] = p[static_cast<size_t>(i)];
  out.plane_from_undistorted(2, 2) = 1.0;
  if (out.lens) {
    cv::Matx33d& k = out.lens->camera_matrix;
    k(0, 0) = p[8];
    k(1, 1) = p[9];
    k(0, 2) = p[10];
    k(1, 2) = p[11];
    std::copy(p.begin() + 12, p.end(), out.lens->distortion.begin());
  }
  return out;
}

double MetresPerPxAt(const Rig& rig, cv::Point2d c) {
  const cv::Point2d du = PlaneFromImage(rig, c + cv::Point2d(0.5, 0)) - PlaneFromImage(rig, c - cv::Point2d(0.5, 0));
  const cv::Point2d dv = PlaneFromImage(rig, c + cv::Point2d(0, 0.5)) - PlaneFromImage(rig, c - cv::Point2d(0, 0.5));
  return std::sqrt(std::abs(du.x * dv.y - du.y * dv.x));
}

cv::Matx22d PlanePointCovariance(const Rig& rig, cv::Point2d plane_m) {
  const cv::Mat cov = Covariance(rig);
  const cv::Point2d pixel = ImageFromPlane(rig, plane_m);
  const cv::Mat j = Jacobian(rig, cov, [&](const Rig& r) {
    const cv::Point2d p = PlaneFromImage(r, pixel);
    return std::vector<double>{p.x, p.y};
  });
  const cv::Mat c = j * cov * j.t();
  return cv::Matx22d(c.at<double>(0, 0), c.at<double>(0, 1), c.at<double>(1, 0), c.at<double>(1, 1));
}

double HeightSdAt(const Rig& rig, cv::Point2d plane_m) {
  double var = PlanePointCovariance(rig, plane_m)(1, 1);
  if (rig.y_origin == YOrigin::kFloor) var += std::pow(rig.uncertainty->corner_height_sd_m, 2);
  return std::sqrt(std::max(var, 0.0));
}

double ScaleRelSdAt(const Rig& rig, cv::Point2d image_px) {
  const cv::Mat cov = Covariance(rig);
  const double s = MetresPerPxAt(rig, image_px);
  const cv::Mat j = Jacobian(rig, cov, [&](const Rig& r) { return std::vector<double>{MetresPerPxAt(r, image_px)}; });
  const cv::Mat var = j * cov * j.t();
  return std::sqrt(std::max(var.at<double>(0, 0), 0.0)) / s;
}

double MappedSd(const Rig& rig, const std::function<double(const Rig&)>& f) {
  const cv::Mat cov = Covariance(rig);
  const cv::Mat j = Jacobian(rig, cov, [&](const Rig& r) { return std::vector<double>{f(r)}; });
  const cv::Mat var = j * cov * j.t();
  return std::sqrt(std::max(var.at<double>(0, 0), 0.0));
}

void SummariseUncertainty(Rig& rig) {
  Covariance(rig);  // checks it
  RigUncertainty& u = *rig.uncertainty;
  const cv::Point2d centre(0.5 * (rig.image_size.width - 1), 0.5 * (rig.image_size.height - 1));
  const double x_m = PlaneFromImage(rig, centre).x;
  const double row_m = rig.y_origin == YOrigin::kFloor && rig.corner_height_m ? *rig.corner_height_m : 0.0;
  const auto sd_y = [&](double y_m) { return std::sqrt(std::max(PlanePointCovariance(rig, {x_m, y_m})(1, 1), 0.0)); };
  u.height_sd_at_corner_row_m = sd_y(row_m);
  u.height_sd_100mm_m = sd_y(row_m + 0.1);
  u.height_sd_300mm_m = sd_y(row_m + 0.3);
  u.floor_sd_m.reset();
  if (rig.y_origin == YOrigin::kFloor) {
    u.floor_sd_m = std::sqrt(std::pow(sd_y(0.0), 2) + std::pow(u.corner_height_sd_m, 2));
  }
  u.scale_rel_sd_centre = ScaleRelSdAt(rig, centre);
}

}  // namespace dropfit::calib
