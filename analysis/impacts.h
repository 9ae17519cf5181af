#pragma once
// Segmentation of a drop track into flight and contact phases, and the per-impact figures of
// docs/formats.md ("Impact figures"), each with a standard uncertainty.
//
// Segmentation (SegmentBounces), with no threshold the user has to tune:
//  1. Position noise: first from the third differences of the track (zero for a parabola;
//     var(d3 y) = 20 s^2 for white noise, s the noise sd), as a median absolute deviation so
//     that contacts do not count; later from the residuals of the flight fits.
//  2. Coarse contact: the Savitzky-Golay acceleration (analysis/savgol.h; window chosen from
//     the noise so that its noise is at most g/3, 5 to 41 samples) departs from -g by more
//     than max(5 sd_a, g/2) (the contact force is several g in a drop, so it cannot hide).
//     Each run of such samples holding a local minimum of the height, with a fall before
//     and a rise after it (velocity down before, up after; the hub more than 10 noise sd
//     higher somewhere before and after the run's lowest point), is a bounce. A hub held and
//     released at the clip's start is none: it never comes back up to its release height.
//  3. Flight windows: the samples between two contacts are one flight, one parabola.
//     - Onset height known (geometry from the floor and free radius, or a law fit): a flight
//       is every valid sample above the onset height between the two contacts (above the
//       onset height there is no contact force by definition; below it the hub may already be
//       in free flight after a damped separation, but those samples are not needed).
//     - Onset height unknown: the window starts as the samples away from the coarse contacts
//       and grows one sample at a time towards each contact while the new sample lies
//       within `departure_sigmas` combined standard deviations (noise and the fit's
//       prediction) of the parabola, which is refitted as it grows. It stops at the first
//       two consecutive departures: "the motion departs from free fall beyond the noise".
//  4. Contact onset from the track (only used while no onset height is known), per bounce:
//     the data minus the falling parabola, d(t), is fitted just after the flight window by
//     d(t) = A (t - t0)^p for t > t0 (0 before), A by linear least squares, t0 on a
//     sub-frame grid and p in {2, 2.5, 3, 3.5, 4} (a contact force growing as delta^n adds a
//     displacement growing as (t - t0)^(n + 2); a damper's step as (t - t0)^2): the best t0
//     is the onset, the falling parabola's height there the bounce's onset height. The clip's
//     provisional onset height is the median over the complete bounces (one floor, one
//     tyre), source "track"; its sd is their spread (or the single bounce's fit sd).
//  5. Track-only separation: the mirror image on the rising side: the departure model fitted
//     just before the rising flight window, going back in time. The force fades smoothly, so
//     this is late by design (about a millisecond); a law fit gives the force-zero instant.
//  6. Lowest point: a quadratic fitted to the samples of the contact's lowest tenth of
//     deflection (at least 5 samples), its vertex.
// A bounce whose falling or rising flight is missing or too short to fit, or whose contact
// touches the clip's first or last sample, is complete = false, with the reason.
// Steps 1-6 are separate functions, declared for their unit tests in
// analysis/segmentation_steps.h.
//
// Impact figures (MeasureImpacts), definitions of the contract:
//   t_contact_s        falling flight parabola reaches the onset height (sub-frame)
//   impact_speed_mps   its downward speed there;  rebound_speed_mps: upward speed of the
//                      rising flight parabola at the onset height
//   cor                rebound / impact speed
//   cor_from_apex      sqrt(rebound apex height / drop apex height), heights above the onset
//                      height from the parabolas' vertices (docs/methods.md §8,
//                      e = sqrt(h_r / h_d)); equals cor when both flights have the same
//                      acceleration; a difference beyond 3 combined sd (and 0.002) is reported
//                      in `cor_disagreement`
//   max_deflection_m   onset height - lowest hub height
//   t_separation_track_s, contact_duration_track_s   track-only (step 5)
//   peak_force_track_n mass x (acceleration + g), the largest value over the contact, the
//                      acceleration from a quartic Savitzky-Golay filter of the track
//   energy_lost_j      (1/2) m (impact^2 - rebound^2): kinetic energy lost between the two
//                      passages of the onset height (no potential energy difference there)
// Each uncertainty is propagated from the flight-fit covariances, each inflated by its
// residuals' correlation time, and the onset height's sd (analysis/flight_fit.h, PropagatedSd);
// flights are independent fits. Estimate::onset_sd is the onset height's share.

#include <optional>
#include <string>
#include <vector>

#include "analysis/constants.h"
#include "analysis/flight_fit.h"
#include "analysis/time_series.h"

namespace dropfit::analysis {

// Where the onset height comes from (the contract's onset_height_source).
// kGeometryPrior: the geometry's value entered the law fits as a prior, and the onset height is
// the best law's fitted value (analysis/law_fit.h, FitClip::onset_prior_sd_m).
enum class OnsetHeightSource { kGeometry, kFit, kTrack, kGeometryPrior };
std::string ToString(OnsetHeightSource source);  // "geometry", "fit", "track", "geometry-prior"
// Throws std::invalid_argument naming the text and listing the valid ones.
OnsetHeightSource OnsetHeightSourceFromString(const std::string& text);

struct SegmentationOptions {
  // Expected magnitude of the flight acceleration [m/s^2]: standard gravity 9.80665
  // (3rd CGPM, 1901) unless a local value is given. Range (0, 100].
  double gravity_mps2 = kStandardGravityMps2;
  // Onset height [m, same frame as y_m] when known: from the floor and free radius
  // (kGeometry) or from a law fit (kFit). Nothing: estimated from the track (kTrack).
  std::optional<double> onset_height_m;
  OnsetHeightSource onset_height_source = OnsetHeightSource::kGeometry;  // when onset_height_m is set
  double onset_height_sd_m = 0.0;                                        // its standard uncertainty [m], >= 0
  // A sample departs from free fall when its residual from the flight parabola exceeds this
  // many combined standard deviations. Range [2, 10]; 4 keeps false departures below about
  // 1 in 10^4 samples.
  double departure_sigmas = 4.0;
  // Fewest valid samples a flight needs to be fitted (and to count for COR). Range [5, 1000].
  int min_flight_samples = 8;
  // Flight parabolas by Huber's robust loss (analysis/flight_fit.h), so that a few outlying
  // frames move no figure by more than its uncertainty; false: plain least squares (a test
  // switch).
  bool robust_flights = true;
};
// Returns a message naming the offending field and its valid range, or nothing.
std::optional<std::string> ValidateSegmentationOptions(const SegmentationOptions& options);

// One flight phase: one parabola fit in y (and one in x for the tilt check).
struct FlightPhase {
  int first_index = 0;  // first and last sample of the fitted window (inclusive)
  int last_index = -1;
  PolynomialFit y_fit;             // degree 2
  PolynomialFit x_fit;             // degree 2
  int missing_samples = 0;         // invalid samples inside the window (gaps bridged by the fit)
  bool cut_by_clip_start = false;  // no contact before it in the clip
  bool cut_by_clip_end = false;    // no contact after it in the clip
  // Integrated autocorrelation time of the y fit's residuals over the window (Geyer's initial
  // positive sequence, analysis/law_choice.h, CorrelationTime), >= 1. The figures' sds read
  // from this flight take its covariance times this (docs/methods.md §10): residuals correlated
  // over tau samples carry the information of N / tau independent ones.
  double residual_correlation_time = 1.0;
};

// One bounce (one contact), in clip order.
struct Bounce {
  int index = 0;                     // 0-based, clip order
  std::optional<int> flight_before;  // into Segmentation::flights (falling flight)
  std::optional<int> flight_after;   // rising flight
  int contact_first_index = 0;       // samples between the two flight windows (inclusive)
  int contact_last_index = -1;
  double t_contact_s = 0.0;  // falling fit reaches the onset height; NaN without it
  double t_contact_sd_s = 0.0;
  double t_separation_track_s = 0.0;  // track-only separation (step 5); NaN when unknown
  double t_separation_track_sd_s = 0.0;
  double t_lowest_s = 0.0;  // lowest hub point (step 6)
  double y_lowest_m = 0.0;
  double y_lowest_sd_m = 0.0;
  double onset_height_track_m = 0.0;  // this bounce's own track estimate (step 4); NaN if none
  double onset_height_track_sd_m = 0.0;
  bool complete = true;
  std::string incomplete_reason;  // empty when complete
};

struct Segmentation {
  double noise_sd_m = 0.0;      // position noise from the flight residuals
  double onset_height_m = 0.0;  // used for every bounce of the clip; NaN when unknown
  double onset_height_sd_m = 0.0;
  OnsetHeightSource onset_height_source = OnsetHeightSource::kTrack;
  std::vector<FlightPhase> flights;
  std::vector<Bounce> bounces;
  std::vector<Gap> gaps;               // missing samples of the track
  std::vector<std::string> notes;      // e.g. "gap of 6 frames at t = 0.2130 s bridged by the flight fit"
  std::optional<std::string> failure;  // set when no bounce could be found, with what to check
};

// Throws std::invalid_argument for an invalid series or options (the message names them).
Segmentation SegmentBounces(const TimeSeries& series, const SegmentationOptions& options);

// Sets the onset height of a segmented track (a law fit's, or the geometry's) and the contact
// instants that follow from it (each falling flight's parabola at that height), leaving the
// flights and bounces as they are: the re-read after an onset refit (analysis/kinematics.h,
// ReadAtOnsetHeight). Throws std::invalid_argument for a non-finite height or sd, or source kTrack.
void SetOnsetHeight(double onset_height_m, double onset_height_sd_m, OnsetHeightSource source,
                    Segmentation& segmentation);

// A figure and its standard uncertainty; NaN when not available (e.g. no rising flight).
struct Estimate {
  double value = 0.0;
  double sd = 0.0;
  // The part of `sd` the onset height's sd makes (<= sd; the rest is the flights' own scatter):
  // the "onset_height" part of the figure's budget (analysis/uncertainty_budget.h).
  double onset_sd = 0.0;
};

struct ImpactFigures {
  int bounce_index = 0;
  bool complete = true;
  double onset_height_m = 0.0;
  double onset_height_sd_m = 0.0;
  OnsetHeightSource onset_height_source = OnsetHeightSource::kTrack;
  Estimate t_contact_s;
  Estimate impact_speed_mps;
  Estimate rebound_speed_mps;
  Estimate cor;
  Estimate cor_from_apex;
  Estimate drop_height_above_onset_m;     // falling parabola's apex above the onset height
  Estimate rebound_height_above_onset_m;  // rising parabola's apex above the onset height
  Estimate t_separation_track_s;
  Estimate contact_duration_track_s;
  Estimate max_deflection_m;
  Estimate peak_force_track_n;
  double t_peak_force_track_s = 0.0;
  Estimate energy_lost_j;
  // Samples the robust flight fits gave less than full weight (analysis/flight_fit.h).
  int falling_flight_downweighted = 0;
  int rising_flight_downweighted = 0;
  std::optional<std::string> cor_disagreement;  // the two CORs differ: numbers and causes
};

struct ImpactOptions {
  double mass_kg = 0.0;                        // dropped mass [kg], > 0
  double gravity_mps2 = kStandardGravityMps2;  // as SegmentationOptions::gravity_mps2
};
std::optional<std::string> ValidateImpactOptions(const ImpactOptions& options);

// The filtered track over one contact (the samples between the bounce's flight windows):
// smoothed height and acceleration from a quartic Savitzky-Golay filter whose window is about
// a third of the contact (at least 7 samples), as used for peak_force_track_n. Force from the
// track = mass x (accel_mps2 + g). accel_noise_gain_per_m: sd of accel per metre of position
// noise [1/s^2].
struct ContactAccelerationTrace {
  std::vector<double> t_s, y_m, accel_mps2;
  double accel_noise_gain_per_m = 0.0;
};
ContactAccelerationTrace ContactAcceleration(const TimeSeries& series, const Bounce& bounce);

// One ImpactFigures per bounce of `segmentation` (same order). Throws std::invalid_argument
// for invalid options.
std::vector<ImpactFigures> MeasureImpacts(const TimeSeries& series, const Segmentation& segmentation,
                                          const ImpactOptions& options);

}  // namespace dropfit::analysis
