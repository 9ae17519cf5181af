#include "analysis/gravity_ruler.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <sstream>
#include <stdexcept>

#include "analysis/flight_fit.h"

namespace dropfit::analysis {

namespace {

constexpr double kNan = std::numeric_limits<double>::quiet_NaN();

int NextValid(const TimeSeries& s, int i, int step, int stop) {
  while (i != stop && !s.valid[static_cast<size_t>(i)]) i += step;
  return i;
}

// Step 2: the window with its departing ends trimmed; nothing when too few samples are left.
std::optional<std::pair<int, int>> TrimWindow(const TimeSeries& s, int first, int last, const GravityRulerOptions& o) {
  first = NextValid(s, first, 1, last + 1);
  last = NextValid(s, last, -1, first - 1);
  while (first <= last) {
    const std::optional<PolynomialFit> fit = FitPolynomial(s.t_s, s.y_m, s.valid, first, last, 2);
    if (!fit || fit->samples < o.min_flight_samples) return std::nullopt;
    std::vector<double> abs_res;
    for (int i = first; i <= last; ++i) {
      if (s.valid[static_cast<size_t>(i)])
        abs_res.push_back(std::abs(s.y_m[static_cast<size_t>(i)] - fit->Value(s.t_s[static_cast<size_t>(i)])));
    }
    // A nanometre floor: an exact parabola's residuals are rounding alone. abs_res is not empty
    // (the fit holds min_flight_samples); RobustSd is the robust noise sd (docs/methods.md §20).
    const double limit = std::max(o.trim_sigmas * RobustSd(abs_res), 1e-9);
    const double r_first = std::abs(s.y_m[static_cast<size_t>(first)] - fit->Value(s.t_s[static_cast<size_t>(first)]));
    const double r_last = std::abs(s.y_m[static_cast<size_t>(last)] - fit->Value(s.t_s[static_cast<size_t>(last)]));
    if (std::max(r_first, r_last) <= limit) return std::make_pair(first, last);
    if (r_first >= r_last) {
      first = NextValid(s, first + 1, 1, last + 1);
    } else {
      last = NextValid(s, last - 1, -1, first - 1);
    }
  }
  return std::nullopt;
}

// Step 2's release: the first sample after the fitted apex plus the margin, when the apex lies
// inside the window (twice, refitted in between); `first` otherwise.
int AfterRelease(const TimeSeries& s, int first, int last, const GravityRulerOptions& o) {
  for (int pass = 0; pass < 2; ++pass) {
    const std::optional<PolynomialFit> fit = FitPolynomial(s.t_s, s.y_m, s.valid, first, last, 2);
    if (!fit || !(fit->coef[2] < 0)) break;
    const double t_apex = fit->t_ref_s - fit->coef[1] / (2 * fit->coef[2]);
    if (!(t_apex > s.t_s[static_cast<size_t>(first)])) break;
    int next = first;
    while (next < last && s.t_s[static_cast<size_t>(next)] < t_apex + o.release_margin_s) ++next;
    if (next == first) break;
    first = next;
  }
  return first;
}

std::optional<FlightAcceleration> AccelerationOver(const TimeSeries& s, int first, int last) {
  const std::optional<PolynomialFit> fy = FitPolynomial(s.t_s, s.y_m, s.valid, first, last, 2);
  const std::optional<PolynomialFit> fx = FitPolynomial(s.t_s, s.x_m, s.valid, first, last, 2);
  if (!fy || !fx) return std::nullopt;
  const double ay = 2 * fy->coef[2], ax = 2 * fx->coef[2];
  const double var_ay = 4 * fy->covariance(2, 2), var_ax = 4 * fx->covariance(2, 2);
  const double a = std::hypot(ax, ay);
  if (!(a > 0) || !std::isfinite(a)) return std::nullopt;
  FlightAcceleration out;
  out.first_index = first;
  out.last_index = last;
  out.samples = fy->samples;
  out.accel_mps2 = a;
  out.accel_sd_mps2 = std::sqrt((ax * ax * var_ax + ay * ay * var_ay) / (a * a));
  return out;
}

// The pooled acceleration of fixed windows.
PooledValue PooledAcceleration(const TimeSeries& s, const std::vector<std::pair<int, int>>& windows) {
  std::vector<double> values, sds;
  for (const auto& [first, last] : windows) {
    if (const std::optional<FlightAcceleration> a = AccelerationOver(s, first, last)) {
      values.push_back(a->accel_mps2);
      sds.push_back(a->accel_sd_mps2);
    }
  }
  return PoolInverseVariance(values, sds);
}

}  // namespace

std::optional<std::string> ValidateGravityRulerOptions(const GravityRulerOptions& o) {
  std::ostringstream msg;
  if (!(o.gravity_mps2 > 0 && o.gravity_mps2 <= 100)) {
    msg << "gravity " << o.gravity_mps2 << " m/s^2 is outside (0, 100]";
  } else if (!(o.trim_sigmas >= 2 && o.trim_sigmas <= 10)) {
    msg << "trim_sigmas " << o.trim_sigmas << " is outside [2, 10]";
  } else if (o.min_flight_samples < 5 || o.min_flight_samples > 10000) {
    msg << "min_flight_samples " << o.min_flight_samples << " is outside [5, 10000]";
  } else if (!(o.release_margin_s >= 0 && o.release_margin_s <= 0.1)) {
    msg << "release_margin_s " << o.release_margin_s << " is outside [0, 0.1]";
  } else if (!(o.apply_sigmas >= 0 && o.apply_sigmas <= 100)) {
    msg << "apply_sigmas " << o.apply_sigmas << " is outside [0, 100]";
  } else if (!(o.max_offset_fraction > 0 && o.max_offset_fraction < 1)) {
    msg << "max_offset_fraction " << o.max_offset_fraction << " is outside (0, 1)";
  } else {
    return std::nullopt;
  }
  return msg.str();
}

std::vector<FlightAcceleration> MeasureFlightAccelerations(const TimeSeries& series,
                                                           const std::vector<FlightWindow>& windows,
                                                           const GravityRulerOptions& options) {
  if (auto msg = ValidateGravityRulerOptions(options)) throw std::invalid_argument("gravity ruler: " + *msg);
  std::vector<FlightAcceleration> out;
  for (const FlightWindow& w : windows) {
    const int first = w.first_index, last = w.last_index;
    if (first < 0 || last >= series.size() || first > last) {
      throw std::invalid_argument("gravity ruler: flight window " + std::to_string(first) + ".." +
                                  std::to_string(last) + " lies outside the series of " +
                                  std::to_string(series.size()) + " samples");
    }
    const int start = w.cut_by_clip_start ? AfterRelease(series, first, last, options) : first;
    const std::optional<std::pair<int, int>> trimmed = TrimWindow(series, start, last, options);
    if (!trimmed) continue;
    if (const std::optional<FlightAcceleration> a = AccelerationOver(series, trimmed->first, trimmed->second))
      out.push_back(*a);
  }
  return out;
}

PooledValue PoolInverseVariance(const std::vector<double>& values, const std::vector<double>& sds) {
  PooledValue p;
  // Exact values (sd 0) outweigh all others: their plain mean, sd 0.
  double exact_sum = 0;
  int exact = 0;
  for (size_t i = 0; i < values.size() && i < sds.size(); ++i) {
    if (sds[i] == 0 && std::isfinite(values[i])) {
      exact_sum += values[i];
      ++exact;
    }
  }
  if (exact > 0) {
    p.value = exact_sum / exact;
    p.sd = 0;
    p.count = exact;
    return p;
  }
  double w_sum = 0, wx_sum = 0;
  for (size_t i = 0; i < values.size() && i < sds.size(); ++i) {
    if (!(sds[i] > 0) || !std::isfinite(values[i]) || !std::isfinite(sds[i])) continue;
    const double w = 1.0 / (sds[i] * sds[i]);
    w_sum += w;
    wx_sum += w * values[i];
    ++p.count;
  }
  if (p.count == 0) {
    p.value = p.sd = kNan;
    return p;
  }
  p.value = wx_sum / w_sum;
  p.sd = std::sqrt(1.0 / w_sum);
  if (p.count > 1) {
    double chi2 = 0;
    for (size_t i = 0; i < values.size() && i < sds.size(); ++i) {
      if (!(sds[i] > 0) || !std::isfinite(values[i]) || !std::isfinite(sds[i])) continue;
      chi2 += std::pow((values[i] - p.value) / sds[i], 2);
    }
    p.birge_ratio = std::sqrt(chi2 / (p.count - 1));
    if (p.birge_ratio > 1) p.sd *= p.birge_ratio;
  }
  return p;
}

MarkerOffsetEstimate EstimateMarkerOffset(const SeriesAtOffset& series_at, double start_offset_m,
                                          const std::vector<FlightWindow>& windows,
                                          const GravityRulerOptions& options) {
  if (auto msg = ValidateGravityRulerOptions(options)) throw std::invalid_argument("gravity ruler: " + *msg);
  MarkerOffsetEstimate e;
  e.offset_m = e.sd_m = e.accel_mps2 = e.accel_sd_mps2 = kNan;
  const TimeSeries start = series_at(start_offset_m);
  std::vector<std::pair<int, int>> trimmed;
  for (const FlightAcceleration& f : MeasureFlightAccelerations(start, windows, options))
    trimmed.emplace_back(f.first_index, f.last_index);
  e.flights = static_cast<int>(trimmed.size());
  if (trimmed.empty()) {
    e.failure = "no flight long enough to measure its acceleration (" + std::to_string(options.min_flight_samples) +
                " samples or more)";
    return e;
  }
  const PooledValue a0 = PooledAcceleration(start, trimmed);
  e.accel_mps2 = a0.value;
  e.accel_sd_mps2 = a0.sd;
  e.birge_ratio = a0.birge_ratio;
  const double g = options.gravity_mps2;
  const double step_m = 1e-3;
  double d = start_offset_m;
  PooledValue a = a0;
  double slope = kNan;
  for (int iteration = 0; iteration < 20; ++iteration) {
    const PooledValue up = PooledAcceleration(series_at(d + step_m), trimmed);
    const PooledValue down = PooledAcceleration(series_at(d - step_m), trimmed);
    slope = (up.value - down.value) / (2 * step_m);
    if (!(std::abs(slope) > 0) || !std::isfinite(slope) || !std::isfinite(a.value)) {
      e.failure = "the flight acceleration does not change with the marker plane's offset";
      return e;
    }
    const double next = d - (a.value - g) / slope;
    if (!std::isfinite(next)) break;
    const bool converged = std::abs(next - d) < 1e-9;
    d = next;
    a = PooledAcceleration(series_at(d), trimmed);
    if (converged) break;
  }
  e.offset_m = d;
  e.sd_m = a.sd / std::abs(slope);
  if (!std::isfinite(e.offset_m)) e.failure = "the offset estimate did not converge";
  return e;
}

MarkerOffsetEstimate PoolMarkerOffsets(const std::vector<MarkerOffsetEstimate>& estimates) {
  std::vector<double> values, sds;
  for (const MarkerOffsetEstimate& e : estimates) {
    if (e.failure) continue;
    values.push_back(e.offset_m);
    sds.push_back(e.sd_m);
  }
  const PooledValue p = PoolInverseVariance(values, sds);
  MarkerOffsetEstimate out;
  out.offset_m = p.value;
  out.sd_m = p.sd;
  out.accel_mps2 = out.accel_sd_mps2 = kNan;
  out.flights = p.count;
  out.birge_ratio = p.birge_ratio;
  if (p.count == 0) out.failure = "no clip gave an estimate";
  return out;
}

OffsetVerdict JudgeMarkerOffset(const MarkerOffsetEstimate& e, double camera_distance_m,
                                const GravityRulerOptions& options) {
  if (e.failure || !std::isfinite(e.offset_m) || !std::isfinite(e.sd_m)) return OffsetVerdict::kNoEstimate;
  if (std::abs(e.offset_m) > options.max_offset_fraction * camera_distance_m) return OffsetVerdict::kOutOfRange;
  if (!(std::abs(e.offset_m) > options.apply_sigmas * e.sd_m)) return OffsetVerdict::kNotSignificant;
  return OffsetVerdict::kApply;
}

}  // namespace dropfit::analysis
