#pragma once
// The steps of SegmentBounces (analysis/impacts.h), public for their unit tests. The method,
// its numbered steps and their sources are described in analysis/impacts.h and
// docs/methods.md §11; each declaration below names the step it implements. Users of the
// segmentation call SegmentBounces; these functions are not a stable interface.
//
// Units: times in s, heights in m (the frame of TimeSeries::y_m, up positive), sample indices
// into the series (0-based, ranges inclusive).

#include <limits>
#include <optional>
#include <string>
#include <vector>

#include "analysis/time_series.h"

namespace dropfit::analysis::detail {

// Step 1: the position noise sd [m] from the third differences of the valid heights.
// A third difference d3 = y[i+3] - 3 y[i+2] + 3 y[i+1] - y[i] is zero on a parabola (free
// flight) and has variance (1 + 9 + 9 + 1) s^2 = 20 s^2 for white noise of sd s; the sd is
// taken from the median absolute d3 (MAD x 1.4826 for a normal distribution, so that the few
// contacts do not count): s = 1.4826 median|d3| / sqrt(20) (common practice, no source;
// docs/methods.md §11 item 1). Never below 1e-9 m (noise-free synthetic tracks). NaN when
// fewer than 10 runs of four consecutive valid samples exist.
double NoiseFromThirdDifferences(const TimeSeries& series);

// Step 2: one coarse contact: a run of samples whose filtered acceleration departs upward
// from the flight's, bridged over short interruptions.
//   first, last   the run's samples (inclusive);
//   lowest        the lowest valid raw sample within half a filter window of the run.
struct ContactRun {
  int first = 0;
  int last = -1;
  int lowest = 0;
};

// Step 2: the coarse contacts of a track (docs/methods.md §11 item 2).
//   contacts       the runs that are bounces (a fall before, a rise after, the hub more than
//                  10 noise sd higher somewhere before and after the lowest sample), in
//                  clip order.
//   release_end    last sample of non-flight motion (a hub held, then released) before the
//                  first bounce; -1 when there is none.
//   filter_window  the Savitzky-Golay window [samples, odd, 5..41] used for the
//                  acceleration: the smallest whose acceleration noise is at most g/3.
//   failure        set (and contacts empty) when the median acceleration is not downward, or
//                  when no run is a bounce; the message says what to check.
struct CoarseContacts {
  std::vector<ContactRun> contacts;
  int release_end = -1;
  int filter_window = 5;
  std::optional<std::string> failure;
};
// noise_sd_m: position noise [m] (step 1); gravity_mps2: expected flight acceleration
// magnitude [m/s^2], > 0. A sample is in contact when its acceleration exceeds the median
// acceleration (the flight's, about -g) by more than max(5 sd_a, |median| / 2), sd_a the
// filter's acceleration noise at that sample.
CoarseContacts FindCoarseContacts(const TimeSeries& series, double noise_sd_m, double gravity_mps2);

// Step 3: the range in which the flight between two coarse contacts may be fitted, one per
// gap between contacts (contacts.size() + 1 in all, the first and last cut by the clip).
//   lo, hi            allowed samples: strictly between the neighbouring contacts' lowest
//                     samples (the clip's ends for the first and last);
//   core_lo, core_hi  the samples away from the coarse contacts by a margin of
//                     max(filter_window / 2, half the run's length) (the first from the
//                     release on): where growing starts when the onset height is unknown;
//   cut_start, cut_end  no contact before / after it in the clip.
struct FlightWindow {
  int lo = 0, hi = -1;
  int core_lo = 0, core_hi = -1;
  bool cut_start = false, cut_end = false;
};
std::vector<FlightWindow> FlightWindows(const CoarseContacts& contacts, int samples);

// Steps 4 and 5: the departure model d(t) = A x^p for x > 0 (0 otherwise), x = t - t0 when
// `forward` (contact onset: d is the data minus the falling parabola after the flight
// window) or x = t0 - t (separation: the data minus the rising parabola, going back in
// time). A >= 0 by linear least squares for each (t0, p); p in {2, 2.5, 3, 3.5, 4} (a force
// growing as delta^n adds a displacement growing as (t - t0)^(n + 2); a damper's step as
// (t - t0)^2: docs/methods.md §11 item 4); t0 on a grid of step_s over [t_lo, t_hi], then
// on a 10x finer grid around the best. sd_s: half the t0 range where the sum of squares
// rises by less than noise_sd_m^2 (one standard deviation of the profile; common practice,
// no source), at least the fine step. All NaN with fewer than 3 samples.
struct DepartureFit {
  double t0_s = std::numeric_limits<double>::quiet_NaN();
  double sd_s = std::numeric_limits<double>::quiet_NaN();
  double power = std::numeric_limits<double>::quiet_NaN();
};
DepartureFit FitDeparture(const std::vector<double>& t_s, const std::vector<double>& d_m, bool forward, double t_lo_s,
                          double t_hi_s, double step_s, double noise_sd_m);

// Step 6: the lowest point of a contact: the vertex of a quadratic fitted (noise_sd_m as the
// known noise, analysis/flight_fit.h) to the samples around lowest_index within a tenth of
// the deflection (reference_height_m - height of lowest_index; a band of 0 when
// reference_height_m is NaN), at most 200 samples each side, widened to at least 5 valid
// samples. The vertex (t = -b / 2c, y = a - b^2 / 4c, its sd by first-order propagation,
// GUM 2008 eq. 13; docs/methods.md §11 item 5) is used when the quadratic opens upward and
// its vertex lies within the fitted samples; otherwise the lowest sample itself, with
// sd = noise_sd_m.
struct LowestPoint {
  double t_s = 0.0;
  double y_m = 0.0;
  double sd_m = 0.0;
};
LowestPoint FitLowestPoint(const TimeSeries& series, int lowest_index, double reference_height_m, double noise_sd_m);

}  // namespace dropfit::analysis::detail
