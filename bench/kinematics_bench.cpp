// Kinematics benchmark: errors of the track-only impact figures (analysis/kinematics.h)
// against the forward model's truth, over many drops; then through the renderer and the
// tracker (`dropfit analyze`) on rendered clips, clean and under the reference conditions.
//
//   kinematics_bench                 forward-model sweep, then rendered clips of every law
//   kinematics_bench --no-render     forward-model sweep only (seconds)
//   kinematics_bench --work DIR      keep the rendered clips and results in DIR
//
// Prints, per group, the largest |error| of COR, impact speed (relative), maximum deflection
// and track-only contact duration over the first two complete bounces of each drop (later
// bounces of the 1 s sweep: how often the COR error exceeds 5 stated sd), with the onset height from the
// geometry (and, for the sweep, also estimated from the track).
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <random>
#include <string>
#include <vector>

#include <unistd.h>

#include "analysis/forward_model.h"
#include "analysis/geometry.h"
#include "analysis/kinematics.h"
#include "cli/analyze_command.h"
#include "cli/render_command.h"
#include "cli/results.h"
#include "cli/rig_io.h"
#include "cli/truth_io.h"
#include "synth/camera.h"

namespace {

using namespace dropfit;
namespace fs = std::filesystem;

struct MaxErrors {
  double cor = 0, speed_rel = 0, deflection_m = 0, duration_s = 0;
  int bounces = 0, failures = 0;
  int later = 0, later_beyond_5sd = 0;  // later bounces: COR error beyond 5 stated sd
  void AddLater(double cor_err, double cor_sd) {
    ++later;
    later_beyond_5sd += (std::abs(cor_err) > 5.0 * cor_sd + 1e-6) ? 1 : 0;
  }
  void Add(double cor_err, double speed_rel_err, double defl_err, double dur_err) {
    cor = std::max(cor, std::abs(cor_err));
    speed_rel = std::max(speed_rel, std::abs(speed_rel_err));
    deflection_m = std::max(deflection_m, std::abs(defl_err));
    if (std::isfinite(dur_err)) duration_s = std::max(duration_s, std::abs(dur_err));
    ++bounces;
  }
  void Print(const std::string& label) const {
    std::printf("%-44s bounces %3d  fails %d  |COR| %.5f  |v_in| %.4f %%  |defl| %.4f mm  |dur| %.3f ms", label.c_str(),
                bounces, failures, cor, 100 * speed_rel, 1e3 * deflection_m, 1e3 * duration_s);
    if (later > 0) std::printf("  later bounces: %d, COR beyond 5 sd: %d", later, later_beyond_5sd);
    std::printf("\n");
  }
};

struct LawCase {
  analysis::LawId law;
  std::vector<double> params;
};

std::vector<LawCase> Laws() {
  using analysis::LawId;
  return {{LawId::kKelvinVoigt, {2e5, 300}},
          {LawId::kHuntCrossley, {5e6, 1.4, 0.2}},
          {LawId::kHertz, {5e6, 1.5, 0.15}},
          {LawId::kBilinear, {1e5, 4e5, 0.01, 250}},
          {LawId::kVolumetric, {2.4e7, 0.2}}};
}

void ForwardModelSweep() {
  std::printf("== forward model sampled at frame times + Gaussian noise (12.5 kg, onset 0.2 m) ==\n");
  std::mt19937 rng(2024);
  for (double noise_m : {0.0, 10e-6, 30e-6}) {
    for (double fps : {1000.0, 2000.0, 5000.0}) {
      for (bool geometry : {true, false}) {
        MaxErrors all;
        for (const LawCase& c : Laws()) {
          for (double drop : {0.1, 0.3, 0.5}) {
            analysis::DropScenario s;
            s.setup.law = c.law;
            s.setup.mass_kg = 12.5;
            s.setup.tread = analysis::MakeTreadGeometry(0.2, 0.15, 0.0);
            s.law_params = c.params;
            s.onset_height_m = 0.2;
            s.start_time_s = -0.02;
            s.start_height_m = 0.2 + drop;
            s.end_time_s = 1.0;
            const analysis::Trajectory tr = analysis::SimulateDrop(s);
            const int frames = static_cast<int>(fps * 1.0);
            analysis::TimeSeries ts = analysis::MakeTimeSeries(frames, fps);
            std::normal_distribution<double> nd(0.0, noise_m);
            for (int i = 0; i < frames; ++i) {
              const analysis::HubState st = tr.At(ts.t_s[static_cast<size_t>(i)]);
              ts.x_m[static_cast<size_t>(i)] = st.x_m + (noise_m > 0 ? nd(rng) : 0.0);
              ts.y_m[static_cast<size_t>(i)] = st.y_m + (noise_m > 0 ? nd(rng) : 0.0);
              ts.valid[static_cast<size_t>(i)] = true;
            }
            analysis::KinematicsOptions o;
            o.mass_kg = 12.5;
            if (geometry) o.onset_height_m = 0.2;
            const analysis::KinematicsResult r = analysis::AnalyzeKinematics(ts, o);
            if (r.failure) {
              ++all.failures;
              continue;
            }
            for (const analysis::ImpactFigures& f : r.impacts) {
              if (!f.complete) continue;
              const analysis::ImpactTruth& t = tr.impacts()[static_cast<size_t>(f.bounce_index)];
              if (f.bounce_index >= 2) {  // the headline figures are the first two bounces
                all.AddLater(f.cor.value - t.cor, f.cor.sd);
                continue;
              }
              all.Add(f.cor.value - t.cor, f.impact_speed_mps.value / t.impact_speed_mps - 1.0,
                      f.max_deflection_m.value - t.max_deflection_m,
                      f.contact_duration_track_s.value - t.contact_duration_s);
            }
          }
        }
        char label[96];
        std::snprintf(label, sizeof label, "noise %2.0f um, %4.0f fps, onset from %s", noise_m * 1e6, fps,
                      geometry ? "geometry" : "track");
        all.Print(label);
      }
    }
  }
}

void RenderedClips(const fs::path& work) {
  std::printf(
      "== rendered clips (dropfit render defaults: 5 kg, 800x640, 2000 fps; 0.3 m), tracked and analysed"
      " by `dropfit analyze` with --free-radius ==\n");
  for (bool clean : {true, false}) {
    MaxErrors all;
    for (const LawCase& c : Laws()) {
      const std::string law = analysis::ToString(c.law);
      const fs::path dir = work / ((clean ? "clean_" : "reference_") + law);
      cli::RenderCommandOptions ro;
      ro.out_dir = (dir / "clips").string();
      ro.law = law;  // the renderer's default parameters for its 5 kg wheel
      ro.heights_m = {0.3};
      ro.duration_s = 0.45;  // fall, first contact, rebound past its apex
      ro.clean = clean;
      ro.calibration = false;
      const auto t0 = std::chrono::steady_clock::now();
      if (!fs::exists(dir / "clips" / "truth.json") && cli::RunRender(ro) != 0) {
        ++all.failures;
        continue;
      }
      const cli::RenderTruth truth = cli::ReadTruthFile(dir / "clips" / "truth.json");
      cli::WriteRigFile(dir / "rig.json", synth::RigFromCamera(truth.camera, 0.0, std::nullopt));
      for (const cli::ClipTruth& clip : truth.clips) {
        cli::AnalyzeCommandOptions ao;
        ao.clip = (dir / "clips" / clip.clip).string();
        ao.rig_path = (dir / "rig.json").string();
        ao.mass_kg = truth.mass_kg;
        ao.fps = clip.capture_fps;
        ao.drop_height_m = clip.drop_height_m;
        ao.free_radius_m = truth.tread.free_radius_m;
        ao.gravity_mps2 = truth.gravity_mps2;
        ao.out_dir = (dir / "out").string();
        cli::RunAnalyze(ao);
        const cli::ClipResult res = cli::ReadClipResult(dir / "out" / "result.json");
        if (!res.errors.empty()) ++all.failures;
        MaxErrors one;
        for (size_t k = 0; k < res.impacts.size() && k < clip.impacts.size(); ++k) {
          const cli::ImpactRecord& r = res.impacts[k];
          const analysis::ImpactTruth& t = clip.impacts[k];
          if (!r.complete || !t.complete) continue;
          const double e[4] = {r.cor - t.cor, r.impact_speed_mps / t.impact_speed_mps - 1.0,
                               r.max_deflection_m - t.max_deflection_m, r.contact_duration_s - t.contact_duration_s};
          one.Add(e[0], e[1], e[2], e[3]);
          all.Add(e[0], e[1], e[2], e[3]);
        }
        const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
        one.Print("  " + std::string(clean ? "clean " : "reference ") + law + " (" + std::to_string(int(seconds)) +
                  " s)");
      }
    }
    all.Print(clean ? "ALL clean rendered clips" : "ALL reference-condition clips");
  }
}

}  // namespace

int main(int argc, char** argv) {
  bool render = true;
  fs::path work = fs::temp_directory_path() / ("dropfit_kinematics_bench_" + std::to_string(::getpid()));
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    if (a == "--no-render")
      render = false;
    else if (a == "--work" && i + 1 < argc)
      work = argv[++i];
    else {
      std::fprintf(stderr, "usage: kinematics_bench [--no-render] [--work DIR]\n");
      return 2;
    }
  }
  ForwardModelSweep();
  if (render) {
    fs::create_directories(work);
    RenderedClips(work);
    std::printf("rendered clips and results kept in %s\n", work.string().c_str());
  }
  return 0;
}
