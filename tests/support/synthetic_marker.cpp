#include "tests/support/synthetic_marker.h"

#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include <algorithm>
#include <cmath>
#include <stdexcept>

namespace dropfit::test {

cv::Mat RenderSyntheticMarker(cv::Size size, cv::Point2d centre_px, const SyntheticMarkerOptions& o, cv::RNG& rng) {
  if (o.kind != tracker::MarkerKind::kQuadrant && o.kind != tracker::MarkerKind::kDot)
    throw std::invalid_argument("synthetic marker: kind must be quadrant or dot, not " + ToString(o.kind));
  if (!(o.radius_px > 0) || o.supersample < 1 || o.motion_steps < 1)
    throw std::invalid_argument("synthetic marker: radius, supersample and motion_steps must be positive");
  cv::Mat img(size, CV_32F, cv::Scalar(o.background));
  const double cos_r = std::cos(o.rotation_rad), sin_r = std::sin(o.rotation_rad);
  const double dot_level = o.bright_dot ? o.bright : o.dark;
  auto ideal = [&](double x, double y) {
    const double dx = x - centre_px.x, dy = y - centre_px.y;
    if (dx * dx + dy * dy > o.radius_px * o.radius_px) return o.background;
    if (o.kind == tracker::MarkerKind::kDot) return dot_level;
    const double a = cos_r * dx + sin_r * dy, b = -sin_r * dx + cos_r * dy;
    return (a >= 0) == (b >= 0) ? o.dark : o.bright;
  };
  // Only pixels the marker can touch need the supersampled sum.
  const double reach = o.radius_px + 0.5 * cv::norm(o.motion_px) + 2.0;
  const int x0 = std::max(0, static_cast<int>(std::floor(centre_px.x - reach)));
  const int x1 = std::min(size.width - 1, static_cast<int>(std::ceil(centre_px.x + reach)));
  const int y0 = std::max(0, static_cast<int>(std::floor(centre_px.y - reach)));
  const int y1 = std::min(size.height - 1, static_cast<int>(std::ceil(centre_px.y + reach)));
  const int ss = o.supersample, ms = o.motion_steps;
  const double weight = 1.0 / (ss * ss * ms);
  for (int y = y0; y <= y1; ++y) {
    float* row = img.ptr<float>(y);
    for (int x = x0; x <= x1; ++x) {
      double sum = 0;
      for (int m = 0; m < ms; ++m) {
        // Positions evenly spread over the exposure, centred on mid-exposure.
        const double t = ms == 1 ? 0.0 : (m + 0.5) / ms - 0.5;
        const double ox = -t * o.motion_px.x, oy = -t * o.motion_px.y;
        for (int j = 0; j < ss; ++j) {
          for (int i = 0; i < ss; ++i) {
            sum += ideal(x - 0.5 + (i + 0.5) / ss + ox, y - 0.5 + (j + 0.5) / ss + oy);
          }
        }
      }
      row[x] = static_cast<float>(sum * weight);
    }
  }
  if (o.optical_blur_px > 0) cv::GaussianBlur(img, img, cv::Size(), o.optical_blur_px);
  for (int y = 0; y < size.height; ++y) {
    float* row = img.ptr<float>(y);
    for (int x = 0; x < size.width; ++x) {
      double v = row[x] * (1.0 + o.light_gradient_per_px * (x - centre_px.x));
      const double var = o.read_noise * o.read_noise + o.shot_noise_per_level * std::max(0.0, v);
      if (var > 0) v += rng.gaussian(std::sqrt(var));
      row[x] = static_cast<float>(v);
    }
  }
  cv::Mat out;
  img.convertTo(out, CV_8U);  // rounds and saturates
  if (o.jpeg_quality > 0) {
    std::vector<uchar> buf;
    cv::imencode(".jpg", out, buf, {cv::IMWRITE_JPEG_QUALITY, o.jpeg_quality});
    out = cv::imdecode(buf, cv::IMREAD_GRAYSCALE);
  }
  return out;
}

}  // namespace dropfit::test
