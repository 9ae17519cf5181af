#pragma once
// Synthetic fitter input straight from the forward model (analysis/forward_model.h), for
// tests and benchmarks of the contact-law fits: a drop is simulated, sampled at a capture
// rate, optionally given white Gaussian position noise, and cut into one window per complete
// bounce the way MakeFitClip cuts a measured track (flights shared by two bounces split at
// their apex). The starting values imitate what the kinematics would deliver, with its
// known biases: the track-only contact duration one frame late, the deflection from the
// lowest sample, the onset height (when it is to be fitted) off by `onset_guess_error_m`.
// No video, tracker or segmentation is involved: this checks the fitter alone.

#include <cstdint>
#include <optional>
#include <string>

#include "analysis/forward_model.h"
#include "analysis/law_fit.h"
#include "analysis/time_series.h"

namespace dropfit::synth {

// Fields (ranges in brackets):
//   capture_fps            sampling rate of the hub track (0, 1e6] frames/s.
//   noise_sd_m             white Gaussian noise added to each height [0, 1] m.
//   seed                   the noise generator's seed (std::mt19937_64).
//   max_bounces            at most this many complete bounces become windows [1, 1000].
//   max_flight_samples     flight samples kept on each side of a contact [5, 100000].
//   geometry_known         true: the clip's onset height is known (fixed in the fit).
//   onset_guess_error_m    added to the true onset height for the starting value when it
//                          is fitted [-1, 1] m.
//   drop_height_m          nominal drop height stored in the clip (grouping only).
struct SyntheticClipOptions {
  double capture_fps = 2000.0;
  double noise_sd_m = 0.0;
  std::uint64_t seed = 1;
  int max_bounces = 3;
  int max_flight_samples = 300;
  bool geometry_known = true;
  double onset_guess_error_m = 5e-4;
  double drop_height_m = 0.0;
};
std::optional<std::string> ValidateSyntheticClipOptions(const SyntheticClipOptions& options);

// A synthetic clip and the truth behind it.
struct SyntheticClip {
  analysis::FitClip clip;
  analysis::Trajectory truth;  // the simulated drop
};

// Tyre-like truths shared by the fit tests and bench/fit_bench, so both judge the same cases:
// per law, parameters in ParameterNames order giving contacts of 10-20 ms and 5-15 mm at 1-3 m/s
// for a 10 kg drop, on a cylinder tread of width 0.2 m at free radius 0.3 m.
std::vector<double> TyreLikeLawParams(analysis::LawId law);
analysis::TreadGeometry TyreLikeTread();

// A drop from rest: the hub released at start time 0 from drop_m above the onset height (the
// hub height at first contact), simulated until end_time_s.
analysis::DropScenario MakeDropScenario(analysis::LawId law, const std::vector<double>& law_params,
                                        const analysis::TreadGeometry& tread, double mass_kg, double onset_height_m,
                                        double drop_m, double end_time_s,
                                        double gravity_mps2 = analysis::kStandardGravityMps2);

// Heights of `truth` at t0_s + k / capture_fps, k = 0..frames-1, each plus noise_sd_m x N(0, 1)
// drawn in frame order from std::mt19937_64(seed) (no noise drawn when noise_sd_m is 0).
std::vector<double> SampleHeights(const analysis::Trajectory& truth, double t0_s, int frames, double capture_fps,
                                  double noise_sd_m, std::uint64_t seed);

// The measured track the kinematics (analysis/kinematics.h) would receive from a perfect
// tracker with white position noise on the height: frames 0..frames-1 at t = frame /
// capture_fps, all valid, x_m the truth's, y_m from SampleHeights. For tests of the real
// input path (kinematics, MakeFitClip) without video.
analysis::TimeSeries MakeSyntheticTrack(const analysis::Trajectory& truth, int frames, double capture_fps,
                                        double noise_sd_m, std::uint64_t seed);

// Simulates `scenario` and builds the fitter's input. Throws std::invalid_argument for an
// invalid scenario or options (message from the validators), std::runtime_error when the
// simulated drop has no complete bounce.
SyntheticClip MakeSyntheticClip(const std::string& name, const analysis::DropScenario& scenario,
                                const SyntheticClipOptions& options);

}  // namespace dropfit::synth
