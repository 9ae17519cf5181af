#include "analysis/impacts.h"

#include <algorithm>
#include <cmath>
#include <iomanip>
#include <limits>
#include <sstream>
#include <stdexcept>

#include "analysis/law_choice.h"
#include "analysis/savgol.h"
#include "analysis/segmentation_steps.h"

namespace dropfit::analysis {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
// Noise floor for noise-free synthetic tracks: 1 nm, far below any camera's resolution.
constexpr double kNoiseFloorM = 1e-9;
// Median absolute deviation to standard deviation for a normal distribution.
constexpr double kMadToSd = 1.4826;
// Exponents tried by the departure model (step 4 of the header).
constexpr double kDeparturePowers[] = {2.0, 2.5, 3.0, 3.5, 4.0};

size_t U(int i) { return static_cast<size_t>(i); }

double Median(std::vector<double> v) {
  if (v.empty()) return kNaN;
  const size_t mid = v.size() / 2;
  std::nth_element(v.begin(), v.begin() + static_cast<long>(mid), v.end());
  double m = v[mid];
  if (v.size() % 2 == 0) m = 0.5 * (m + *std::max_element(v.begin(), v.begin() + static_cast<long>(mid)));
  return m;
}

// A flight fit over `use` (a mask of samples accepted into the flight).
std::optional<PolynomialFit> FitMasked(const TimeSeries& s, const std::vector<bool>& use, int first, int last,
                                       const std::vector<double>& values, std::optional<double> noise) {
  return FitPolynomial(s.t_s, values, use, first, last, 2, noise);
}

// Grows a flight window [first, last] one sample at a time towards `limit` (exclusive) in
// direction `step` (+1 or -1) while samples agree with the refitted parabola; returns the new
// end. Samples that depart once but are followed by an agreeing one are left out of `use`.
int GrowFlight(const TimeSeries& s, std::vector<bool>& use, int first, int last, int step, int limit, double noise,
               double sigmas) {
  int end = step > 0 ? last : first;
  auto fit = FitMasked(s, use, first, last, s.y_m, noise);
  if (!fit) return end;
  int pending_departure = -1;  // index of a single departure awaiting confirmation
  for (int j = end + step; j != limit; j += step) {
    if (!s.valid[U(j)]) continue;
    const double pred = fit->Value(s.t_s[U(j)]);
    const double sd = std::sqrt(noise * noise + std::pow(fit->ValueSd(s.t_s[U(j)]), 2));
    const bool departs = std::abs(s.y_m[U(j)] - pred) > sigmas * sd;
    if (departs) {
      if (pending_departure >= 0) break;  // two in a row: contact
      pending_departure = j;
      continue;
    }
    pending_departure = -1;
    use[U(j)] = true;
    end = j;
    if (step > 0)
      last = j;
    else
      first = j;
    fit = FitMasked(s, use, first, last, s.y_m, noise);
  }
  // Samples between the last accepted one and the stop are not used.
  return end;
}

std::optional<double> ClipOnsetFromBounces(const std::vector<Bounce>& bounces, double* sd_out) {
  std::vector<double> values, sds;
  for (bool complete_only : {true, false}) {
    for (const Bounce& b : bounces) {
      if (complete_only && !b.complete) continue;
      if (std::isfinite(b.onset_height_track_m)) {
        values.push_back(b.onset_height_track_m);
        sds.push_back(b.onset_height_track_sd_m);
      }
    }
    if (!values.empty()) break;
  }
  if (values.empty()) return std::nullopt;
  const double median = Median(values);
  double mean_var = 0.0, spread = 0.0;
  for (size_t i = 0; i < values.size(); ++i) {
    mean_var += sds[i] * sds[i];
    spread += (values[i] - median) * (values[i] - median);
  }
  const double n = static_cast<double>(values.size());
  mean_var /= n;
  const double spread_sd = values.size() > 1 ? std::sqrt(spread / (n - 1.0)) : 0.0;
  *sd_out = std::max(std::sqrt(mean_var / n), spread_sd / std::sqrt(n));
  return median;
}

std::string FormatTime(double t_s) {
  std::ostringstream out;
  out << std::fixed << std::setprecision(4) << t_s;
  return out.str();
}

}  // namespace

// ---------------------------------------------------------------------------------------
// The steps of SegmentBounces (analysis/segmentation_steps.h for the exported ones).

namespace detail {

// Step 1: noise sd from the third differences (zero on a parabola; var = 20 s^2).
double NoiseFromThirdDifferences(const TimeSeries& s) {
  std::vector<double> d3;
  for (int i = 0; i + 3 < s.size(); ++i) {
    if (!(s.valid[U(i)] && s.valid[U(i + 1)] && s.valid[U(i + 2)] && s.valid[U(i + 3)])) continue;
    d3.push_back(std::abs(s.y_m[U(i + 3)] - 3.0 * s.y_m[U(i + 2)] + 3.0 * s.y_m[U(i + 1)] - s.y_m[U(i)]));
  }
  if (d3.size() < 10) return kNaN;
  return std::max(kNoiseFloorM, kMadToSd * Median(d3) / std::sqrt(20.0));
}

// Steps 4 and 5: the departure model d(t) = A x^p_+ (analysis/segmentation_steps.h).
DepartureFit FitDeparture(const std::vector<double>& t, const std::vector<double>& d, bool forward, double t_lo,
                          double t_hi, double step_s, double noise) {
  DepartureFit best;
  if (t.size() < 3) return best;
  auto sse_at = [&](double t0, double p, double* amplitude) {
    double sdp = 0.0, spp = 0.0, sdd = 0.0;
    for (size_t i = 0; i < t.size(); ++i) {
      const double x = forward ? t[i] - t0 : t0 - t[i];
      const double phi = x > 0.0 ? std::pow(x, p) : 0.0;
      sdp += d[i] * phi;
      spp += phi * phi;
      sdd += d[i] * d[i];
    }
    if (spp <= 0.0) return sdd;
    const double a = std::max(0.0, sdp / spp);
    if (amplitude) *amplitude = a;
    return sdd - 2.0 * a * sdp + a * a * spp;
  };
  double best_sse = std::numeric_limits<double>::infinity();
  for (double p : kDeparturePowers) {
    for (double t0 = t_lo; t0 <= t_hi; t0 += step_s) {
      const double sse = sse_at(t0, p, nullptr);
      if (sse < best_sse) {
        best_sse = sse;
        best.t0_s = t0;
        best.power = p;
      }
    }
  }
  if (!std::isfinite(best.t0_s)) return best;
  // Refine t0 on a 10x finer grid around the best, then its sd from the profile:
  // the t0 range where SSE rises by less than noise^2 (one standard deviation).
  const double fine = step_s / 10.0;
  for (double t0 = best.t0_s - step_s; t0 <= best.t0_s + step_s; t0 += fine) {
    const double sse = sse_at(t0, best.power, nullptr);
    if (sse < best_sse) {
      best_sse = sse;
      best.t0_s = t0;
    }
  }
  double lo = best.t0_s, hi = best.t0_s;
  const double limit = best_sse + noise * noise;
  while (lo > t_lo - 20 * step_s && sse_at(lo - fine, best.power, nullptr) < limit) lo -= fine;
  while (hi < t_hi + 20 * step_s && sse_at(hi + fine, best.power, nullptr) < limit) hi += fine;
  best.sd_s = std::max(0.5 * (hi - lo), fine);
  return best;
}

}  // namespace detail

namespace {

// Step 2's filtered track: the Savitzky-Golay acceleration, its noise and the flight's.
struct FilteredAcceleration {
  SavgolOptions sg{5, 2};
  double sd_accel = 0.0;  // acceleration noise on a full window [m/s^2]
  SmoothedSeries smooth;
  double a_flight = 0.0;  // median acceleration [m/s^2]: the flight's
};

FilteredAcceleration FilterAcceleration(const TimeSeries& s, double noise, double g) {
  const int n = s.size();
  const double dt = s.frame_interval_s;
  FilteredAcceleration f;
  SavgolOptions& sg = f.sg;
  while (sg.window < 41 && noise * SavgolNoiseGain(sg, 2) / (dt * dt) > g / 3.0) sg.window += 2;
  f.sd_accel = noise * SavgolNoiseGain(sg, 2) / (dt * dt);
  f.smooth = SavgolFilter(s.y_m, s.valid, dt, sg);
  std::vector<double> accels;
  for (int i = 0; i < n; ++i)
    if (f.smooth.valid[U(i)]) accels.push_back(f.smooth.accel[U(i)]);
  // Flight dominates a drop clip: the median acceleration is the flight's (about -g, or what
  // a wrong rate or scale makes of it, so that the segmentation survives those).
  f.a_flight = Median(accels);
  return f;
}

// Per sample: the noise of the acceleration grows near the clip's ends and gaps.
bool InContact(const FilteredAcceleration& f, double noise, int i) {
  if (!f.smooth.valid[U(i)]) return false;
  const double sd_i = std::max(f.sd_accel, noise * f.smooth.accel_noise_gain[U(i)]);
  return f.smooth.accel[U(i)] > f.a_flight + std::max(5.0 * sd_i, 0.5 * std::abs(f.a_flight));
}

// Runs of in-contact samples, short interruptions bridged.
std::vector<detail::ContactRun> ContactRuns(const FilteredAcceleration& f, double noise, int n) {
  const int window = f.sg.window;
  auto in_contact = [&](int i) { return InContact(f, noise, i); };
  std::vector<detail::ContactRun> runs;
  for (int i = 0; i < n;) {
    if (!in_contact(i)) {
      ++i;
      continue;
    }
    detail::ContactRun run{i, i, i};
    while (i < n) {
      if (in_contact(i)) {
        run.last = i;
        ++i;
        continue;
      }
      // Bridge a short interruption (noise, or a gap in the track) inside one contact.
      int j = i;
      while (j < n && j - run.last <= window && !in_contact(j)) ++j;
      if (j < n && j - run.last <= window) {
        i = j;
        continue;
      }
      break;
    }
    runs.push_back(run);
  }
  return runs;
}

// Margin kept between a coarse contact and the core of its neighbouring flights.
int ContactMargin(const detail::ContactRun& r, int half) { return std::max(half, (r.last - r.first + 1) / 2); }

// Keeps the runs where the motion reverses (a bounce), with their lowest sample; sets
// *release_end as CoarseContacts::release_end.
std::vector<detail::ContactRun> BouncesAmongRuns(const TimeSeries& s, const FilteredAcceleration& f,
                                                 const std::vector<detail::ContactRun>& runs, double noise,
                                                 int* release_end) {
  const int n = s.size();
  const int window = f.sg.window;
  const int half = window / 2;
  std::vector<detail::ContactRun> contacts;
  auto rate_near = [&](int i, int step) {
    for (int j = i; j >= 0 && j < n && std::abs(j - i) <= 3 * window; j += step)
      if (f.smooth.valid[U(j)]) return f.smooth.rate[U(j)];
    return kNaN;
  };
  for (detail::ContactRun run : runs) {
    int lowest = -1;
    for (int i = std::max(0, run.first - half); i <= std::min(n - 1, run.last + half); ++i)
      if (s.valid[U(i)] && (lowest < 0 || s.y_m[U(i)] < s.y_m[U(lowest)])) lowest = i;
    if (lowest < 0) continue;
    run.lowest = lowest;
    const double before = rate_near(run.first - half - 1, -1);
    const double after = rate_near(run.last + half + 1, +1);
    const bool at_start = run.first - half <= 0 || !std::isfinite(before);
    const bool at_end = run.last + half >= n - 1 || !std::isfinite(after);
    const bool falls_in = at_start || before < 0.0;
    const bool rises_out = at_end || after > 0.0;
    if (at_start && at_end) continue;  // no flight at all around it
    auto reject = [&] {
      if (contacts.empty()) *release_end = std::min(n - 1, run.last + ContactMargin(run, half));
    };
    // A bounce has the hub clearly higher before (a fall) and after (a rise) its lowest point.
    // A hub held and released at the clip's start, or still, has neither: after a release the
    // hub never comes back up to its release height (COR < 1).
    double highest_before = -std::numeric_limits<double>::infinity(), highest_after = highest_before;
    for (int i = 0; i < run.first; ++i)
      if (s.valid[U(i)]) highest_before = std::max(highest_before, s.y_m[U(i)]);
    for (int i = run.last + 1; i < n; ++i)
      if (s.valid[U(i)]) highest_after = std::max(highest_after, s.y_m[U(i)]);
    const double clear_m = s.y_m[U(lowest)] + 10.0 * noise;
    if ((!at_start && !(highest_before > clear_m)) || (!at_end && !(highest_after > clear_m)) ||
        (at_start && !(after > 0.0 && highest_after > clear_m)) || !(falls_in && rises_out)) {
      reject();
      continue;
    }
    contacts.push_back(run);
  }
  return contacts;
}

}  // namespace

namespace detail {

CoarseContacts FindCoarseContacts(const TimeSeries& s, double noise, double g) {
  CoarseContacts out;
  const FilteredAcceleration f = FilterAcceleration(s, noise, g);
  out.filter_window = f.sg.window;
  if (!(f.a_flight < 0.0)) {
    out.failure = "no free flight found: the median acceleration of the track is " + std::to_string(f.a_flight) +
                  " m/s^2, not downward; check the rig's \"up\" direction and that the clip shows a drop";
    return out;
  }
  const std::vector<ContactRun> runs = ContactRuns(f, noise, s.size());
  out.contacts = BouncesAmongRuns(s, f, runs, noise, &out.release_end);
  if (out.contacts.empty()) {
    out.failure =
        "no impact found: the track shows no contact (upward acceleration beyond the noise) with a fall before "
        "and a rise after it; check that the clip covers an impact, that the capture rate is right, and the "
        "rig's \"up\" direction";
  }
  return out;
}

std::vector<FlightWindow> FlightWindows(const CoarseContacts& coarse, int n) {
  const std::vector<ContactRun>& contacts = coarse.contacts;
  const int half = coarse.filter_window / 2;
  const int k_contacts = static_cast<int>(contacts.size());
  std::vector<FlightWindow> windows;
  for (int k = 0; k <= k_contacts; ++k) {
    FlightWindow w{};
    w.cut_start = k == 0;
    w.cut_end = k == k_contacts;
    w.lo = w.cut_start ? 0 : contacts[U(k - 1)].lowest + 1;
    w.hi = w.cut_end ? n - 1 : contacts[U(k)].lowest - 1;
    w.core_lo =
        w.cut_start ? coarse.release_end + 1 : contacts[U(k - 1)].last + ContactMargin(contacts[U(k - 1)], half) + 1;
    w.core_hi = w.cut_end ? n - 1 : contacts[U(k)].first - ContactMargin(contacts[U(k)], half) - 1;
    windows.push_back(w);
  }
  return windows;
}

}  // namespace detail

namespace {

// Step 3: the samples of one flight window accepted into its parabola.
struct FlightSamples {
  std::vector<bool> use;
  int first = -1, last = -1;
};

// Onset height known: every valid sample above it; from the release on when the clip starts
// with the hub held (grown back below).
FlightSamples SamplesAboveOnset(const TimeSeries& s, const detail::FlightWindow& w, double onset_m, double noise,
                                double sigmas) {
  FlightSamples f{std::vector<bool>(U(s.size()), false)};
  const int lo = w.cut_start ? std::max(w.lo, w.core_lo) : w.lo;
  for (int i = lo; i <= w.hi; ++i) {
    if (s.valid[U(i)] && s.y_m[U(i)] > onset_m) {
      f.use[U(i)] = true;
      if (f.first < 0) f.first = i;
      f.last = i;
    }
  }
  if (f.first >= 0 && lo > w.lo) f.first = GrowFlight(s, f.use, f.first, f.last, -1, w.lo - 1, noise, sigmas);
  return f;
}

// Onset height unknown: the core, without its outliers, grown towards each contact while
// the samples agree with the parabola. Nothing when the core is too short.
std::optional<FlightSamples> SamplesGrownFromCore(const TimeSeries& s, const detail::FlightWindow& w,
                                                  int min_flight_samples, double noise, double sigmas) {
  if (w.core_hi - w.core_lo + 1 < min_flight_samples) return std::nullopt;
  FlightSamples f{std::vector<bool>(U(s.size()), false)};
  for (int i = w.core_lo; i <= w.core_hi; ++i) f.use[U(i)] = s.valid[U(i)];
  f.first = w.core_lo;
  f.last = w.core_hi;
  // Outliers in the core (a mis-tracked frame) are left out before growing.
  if (auto fit = FitMasked(s, f.use, f.first, f.last, s.y_m, noise)) {
    for (int i = f.first; i <= f.last; ++i)
      if (f.use[U(i)] && std::abs(s.y_m[U(i)] - fit->Value(s.t_s[U(i)])) > sigmas * noise * 1.5) f.use[U(i)] = false;
  }
  if (!w.cut_end) f.last = GrowFlight(s, f.use, f.first, f.last, +1, w.hi + 1, noise, sigmas);
  if (!w.cut_start) f.first = GrowFlight(s, f.use, f.first, f.last, -1, w.lo - 1, noise, sigmas);
  return f;
}

// The integrated autocorrelation time of a flight fit's residuals (FlightPhase): the
// autocorrelation pooled over the used samples, pairs with an unused sample left out, to lag
// min(200, n / 2).
double ResidualCorrelationTime(const TimeSeries& s, const FlightSamples& f, const PolynomialFit& fit) {
  std::vector<double> r;
  std::vector<bool> used;
  for (int i = f.first; i <= f.last; ++i) {
    used.push_back(f.use[U(i)]);
    r.push_back(f.use[U(i)] ? s.y_m[U(i)] - fit.Value(s.t_s[U(i)]) : 0.0);
  }
  const size_t n = r.size();
  const size_t max_lag = std::min<size_t>(200, n / 2);
  std::vector<double> acf(max_lag + 1, 0.0);
  double var = 0.0;
  int count0 = 0;
  for (size_t k = 0; k < n; ++k) {
    if (!used[k]) continue;
    var += r[k] * r[k];
    ++count0;
  }
  if (!(var > 0.0) || count0 < 8) return 1.0;
  var /= count0;
  acf[0] = 1.0;
  for (size_t lag = 1; lag <= max_lag; ++lag) {
    double sum = 0.0;
    int count = 0;
    for (size_t k = 0; k + lag < n; ++k) {
      if (!used[k] || !used[k + lag]) continue;
      sum += r[k] * r[k + lag];
      ++count;
    }
    acf[lag] = count > 0 ? sum / count / var : 0.0;
  }
  return CorrelationTime(acf);
}

// The flight's parabolas in y and x; nothing when too few samples are used or the y
// parabola does not open downward.
std::optional<FlightPhase> FitFlightPhase(const TimeSeries& s, const detail::FlightWindow& w, const FlightSamples& f,
                                          int min_flight_samples, std::optional<double> known_noise, bool robust) {
  if (f.first < 0) return std::nullopt;
  int used = 0, missing = 0;
  for (int i = f.first; i <= f.last; ++i) {
    used += f.use[U(i)] ? 1 : 0;
    missing += s.valid[U(i)] ? 0 : 1;
  }
  if (used < min_flight_samples) return std::nullopt;
  auto y_fit = FitPolynomial(s.t_s, s.y_m, f.use, f.first, f.last, 2, known_noise, robust);
  auto x_fit = FitPolynomial(s.t_s, s.x_m, f.use, f.first, f.last, 2, std::nullopt, robust);
  if (!y_fit || !x_fit || !(y_fit->coef(2) < 0.0)) return std::nullopt;
  FlightPhase phase;
  phase.first_index = f.first;
  phase.last_index = f.last;
  phase.y_fit = *y_fit;
  phase.x_fit = *x_fit;
  phase.missing_samples = missing;
  phase.cut_by_clip_start = w.cut_start;
  phase.cut_by_clip_end = w.cut_end;
  phase.residual_correlation_time = ResidualCorrelationTime(s, f, phase.y_fit);
  return phase;
}

// Step 3: one flight phase per window (nothing where none fits), in two passes: the second
// with the noise measured from the first pass's flight residuals, which are measured again.
struct FittedFlights {
  std::vector<std::optional<FlightPhase>> phases;
  double noise_sd_m = 0.0;
};

FittedFlights FitFlights(const TimeSeries& s, const std::vector<detail::FlightWindow>& windows,
                         const SegmentationOptions& options, double noise) {
  const double sigmas = options.departure_sigmas;
  FittedFlights out{std::vector<std::optional<FlightPhase>>(windows.size()), noise};
  for (int pass = 0; pass < 2; ++pass) {
    double sum_sq = 0.0;
    int dof = 0;
    for (size_t k = 0; k < windows.size(); ++k) {
      const detail::FlightWindow& w = windows[k];
      out.phases[k].reset();
      std::optional<FlightSamples> samples;
      if (options.onset_height_m)
        samples = SamplesAboveOnset(s, w, *options.onset_height_m, out.noise_sd_m, sigmas);
      else
        samples = SamplesGrownFromCore(s, w, options.min_flight_samples, out.noise_sd_m, sigmas);
      if (!samples) continue;
      out.phases[k] = FitFlightPhase(s, w, *samples, options.min_flight_samples,
                                     pass == 0 ? std::optional<double>() : out.noise_sd_m, options.robust_flights);
      if (!out.phases[k]) continue;
      const double r = out.phases[k]->y_fit.rms_residual_m;
      sum_sq += r * r * out.phases[k]->y_fit.samples;
      dof += out.phases[k]->y_fit.samples - 3;
    }
    if (dof > 0) out.noise_sd_m = std::max(kNoiseFloorM, std::sqrt(sum_sq / dof));
  }
  return out;
}

// Bounce k (coarse contact `run`) with its flights (flight_of_window: window -> index into
// seg.flights or -1), its contact samples and completeness.
Bounce BounceBetweenFlights(int k, const detail::ContactRun& run, const std::vector<int>& flight_of_window,
                            const Segmentation& seg, int n, int half) {
  Bounce b;
  b.index = k;
  if (flight_of_window[U(k)] >= 0) b.flight_before = flight_of_window[U(k)];
  if (flight_of_window[U(k + 1)] >= 0) b.flight_after = flight_of_window[U(k + 1)];
  const FlightPhase* before = b.flight_before ? &seg.flights[U(*b.flight_before)] : nullptr;
  const FlightPhase* after = b.flight_after ? &seg.flights[U(*b.flight_after)] : nullptr;
  b.contact_first_index = before ? before->last_index + 1 : std::max(0, run.first - half);
  b.contact_last_index = after ? after->first_index - 1 : std::min(n - 1, run.last + half);
  if (!before)
    b.incomplete_reason = "no falling flight to fit before the contact (cut by the clip's start or too short)";
  else if (!after)
    b.incomplete_reason =
        "no rising flight to fit after the contact (cut by the clip's end, too short, or the specimen came to rest)";
  else if (b.contact_first_index <= 0 || b.contact_last_index >= n - 1)
    b.incomplete_reason = "the contact touches the clip's first or last frame";
  b.complete = b.incomplete_reason.empty();
  return b;
}

// Step 6: the height from which the contact's deflection is measured for the lowest tenth:
// the known onset height, else a flight parabola at the contact's edge; NaN without either.
double LowestPointReference(const TimeSeries& s, const Bounce& b, const FlightPhase* before, const FlightPhase* after,
                            const std::optional<double>& known_onset_m) {
  const int n = s.size();
  double y_ref = kNaN;
  if (known_onset_m)
    y_ref = *known_onset_m;
  else if (before)
    y_ref = before->y_fit.Value(s.t_s[U(std::min(n - 1, b.contact_first_index))]);
  else if (after)
    y_ref = after->y_fit.Value(s.t_s[U(std::max(0, b.contact_last_index))]);
  return y_ref;
}

// Step 4: this bounce's own onset estimate (falling side); NaN without a falling flight.
void EstimateOnsetFromTrack(const TimeSeries& s, const detail::ContactRun& run, const FlightPhase* before, double noise,
                            Bounce* b) {
  const double dt = s.frame_interval_s;
  b->onset_height_track_m = kNaN;
  b->onset_height_track_sd_m = kNaN;
  if (!before) return;
  const double d_lowest_ref = before->y_fit.Value(b->t_lowest_s);
  const double d_stop = std::max(30.0 * noise, 0.15 * std::max(0.0, b->y_lowest_m - d_lowest_ref));
  std::vector<double> t, d;
  for (int i = std::max(before->first_index, before->last_index - 4); i <= run.lowest; ++i) {
    if (!s.valid[U(i)]) continue;
    const double di = s.y_m[U(i)] - before->y_fit.Value(s.t_s[U(i)]);
    t.push_back(s.t_s[U(i)]);
    d.push_back(di);
    if (di > d_stop && i > before->last_index) break;
  }
  if (t.size() >= 4) {
    const detail::DepartureFit fit = detail::FitDeparture(t, d, true, t.front(), t.back(), dt / 20.0, noise);
    if (std::isfinite(fit.t0_s)) {
      const double rate = std::abs(before->y_fit.Derivative(fit.t0_s));
      b->onset_height_track_m = before->y_fit.Value(fit.t0_s);
      b->onset_height_track_sd_m = std::hypot(before->y_fit.ValueSd(fit.t0_s), rate * fit.sd_s);
    }
  }
}

// Step 5: track-only separation (rising side, backwards in time); NaN without a rising flight.
void EstimateTrackSeparation(const TimeSeries& s, const detail::ContactRun& run, const FlightPhase* after, double noise,
                             Bounce* b) {
  const double dt = s.frame_interval_s;
  b->t_separation_track_s = kNaN;
  b->t_separation_track_sd_s = kNaN;
  if (!after) return;
  const double d_low = b->y_lowest_m - after->y_fit.Value(b->t_lowest_s);
  const double d_stop = std::max(30.0 * noise, 0.15 * std::max(0.0, d_low));
  std::vector<double> t, d;
  for (int i = std::min(after->last_index, after->first_index + 4); i >= run.lowest; --i) {
    if (!s.valid[U(i)]) continue;
    const double di = s.y_m[U(i)] - after->y_fit.Value(s.t_s[U(i)]);
    t.push_back(s.t_s[U(i)]);
    d.push_back(di);
    if (di > d_stop && i < after->first_index) break;
  }
  if (t.size() >= 4) {
    const detail::DepartureFit fit = detail::FitDeparture(t, d, false, t.back(), t.front(), dt / 20.0, noise);
    b->t_separation_track_s = fit.t0_s;
    b->t_separation_track_sd_s = fit.sd_s;
  }
}

// Contact instants: the falling parabola's crossing of the clip's onset height, with the sd
// of the crossing time from the parabola's and the onset height's sds.
void SetContactInstants(Segmentation* seg) {
  for (Bounce& b : seg->bounces) {
    b.t_contact_s = kNaN;
    b.t_contact_sd_s = kNaN;
    if (!b.flight_before || !std::isfinite(seg->onset_height_m)) continue;
    const PolynomialFit& f = seg->flights[U(*b.flight_before)].y_fit;
    if (auto t = CrossingTime(f, seg->onset_height_m, Branch::kFalling)) {
      b.t_contact_s = *t;
      const double rate = std::abs(f.Derivative(*t));
      b.t_contact_sd_s = std::hypot(f.ValueSd(*t), seg->onset_height_sd_m) / rate;
    }
  }
}

// A note per gap of the track: where it is and what it means for the figures.
void AddGapNotes(const TimeSeries& s, Segmentation* seg) {
  const int n = s.size();
  for (const Gap& gap : seg->gaps) {
    std::ostringstream note;
    note << "gap of " << gap.count << " frame" << (gap.count == 1 ? "" : "s")
         << " at t = " << FormatTime(s.t_s[U(gap.first_index)]) << " s";
    bool in_flight = false;
    for (const FlightPhase& f : seg->flights)
      in_flight |= gap.first_index > f.first_index && gap.first_index + gap.count - 1 < f.last_index;
    bool at_end = gap.first_index == 0 || gap.first_index + gap.count == n;
    note << (in_flight ? ": bridged by the flight fit"
             : at_end  ? ": at the clip's edge"
                       : ": in or near a contact (figures there are less certain)");
    seg->notes.push_back(note.str());
  }
}

}  // namespace

namespace detail {

LowestPoint FitLowestPoint(const TimeSeries& s, int lowest_index, double y_ref, double noise) {
  const int n = s.size();
  const int lowest = lowest_index;
  LowestPoint out{s.t_s[U(lowest)], s.y_m[U(lowest)], noise};
  const double y_min = s.y_m[U(lowest)];
  const double band = std::isfinite(y_ref) ? 0.1 * std::max(0.0, y_ref - y_min) : 0.0;
  int lo = lowest, hi = lowest;
  auto below = [&](int i) { return !s.valid[U(i)] || s.y_m[U(i)] <= y_min + band; };
  while (lo - 1 >= 0 && below(lo - 1) && lowest - lo < 200) --lo;
  while (hi + 1 < n && below(hi + 1) && hi - lowest < 200) ++hi;
  auto count_valid = [&]() {
    int c = 0;
    for (int i = lo; i <= hi; ++i) c += s.valid[U(i)] ? 1 : 0;
    return c;
  };
  while (count_valid() < 5 && (lo > 0 || hi < n - 1)) {
    if (lo > 0) --lo;
    if (hi < n - 1) ++hi;
  }
  if (auto fit = FitPolynomial(s.t_s, s.y_m, s.valid, lo, hi, 2, noise)) {
    if (fit->coef(2) > 0.0) {
      const double tau = -fit->coef(1) / (2.0 * fit->coef(2));
      const double t_v = fit->t_ref_s + tau;
      if (t_v >= s.t_s[U(lo)] && t_v <= s.t_s[U(hi)]) {
        out.t_s = t_v;
        Eigen::VectorXd x = fit->coef;
        out.y_m = fit->coef(0) - fit->coef(1) * fit->coef(1) / (4.0 * fit->coef(2));
        out.sd_m = PropagatedSd([](const Eigen::VectorXd& c) { return c(0) - c(1) * c(1) / (4.0 * c(2)); }, x,
                                fit->covariance);
      }
    }
  }
  return out;
}

}  // namespace detail

std::string ToString(OnsetHeightSource source) {
  switch (source) {
    case OnsetHeightSource::kGeometry:
      return "geometry";
    case OnsetHeightSource::kFit:
      return "fit";
    case OnsetHeightSource::kTrack:
      return "track";
    case OnsetHeightSource::kGeometryPrior:
      return "geometry-prior";
  }
  return "track";
}

OnsetHeightSource OnsetHeightSourceFromString(const std::string& text) {
  if (text == "geometry") return OnsetHeightSource::kGeometry;
  if (text == "fit") return OnsetHeightSource::kFit;
  if (text == "track") return OnsetHeightSource::kTrack;
  if (text == "geometry-prior") return OnsetHeightSource::kGeometryPrior;
  throw std::invalid_argument("unknown onset height source \"" + text +
                              "\"; valid: geometry, fit, track, geometry-prior");
}

std::optional<std::string> ValidateSegmentationOptions(const SegmentationOptions& o) {
  std::ostringstream msg;
  if (!(o.gravity_mps2 > 0.0 && o.gravity_mps2 <= 100.0))
    msg << "gravity_mps2 = " << o.gravity_mps2 << " is outside (0, 100] m/s^2";
  else if (o.onset_height_m && !std::isfinite(*o.onset_height_m))
    msg << "onset_height_m = " << *o.onset_height_m << " is not finite";
  else if (o.onset_height_m && o.onset_height_source == OnsetHeightSource::kTrack)
    msg << "onset_height_source must be geometry or fit when onset_height_m is given";
  else if (!(o.onset_height_sd_m >= 0.0 && std::isfinite(o.onset_height_sd_m)))
    msg << "onset_height_sd_m = " << o.onset_height_sd_m << " must be finite and >= 0";
  else if (!(o.departure_sigmas >= 2.0 && o.departure_sigmas <= 10.0))
    msg << "departure_sigmas = " << o.departure_sigmas << " is outside [2, 10]";
  else if (o.min_flight_samples < 5 || o.min_flight_samples > 1000)
    msg << "min_flight_samples = " << o.min_flight_samples << " is outside [5, 1000]";
  else
    return std::nullopt;
  return msg.str();
}

std::optional<std::string> ValidateImpactOptions(const ImpactOptions& o) {
  std::ostringstream msg;
  if (!(o.mass_kg > 0.0 && std::isfinite(o.mass_kg)))
    msg << "mass_kg = " << o.mass_kg << " must be finite and > 0 (the dropped mass in kg)";
  else if (!(o.gravity_mps2 > 0.0 && o.gravity_mps2 <= 100.0))
    msg << "gravity_mps2 = " << o.gravity_mps2 << " is outside (0, 100] m/s^2";
  else
    return std::nullopt;
  return msg.str();
}

void SetOnsetHeight(double onset_height_m, double onset_height_sd_m, OnsetHeightSource source,
                    Segmentation& segmentation) {
  if (!std::isfinite(onset_height_m) || !(onset_height_sd_m >= 0.0) || !std::isfinite(onset_height_sd_m))
    throw std::invalid_argument("SetOnsetHeight: onset height " + std::to_string(onset_height_m) + " m, sd " +
                                std::to_string(onset_height_sd_m) + " m: both must be finite, the sd >= 0");
  if (source == OnsetHeightSource::kTrack)
    throw std::invalid_argument("SetOnsetHeight: the source must be geometry or fit");
  segmentation.onset_height_m = onset_height_m;
  segmentation.onset_height_sd_m = onset_height_sd_m;
  segmentation.onset_height_source = source;
  SetContactInstants(&segmentation);
}

Segmentation SegmentBounces(const TimeSeries& s, const SegmentationOptions& options) {
  if (auto m = ValidateTimeSeries(s)) throw std::invalid_argument("SegmentBounces: " + *m);
  if (auto m = ValidateSegmentationOptions(options)) throw std::invalid_argument("SegmentBounces: " + *m);
  Segmentation seg;
  seg.gaps = FindGaps(s);
  const int n = s.size();
  const bool onset_known = options.onset_height_m.has_value();
  if (onset_known) {
    seg.onset_height_m = *options.onset_height_m;
    seg.onset_height_sd_m = options.onset_height_sd_m;
    seg.onset_height_source = options.onset_height_source;
  } else {
    seg.onset_height_m = kNaN;
    seg.onset_height_sd_m = kNaN;
    seg.onset_height_source = OnsetHeightSource::kTrack;
  }

  // Step 1: position noise from the third differences.
  double noise = detail::NoiseFromThirdDifferences(s);
  if (!std::isfinite(noise)) {
    seg.failure = "too few tracked frames to analyse (" + std::to_string(s.CountValid()) + " of " + std::to_string(n) +
                  "): check that the marker is visible and tracked";
    return seg;
  }
  // Step 2: coarse contacts from the Savitzky-Golay acceleration.
  const detail::CoarseContacts coarse = detail::FindCoarseContacts(s, noise, options.gravity_mps2);
  if (coarse.failure) {
    seg.failure = coarse.failure;
    return seg;
  }
  // Step 3: flights between contacts; the noise from their residuals.
  const std::vector<detail::FlightWindow> windows = detail::FlightWindows(coarse, n);
  FittedFlights flights = FitFlights(s, windows, options, noise);
  noise = flights.noise_sd_m;
  seg.noise_sd_m = noise;
  std::vector<int> flight_of_window(windows.size(), -1);
  for (size_t k = 0; k < flights.phases.size(); ++k) {
    if (!flights.phases[k]) continue;
    flight_of_window[k] = static_cast<int>(seg.flights.size());
    seg.flights.push_back(*flights.phases[k]);
  }
  // Steps 4-6 per bounce, and its completeness.
  const int half = coarse.filter_window / 2;
  for (int k = 0; k < static_cast<int>(coarse.contacts.size()); ++k) {
    const detail::ContactRun& run = coarse.contacts[U(k)];
    Bounce b = BounceBetweenFlights(k, run, flight_of_window, seg, n, half);
    const FlightPhase* before = b.flight_before ? &seg.flights[U(*b.flight_before)] : nullptr;
    const FlightPhase* after = b.flight_after ? &seg.flights[U(*b.flight_after)] : nullptr;
    const double y_ref = LowestPointReference(s, b, before, after, options.onset_height_m);
    const detail::LowestPoint lowest = detail::FitLowestPoint(s, run.lowest, y_ref, noise);
    b.t_lowest_s = lowest.t_s;
    b.y_lowest_m = lowest.y_m;
    b.y_lowest_sd_m = lowest.sd_m;
    EstimateOnsetFromTrack(s, run, before, noise, &b);
    EstimateTrackSeparation(s, run, after, noise, &b);
    seg.bounces.push_back(b);
  }
  // Step 4: the clip's provisional onset height from its bounces.
  if (!onset_known) {
    double sd = kNaN;
    if (auto onset = ClipOnsetFromBounces(seg.bounces, &sd)) {
      seg.onset_height_m = *onset;
      seg.onset_height_sd_m = sd;
    }
  }
  SetContactInstants(&seg);
  AddGapNotes(s, &seg);
  return seg;
}

namespace {

// Parameter vector for propagation: falling coef (3), rising coef (3), onset height.
struct Params {
  Eigen::VectorXd x;
  Eigen::MatrixXd cov;
};

PolynomialFit WithCoef(const PolynomialFit& f, const Eigen::VectorXd& c) {
  PolynomialFit out = f;
  out.coef = c;
  return out;
}

double SpeedAt(const PolynomialFit& f, double height, Branch branch) {
  const auto t = CrossingTime(f, height, branch);
  return t ? std::abs(f.Derivative(*t)) : kNaN;
}

double ApexAbove(const PolynomialFit& f, double height) {
  const auto apex = ParabolaApex(f);
  return apex ? apex->height_m - height : kNaN;
}

Estimate Unknown() { return Estimate{kNaN, kNaN, kNaN}; }

}  // namespace

ContactAccelerationTrace ContactAcceleration(const TimeSeries& s, const Bounce& b) {
  // A quartic Savitzky-Golay acceleration over the contact: window about a third of the
  // contact (at least 7 samples), so that the peak is not flattened.
  ContactAccelerationTrace out;
  const int contact_samples = b.contact_last_index - b.contact_first_index + 1;
  if (contact_samples < 3) return out;
  const double dt = s.frame_interval_s;
  SavgolOptions sg{7, 4};
  while (sg.window + 2 <= std::min(41, contact_samples / 3)) sg.window += 2;
  const int pad = sg.window;
  const int lo = std::max(0, b.contact_first_index - pad);
  const int hi = std::min(s.size() - 1, b.contact_last_index + pad);
  std::vector<double> y(s.y_m.begin() + lo, s.y_m.begin() + hi + 1);
  std::vector<bool> valid(s.valid.begin() + lo, s.valid.begin() + hi + 1);
  const SmoothedSeries sm = SavgolFilter(y, valid, dt, sg);
  for (int i = b.contact_first_index; i <= b.contact_last_index; ++i) {
    const size_t k = U(i - lo);
    if (!sm.valid[k]) continue;
    out.t_s.push_back(s.t_s[U(i)]);
    out.y_m.push_back(sm.value[k]);
    out.accel_mps2.push_back(sm.accel[k]);
  }
  out.accel_noise_gain_per_m = SavgolNoiseGain(sg, 2) / (dt * dt);
  return out;
}

std::vector<ImpactFigures> MeasureImpacts(const TimeSeries& s, const Segmentation& seg, const ImpactOptions& options) {
  if (auto m = ValidateImpactOptions(options)) throw std::invalid_argument("MeasureImpacts: " + *m);
  std::vector<ImpactFigures> out;
  const double h = seg.onset_height_m;
  const double h_sd = std::isfinite(seg.onset_height_sd_m) ? seg.onset_height_sd_m : 0.0;
  for (const Bounce& b : seg.bounces) {
    ImpactFigures f;
    f.bounce_index = b.index;
    f.complete = b.complete;
    f.onset_height_m = h;
    f.onset_height_sd_m = seg.onset_height_sd_m;
    f.onset_height_source = seg.onset_height_source;
    for (Estimate* e : {&f.t_contact_s, &f.impact_speed_mps, &f.rebound_speed_mps, &f.cor, &f.cor_from_apex,
                        &f.drop_height_above_onset_m, &f.rebound_height_above_onset_m, &f.t_separation_track_s,
                        &f.contact_duration_track_s, &f.max_deflection_m, &f.peak_force_track_n, &f.energy_lost_j})
      *e = Unknown();
    f.t_peak_force_track_s = kNaN;

    const PolynomialFit* fall = b.flight_before ? &seg.flights[U(*b.flight_before)].y_fit : nullptr;
    const PolynomialFit* rise = b.flight_after ? &seg.flights[U(*b.flight_after)].y_fit : nullptr;
    f.falling_flight_downweighted = fall ? fall->downweighted : 0;
    f.rising_flight_downweighted = rise ? rise->downweighted : 0;
    // x = (fall coef, rise coef, onset height); absent fits contribute zeros with zero variance.
    Eigen::VectorXd x = Eigen::VectorXd::Zero(7);
    Eigen::MatrixXd cov = Eigen::MatrixXd::Zero(7, 7);
    if (fall) {
      x.segment(0, 3) = fall->coef;
      cov.block(0, 0, 3, 3) = fall->covariance * seg.flights[U(*b.flight_before)].residual_correlation_time;
    }
    if (rise) {
      x.segment(3, 3) = rise->coef;
      cov.block(3, 3, 3, 3) = rise->covariance * seg.flights[U(*b.flight_after)].residual_correlation_time;
    }
    x(6) = h;
    cov(6, 6) = h_sd * h_sd;
    Eigen::MatrixXd onset_cov = Eigen::MatrixXd::Zero(7, 7);
    onset_cov(6, 6) = h_sd * h_sd;
    auto fall_of = [&](const Eigen::VectorXd& v) { return WithCoef(*fall, v.segment(0, 3)); };
    auto rise_of = [&](const Eigen::VectorXd& v) { return WithCoef(*rise, v.segment(3, 3)); };
    auto estimate = [&](const std::function<double(const Eigen::VectorXd&)>& fn) {
      const double value = fn(x);
      return std::isfinite(value) ? Estimate{value, PropagatedSd(fn, x, cov), PropagatedSd(fn, x, onset_cov)}
                                  : Unknown();
    };

    if (fall && std::isfinite(h)) {
      f.t_contact_s = {b.t_contact_s, b.t_contact_sd_s};
      f.impact_speed_mps =
          estimate([&](const Eigen::VectorXd& v) { return SpeedAt(fall_of(v), v(6), Branch::kFalling); });
      f.drop_height_above_onset_m = estimate([&](const Eigen::VectorXd& v) { return ApexAbove(fall_of(v), v(6)); });
    }
    if (rise && std::isfinite(h)) {
      f.rebound_speed_mps =
          estimate([&](const Eigen::VectorXd& v) { return SpeedAt(rise_of(v), v(6), Branch::kRising); });
      f.rebound_height_above_onset_m = estimate([&](const Eigen::VectorXd& v) { return ApexAbove(rise_of(v), v(6)); });
    }
    if (fall && rise && std::isfinite(h)) {
      auto cor = [&](const Eigen::VectorXd& v) {
        return SpeedAt(rise_of(v), v(6), Branch::kRising) / SpeedAt(fall_of(v), v(6), Branch::kFalling);
      };
      auto cor_apex = [&](const Eigen::VectorXd& v) {
        return std::sqrt(ApexAbove(rise_of(v), v(6)) / ApexAbove(fall_of(v), v(6)));
      };
      f.cor = estimate(cor);
      f.cor_from_apex = estimate(cor_apex);
      f.energy_lost_j = estimate([&](const Eigen::VectorXd& v) {
        const double vi = SpeedAt(fall_of(v), v(6), Branch::kFalling);
        const double vr = SpeedAt(rise_of(v), v(6), Branch::kRising);
        return 0.5 * options.mass_kg * (vi * vi - vr * vr);
      });
      const Estimate diff = estimate([&](const Eigen::VectorXd& v) { return cor(v) - cor_apex(v); });
      // Beyond 3 combined sd and beyond the 0.002 COR target: not agreeing.
      if (std::isfinite(diff.value) && std::abs(diff.value) > std::max(3.0 * diff.sd, 0.002)) {
        std::ostringstream msg;
        msg << std::fixed << std::setprecision(4) << "bounce " << b.index << ": COR from speeds " << f.cor.value
            << " and from apex heights " << f.cor_from_apex.value << " differ by " << std::abs(diff.value) << " ("
            << std::setprecision(1) << std::abs(diff.value) / std::max(diff.sd, 1e-12)
            << " sd): the falling and rising flights have different accelerations (" << std::setprecision(3)
            << -2.0 * fall->coef(2) << " and " << -2.0 * rise->coef(2)
            << " m/s^2); check for drag, a marker off the hub axis, or a flight mostly outside the clip";
        f.cor_disagreement = msg.str();
      }
    }
    if (std::isfinite(b.t_separation_track_s)) {
      f.t_separation_track_s = {b.t_separation_track_s, b.t_separation_track_sd_s};
      if (std::isfinite(f.t_contact_s.value))
        f.contact_duration_track_s = {b.t_separation_track_s - f.t_contact_s.value,
                                      std::hypot(b.t_separation_track_sd_s, f.t_contact_s.sd)};
    }
    if (std::isfinite(h)) f.max_deflection_m = {h - b.y_lowest_m, std::hypot(h_sd, b.y_lowest_sd_m), h_sd};

    // Peak force from the contact's filtered acceleration (ContactAcceleration).
    const ContactAccelerationTrace acc = ContactAcceleration(s, b);
    double best = -std::numeric_limits<double>::infinity();
    int best_k = -1;
    for (size_t k = 0; k < acc.t_s.size(); ++k) {
      if (acc.accel_mps2[k] > best) {
        best = acc.accel_mps2[k];
        best_k = static_cast<int>(k);
      }
    }
    if (best_k >= 0) {
      f.peak_force_track_n = {options.mass_kg * (best + options.gravity_mps2),
                              options.mass_kg * seg.noise_sd_m * acc.accel_noise_gain_per_m};
      f.t_peak_force_track_s = acc.t_s[U(best_k)];
    }
    out.push_back(f);
  }
  return out;
}

}  // namespace dropfit::analysis
