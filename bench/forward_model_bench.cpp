// Forward-model cost: what the contact-law fitter pays per residual evaluation.
// Prints, per law, the time of one SimulateHubHeights call over a one-bounce window
// (0.1 s at 2 kHz: ~40 frames of contact) with doubles and with ceres::Jet<double, 7>,
// using ForwardModelOptions::ForFitting(); the integration steps of the contact with the
// default and the fitting tolerances; and the largest height difference between the two.
// Usage: forward_model_bench [repetitions]
#include <ceres/jet.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <vector>

#include "analysis/forward_model.h"

namespace {

using dropfit::analysis::ContactSetup;
using dropfit::analysis::DropScenario;
using dropfit::analysis::kStandardGravityMps2;
using dropfit::analysis::LawId;

struct Case {
  LawId law;
  std::vector<double> params;
  bool torus;
};

template <typename F>
double SecondsPerCall(int repetitions, F&& call) {
  const auto start = std::chrono::steady_clock::now();
  for (int i = 0; i < repetitions; ++i) call();
  const auto stop = std::chrono::steady_clock::now();
  return std::chrono::duration<double>(stop - start).count() / repetitions;
}

}  // namespace

int main(int argc, char** argv) {
  const int repetitions = argc > 1 ? std::atoi(argv[1]) : 200;
  const Case cases[] = {{LawId::kKelvinVoigt, {2e5, 300}, false}, {LawId::kHuntCrossley, {1e7, 1.4, 0.2}, false},
                        {LawId::kHertz, {1e7, 1.5, 0.2}, false},  {LawId::kBilinear, {1e5, 3e5, 0.004, 200}, false},
                        {LawId::kVolumetric, {2e7, 0.3}, false},  {LawId::kVolumetric, {2e7, 0.3}, true}};
  std::vector<double> times;
  for (int i = 0; i <= 200; ++i) times.push_back(0.0005 * i);
  const int n = static_cast<int>(times.size());
  std::printf("%-24s %8s %10s %12s %12s %14s\n", "law", "steps", "fit steps", "double [us]", "jet7 [us]",
              "fit error [m]");
  for (const Case& c : cases) {
    ContactSetup setup;
    setup.law = c.law;
    setup.mass_kg = 10.0;
    setup.tread = c.torus ? dropfit::analysis::MakeTreadGeometry(0.3, 0.0, 0.05)
                          : dropfit::analysis::MakeTreadGeometry(0.3, 0.0, 0.0);
    // Window: from 20 ms before contact at 2 m/s to ~60 ms after it.
    DropScenario scenario;
    scenario.setup = setup;
    scenario.law_params = c.params;
    scenario.onset_height_m = 0.3;
    scenario.start_height_m = 0.3 + 2.0 * 0.02 - 0.5 * kStandardGravityMps2 * 0.02 * 0.02;
    scenario.start_velocity_mps = -2.0 + kStandardGravityMps2 * 0.02;
    scenario.end_time_s = 0.1;
    const int steps = dropfit::analysis::SimulateDrop(scenario).steps();
    std::vector<double> heights(n);
    const auto fit_options = dropfit::analysis::ForwardModelOptions::ForFitting();
    const double t_double = SecondsPerCall(repetitions, [&] {
      dropfit::analysis::SimulateHubHeights(setup, c.params.data(), 0.3, 0.0, scenario.start_height_m,
                                            scenario.start_velocity_mps, times.data(), n, heights.data(), nullptr,
                                            fit_options);
    });
    // Accuracy of the fitting preset against the default tolerances.
    const dropfit::analysis::Trajectory reference = dropfit::analysis::SimulateDrop(scenario);
    double worst_m = 0.0;
    for (int i = 0; i < n; ++i) worst_m = std::max(worst_m, std::abs(heights[i] - reference.HeightAt(times[i])));
    const int fit_steps = dropfit::analysis::SimulateDrop(scenario, fit_options).steps();
    using Jet = ceres::Jet<double, 7>;
    std::vector<Jet> params;
    for (std::size_t i = 0; i < c.params.size(); ++i) params.emplace_back(c.params[i], static_cast<int>(i));
    std::vector<Jet> jet_heights(n);
    const Jet onset(0.3, 4), y0(scenario.start_height_m, 5), v0(scenario.start_velocity_mps, 6);
    const double t_jet = SecondsPerCall(repetitions, [&] {
      dropfit::analysis::SimulateHubHeights(setup, params.data(), onset, 0.0, y0, v0, times.data(), n,
                                            jet_heights.data(), nullptr, fit_options);
    });
    char name[64];
    std::snprintf(name, sizeof(name), "%s%s", dropfit::analysis::ToString(c.law).c_str(),
                  c.law == LawId::kVolumetric ? (c.torus ? " (torus)" : " (cylinder)") : "");
    std::printf("%-24s %8d %10d %12.1f %12.1f %14.2g\n", name, steps, fit_steps, t_double * 1e6, t_jet * 1e6, worst_m);
  }
  return 0;
}
