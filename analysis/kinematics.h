#pragma once
// The track-only analysis of one clip, in one call: segmentation into flights and contacts,
// the impact figures with their uncertainties, and the set-up self-checks
// (analysis/impacts.h, analysis/self_checks.h). The contact-law fits (analysis/law_fit.h)
// start from its segmentation and refine the onset height and the separation instants.

#include <optional>
#include <string>
#include <vector>

#include "analysis/constants.h"
#include "analysis/impacts.h"
#include "analysis/self_checks.h"
#include "analysis/time_series.h"

namespace dropfit::analysis {

struct KinematicsOptions {
  double mass_kg = 0.0;                        // dropped mass [kg], > 0
  double gravity_mps2 = kStandardGravityMps2;  // expected gravity [m/s^2], (0, 100]: standard or local
  // Onset height [m] when known (floor + free radius: kGeometry; a law fit: kFit), its source
  // and standard uncertainty; nothing: a provisional estimate from the track (kTrack).
  std::optional<double> onset_height_m;
  OnsetHeightSource onset_height_source = OnsetHeightSource::kGeometry;
  double onset_height_sd_m = 0.0;
  std::optional<double> drop_height_m;  // nominal drop height [m] for the self-check
  std::optional<double> capture_fps;    // rate used [frames/s], to word a rate correction
  double departure_sigmas = 4.0;        // SegmentationOptions::departure_sigmas
  int min_flight_samples = 8;           // SegmentationOptions::min_flight_samples
  bool robust_flights = true;           // SegmentationOptions::robust_flights
};
std::optional<std::string> ValidateKinematicsOptions(const KinematicsOptions& options);

struct KinematicsResult {
  Segmentation segmentation;
  std::vector<ImpactFigures> impacts;  // one per bounce, clip order
  SelfCheckReport checks;
  // Self-check warnings, COR disagreements, incomplete bounces and gaps, as sentences.
  std::vector<std::string> warnings;
  // Set when the clip could not be analysed (no flight, no impact), with what to check.
  std::optional<std::string> failure;
  // How many times the track was segmented (and its flights fitted) to make this result: 1 from
  // AnalyzeKinematics, and still 1 after ReadAtOnsetHeight (which only reads the figures again).
  int segmentation_passes = 0;
};

// Throws std::invalid_argument for an invalid series or options.
KinematicsResult AnalyzeKinematics(const TimeSeries& series, const KinematicsOptions& options);

// The per-bounce figures read again at another onset height (a law fit's, source kFit) without
// segmenting again: the flights, bounces, noise and gaps of `measured` stay as they are; the
// contact instants, the impact figures, the self-checks and the warnings are made anew at
// options.onset_height_m (with its sd and source). `measured` must come from AnalyzeKinematics on
// the same series and must not have failed. Throws std::invalid_argument for invalid options or
// when options.onset_height_m is not set.
KinematicsResult ReadAtOnsetHeight(const TimeSeries& series, const KinematicsResult& measured,
                                   const KinematicsOptions& options);

}  // namespace dropfit::analysis
