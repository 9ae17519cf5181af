#include "synth/fit_synthetic.h"

#include <algorithm>
#include <cmath>
#include <random>
#include <sstream>
#include <stdexcept>

namespace dropfit::synth {

std::optional<std::string> ValidateSyntheticClipOptions(const SyntheticClipOptions& o) {
  std::ostringstream m;
  if (!(o.capture_fps > 0.0 && o.capture_fps <= 1e6))
    m << "capture_fps = " << o.capture_fps << " is outside (0, 1e6]";
  else if (!(o.noise_sd_m >= 0.0 && o.noise_sd_m <= 1.0))
    m << "noise_sd_m = " << o.noise_sd_m << " is outside [0, 1]";
  else if (o.max_bounces < 1 || o.max_bounces > 1000)
    m << "max_bounces = " << o.max_bounces << " is outside [1, 1000]";
  else if (o.max_flight_samples < 5 || o.max_flight_samples > 100000)
    m << "max_flight_samples = " << o.max_flight_samples << " is outside [5, 100000]";
  else if (!(std::abs(o.onset_guess_error_m) <= 1.0))
    m << "onset_guess_error_m = " << o.onset_guess_error_m << " is outside [-1, 1]";
  if (m.str().empty()) return std::nullopt;
  return m.str();
}

std::vector<double> TyreLikeLawParams(analysis::LawId law) {
  switch (law) {
    case analysis::LawId::kKelvinVoigt:
      return {2e5, 300.0};
    case analysis::LawId::kHuntCrossley:
      return {2.5e7, 1.7, 0.2};
    case analysis::LawId::kHertz:
      return {1e7, 1.5, 0.15};
    case analysis::LawId::kBilinear:
      return {1e5, 4e5, 0.006, 200.0};
    case analysis::LawId::kVolumetric:
      return {2.5e7, 0.2};
    case analysis::LawId::kBottoming:
      return {1e5, 2e10, 0.006, 0.2};
  }
  return {};
}

analysis::TreadGeometry TyreLikeTread() { return analysis::MakeTreadGeometry(0.3, 0.2, 0.0); }

analysis::DropScenario MakeDropScenario(analysis::LawId law, const std::vector<double>& law_params,
                                        const analysis::TreadGeometry& tread, double mass_kg, double onset_height_m,
                                        double drop_m, double end_time_s, double gravity_mps2) {
  analysis::DropScenario s;
  s.setup.law = law;
  s.setup.tread = tread;
  s.setup.mass_kg = mass_kg;
  s.setup.gravity_mps2 = gravity_mps2;
  s.law_params = law_params;
  s.onset_height_m = onset_height_m;
  s.start_height_m = onset_height_m + drop_m;
  s.start_time_s = 0.0;
  s.end_time_s = end_time_s;
  return s;
}

std::vector<double> SampleHeights(const analysis::Trajectory& truth, double t0_s, int frames, double capture_fps,
                                  double noise_sd_m, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> noise(0.0, 1.0);
  const double dt = 1.0 / capture_fps;
  std::vector<double> y(static_cast<size_t>(std::max(frames, 0)));
  for (int k = 0; k < frames; ++k) {
    y[static_cast<size_t>(k)] = truth.HeightAt(t0_s + k * dt) + (noise_sd_m > 0.0 ? noise_sd_m * noise(rng) : 0.0);
  }
  return y;
}

analysis::TimeSeries MakeSyntheticTrack(const analysis::Trajectory& truth, int frames, double capture_fps,
                                        double noise_sd_m, std::uint64_t seed) {
  analysis::TimeSeries series = analysis::MakeTimeSeries(frames, capture_fps);
  const std::vector<double> y = SampleHeights(truth, 0.0, frames, capture_fps, noise_sd_m, seed);
  for (int i = 0; i < frames; ++i) {
    const size_t k = static_cast<size_t>(i);
    series.x_m[k] = truth.At(series.t_s[k]).x_m;
    series.y_m[k] = y[k];
    series.valid[k] = true;
  }
  return series;
}

SyntheticClip MakeSyntheticClip(const std::string& name, const analysis::DropScenario& scenario,
                                const SyntheticClipOptions& options) {
  if (const auto e = ValidateSyntheticClipOptions(options)) throw std::invalid_argument("MakeSyntheticClip: " + *e);
  if (const auto e = analysis::Validate(scenario)) throw std::invalid_argument("MakeSyntheticClip: " + *e);
  SyntheticClip out{analysis::FitClip{}, analysis::SimulateDrop(scenario)};
  const analysis::Trajectory& truth = out.truth;
  const double g = scenario.setup.gravity_mps2;
  const double dt = 1.0 / options.capture_fps;
  const double onset = scenario.onset_height_m;
  const double flight_s = options.max_flight_samples * dt;

  analysis::FitClip& clip = out.clip;
  clip.clip = name;
  clip.drop_height_m = options.drop_height_m;
  clip.mass_kg = scenario.setup.mass_kg;
  clip.noise_sd_m = options.noise_sd_m;
  if (options.geometry_known) clip.known_onset_height_m = onset;
  clip.onset_height_guess_m = onset + options.onset_guess_error_m;

  // Sample grid of the whole clip, with its noise drawn once in frame order.
  const int frames = static_cast<int>(std::floor((scenario.end_time_s - scenario.start_time_s) / dt)) + 1;
  std::vector<double> t(frames);
  for (int k = 0; k < frames; ++k) t[k] = scenario.start_time_s + k * dt;
  const std::vector<double> y =
      SampleHeights(truth, scenario.start_time_s, frames, options.capture_fps, options.noise_sd_m, options.seed);
  // Apex after each impact: the window boundary between it and the next.
  const auto& impacts = truth.impacts();
  std::vector<double> apex(impacts.size());
  for (size_t j = 0; j < impacts.size(); ++j) {
    const analysis::ImpactTruth& i = impacts[j];
    apex[j] = g > 0.0 ? i.t_level_s + i.rebound_speed_mps / g : i.t_level_s + flight_s;
  }
  for (size_t j = 0; j < impacts.size() && static_cast<int>(clip.windows.size()) < options.max_bounces; ++j) {
    const analysis::ImpactTruth& i = impacts[j];
    if (!i.complete || !std::isfinite(i.t_level_s) || !std::isfinite(i.t_separation_s)) continue;
    if (i.t_level_s + 10.0 * dt > scenario.end_time_s) continue;  // too little rising flight
    const double lo = std::max(j == 0 ? scenario.start_time_s : apex[j - 1], i.t_contact_s - flight_s);
    const double hi = std::min(apex[j], i.t_level_s + flight_s);
    analysis::FitWindow w;
    w.bounce_index = static_cast<int>(j);
    double lowest = onset;
    for (int k = 0; k < frames; ++k) {
      if (t[k] < lo || t[k] >= hi) continue;
      w.t_s.push_back(t[k]);
      w.y_m.push_back(y[k]);
      lowest = std::min(lowest, y[k]);
    }
    if (w.t_s.size() < 10) continue;
    w.start_time_s = w.t_s.front();
    const analysis::HubState s0 = truth.At(w.start_time_s);
    // Imitate a flight-parabola estimate: close to, not at, the truth.
    w.start_height_m = s0.y_m + 1e-4;
    w.start_velocity_mps = s0.vy_mps * 1.001;
    w.figures.impact_speed_mps = i.impact_speed_mps;
    w.figures.cor = i.cor;
    w.figures.contact_duration_s = i.contact_duration_s + dt;  // track-only separation is late
    w.figures.max_deflection_m = onset - lowest;
    clip.windows.push_back(std::move(w));
  }
  if (clip.windows.empty()) {
    throw std::runtime_error("MakeSyntheticClip: the simulated drop '" + name +
                             "' has no complete bounce; lengthen end_time_s or lower the damping");
  }
  return out;
}

}  // namespace dropfit::synth
