#include "analysis/time_series.h"

#include <cmath>
#include <limits>
#include <sstream>
#include <stdexcept>

namespace dropfit::analysis {

int TimeSeries::CountValid() const {
  int n = 0;
  for (bool v : valid) n += v ? 1 : 0;
  return n;
}

TimeSeries MakeTimeSeries(int frames, double capture_fps, int first_frame) {
  if (!(std::isfinite(capture_fps) && capture_fps > 0.0) || frames < 0) {
    std::ostringstream msg;
    msg << "MakeTimeSeries: need a finite capture rate > 0 and frames >= 0, got capture_fps = " << capture_fps
        << ", frames = " << frames;
    throw std::invalid_argument(msg.str());
  }
  TimeSeries series;
  series.frame_interval_s = 1.0 / capture_fps;
  series.first_frame = first_frame;
  const double nan = std::numeric_limits<double>::quiet_NaN();
  series.t_s.resize(static_cast<size_t>(frames));
  series.x_m.assign(static_cast<size_t>(frames), nan);
  series.y_m.assign(static_cast<size_t>(frames), nan);
  series.valid.assign(static_cast<size_t>(frames), false);
  for (int i = 0; i < frames; ++i) series.t_s[static_cast<size_t>(i)] = (first_frame + i) / capture_fps;
  return series;
}

std::optional<std::string> ValidateTimeSeries(const TimeSeries& series) {
  std::ostringstream msg;
  if (!(std::isfinite(series.frame_interval_s) && series.frame_interval_s > 0.0)) {
    msg << "frame_interval_s must be finite and > 0, got " << series.frame_interval_s;
    return msg.str();
  }
  const size_t n = series.t_s.size();
  if (series.x_m.size() != n || series.y_m.size() != n || series.valid.size() != n) {
    msg << "time series vectors differ in size: t_s " << n << ", x_m " << series.x_m.size() << ", y_m "
        << series.y_m.size() << ", valid " << series.valid.size();
    return msg.str();
  }
  for (size_t i = 0; i < n; ++i) {
    // Times must lie on the frame grid (to 1e-6 of a frame: rounding only).
    const double expected = series.t_s[0] + static_cast<double>(i) * series.frame_interval_s;
    if (!std::isfinite(series.t_s[i]) || std::abs(series.t_s[i] - expected) > 1e-6 * series.frame_interval_s) {
      msg << "sample " << i << ": t_s = " << series.t_s[i] << " s is not on the frame grid (expected " << expected
          << " s); samples must be consecutive frames";
      return msg.str();
    }
    if (series.valid[i] && !(std::isfinite(series.x_m[i]) && std::isfinite(series.y_m[i]))) {
      msg << "sample " << i << " is marked valid but has a non-finite coordinate (x_m = " << series.x_m[i]
          << ", y_m = " << series.y_m[i] << ")";
      return msg.str();
    }
  }
  return std::nullopt;
}

std::vector<Gap> FindGaps(const TimeSeries& series) {
  std::vector<Gap> gaps;
  const int n = series.size();
  int i = 0;
  while (i < n) {
    if (series.valid[static_cast<size_t>(i)]) {
      ++i;
      continue;
    }
    Gap gap{i, 0};
    while (i < n && !series.valid[static_cast<size_t>(i)]) {
      ++gap.count;
      ++i;
    }
    gaps.push_back(gap);
  }
  return gaps;
}

}  // namespace dropfit::analysis
