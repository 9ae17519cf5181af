// Folder-run benchmark (`dropfit run`, cli/run_command.h): a freshly rendered set with known
// truth under the reference conditions (the renderer's defaults: 800x640, 2,000 frames/s,
// 0.2 ms exposure, 4 sub-frames, read and shot noise, MJPG q90, 30 mm quadrant marker), two
// invented specimens, three heights, two repeats, in one folder with one manifest:
//   wheel-A  hunt-crossley, n = 1.3
//   wheel-B  kelvin-voigt
// The rig is calibrated from the rendered checkerboard images through `dropfit calibrate`, as
// a user would. The folder is run with --jobs 1 and then --jobs 2 into fresh output folders.
//
//   run_bench [--cache DIR] [--skip-render] [--jobs LIST]
//     --cache DIR     rendered set, rig and outputs (default /tmp/dropfit_run_bench); a render
//                     unit (specimen, height) already complete there is reused, so an
//                     interrupted run resumes
//     --skip-render   use the set in DIR as it is (fail when it is missing)
//     --jobs LIST     job counts to run, comma-separated (default 1,2)
//
// Prints, per (specimen, height), the summary figures against truth.json with the issues'
// tolerances and PASS/FAIL; per specimen the best law, the BIC ranking and the true law's joint
// fit against truth; the stage split (decode, track, per-clip fits: sums over clips of the
// times in result.json; joint fits: summary.json run.time_joint_fits_s) and the per-clip
// stage's wall time with each job count, with the 1-job / 2-job ratio (target >= 1.7 on 2
// otherwise idle cores; the load average is printed beside it).
//
// Tolerances (named where they come from):
//   impact speed 0.5 %, COR 0.005, max deflection 0.2 mm: the kinematics issue's reference-
//     condition targets (as in tests/cli/analyze_command_test.cpp and tests/analysis/impacts_test.cpp)
//   contact duration 0.1 ms, peak force 3 %: the contact-law issue (law-based figures)
//   joint fit: stiffness 2 % (force at the largest true max deflection, for power laws),
//     damping 10 %, exponent 0.05, onset height 0.2 mm: the contact-law issue
//   ranking: the true law first, or within 2 BIC of a law that nests it (analysis::LawNests):
//     the contact-law issue
#include <glog/logging.h>
#include <sys/resource.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <map>
#include <optional>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include "analysis/contact_law.h"
#include "analysis/forward_model.h"
#include "analysis/joint_fit.h"
#include "cli/calibrate_command.h"
#include "cli/render_command.h"
#include "cli/results.h"
#include "cli/run_command.h"
#include "cli/truth_io.h"

namespace {

using namespace dropfit;
namespace fs = std::filesystem;

// Reference-condition tolerances (see the header comment for their sources).
constexpr double kImpactSpeedRelTol = 0.005;
constexpr double kCorTol = 0.005;
constexpr double kDeflectionTolM = 0.2e-3;
constexpr double kDurationTolS = 0.1e-3;
constexpr double kPeakForceRelTol = 0.03;
constexpr double kStiffnessRelTol = 0.02;
constexpr double kDampingRelTol = 0.10;
constexpr double kExponentTol = 0.05;
constexpr double kOnsetTolM = 0.2e-3;
constexpr double kBicTie = 2.0;
constexpr double kSpeedupTarget = 1.7;

struct SpecimenPlan {
  std::string name;
  std::string law;
  std::vector<std::string> params;
  double mass_kg;
  uint64_t seed;
};

// Invented specimens. wheel-A: a hunt-crossley tyre with n = 1.3, k chosen so that the force
// at 25 mm matches the renderer's default n = 1.5 wheel; wheel-B: a kelvin-voigt one.
std::vector<SpecimenPlan> Specimens() {
  return {{"wheel-A", "hunt-crossley", {"k=1.2e5", "n=1.3", "alpha_s_per_m=0.25"}, 5.0, 101},
          {"wheel-B", "kelvin-voigt", {"k_n_per_m=5e4", "c_ns_per_m=110"}, 4.0, 202}};
}
const std::vector<double> kHeightsM = {0.10, 0.15, 0.20};
constexpr int kRepeats = 2;

double Seconds(std::chrono::steady_clock::time_point since) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - since).count();
}

double CpuSeconds() {
  rusage u{};
  getrusage(RUSAGE_SELF, &u);
  return static_cast<double>(u.ru_utime.tv_sec + u.ru_stime.tv_sec) +
         1e-6 * static_cast<double>(u.ru_utime.tv_usec + u.ru_stime.tv_usec);
}

std::string LoadAverage() {
  std::ifstream in("/proc/loadavg");
  std::string a, b, c;
  in >> a >> b >> c;
  return a + " " + b + " " + c;
}

std::string UnitName(const SpecimenPlan& s, double h) {
  char text[64];
  std::snprintf(text, sizeof text, "%s_h%03ld", s.name.c_str(), std::lround(h * 1000));
  return text;
}

// Renders one (specimen, height) unit into render/<unit>, unless complete already.
bool RenderUnit(const fs::path& cache, const SpecimenPlan& s, size_t height_index, bool calibration) {
  const double h = kHeightsM[height_index];
  const fs::path dir = cache / "render" / UnitName(s, h);
  if (fs::exists(dir / "truth.json") && (!calibration || fs::exists(dir / "calib" / "plane.png"))) {
    std::printf("render %s: reused from the cache\n", dir.filename().c_str());
    return true;
  }
  fs::remove_all(dir);
  cli::RenderCommandOptions o;  // reference conditions: the renderer's defaults
  o.out_dir = dir.string();
  o.law = s.law;
  o.params = s.params;
  o.mass_kg = s.mass_kg;
  o.specimen = s.name;
  o.heights_m = {h};
  o.repeats = kRepeats;
  o.seed = s.seed + 17 * height_index;
  o.calibration = calibration;
  o.threads = 2;
  const auto t0 = std::chrono::steady_clock::now();
  const int status = cli::RunRender(o);
  std::printf("render %s: exit %d in %.1f s\n", dir.filename().c_str(), status, Seconds(t0));
  std::fflush(stdout);
  return status == 0;
}

// One folder, one manifest: every unit's clips linked in as <specimen>_<clip>.
void AssembleSet(const fs::path& cache) {
  const fs::path set = cache / "set";
  fs::remove_all(set);
  fs::create_directories(set);
  std::ostringstream csv;
  csv << "# run_bench: two invented specimens; truth in ../render/<unit>/truth.json\n";
  csv << "clip,drop_height_m,mass_kg,capture_fps,specimen,free_radius_m,section_radius_m\n";
  for (const SpecimenPlan& s : Specimens()) {
    for (double h : kHeightsM) {
      const fs::path unit = cache / "render" / UnitName(s, h);
      const cli::RenderTruth truth = cli::ReadTruthFile(unit / "truth.json");
      for (const cli::ClipTruth& c : truth.clips) {
        const std::string name = s.name + "_" + c.clip;
        std::error_code ec;
        fs::create_hard_link(unit / c.clip, set / name, ec);
        if (ec) fs::copy_file(unit / c.clip, set / name, fs::copy_options::overwrite_existing);
        char row[256];
        std::snprintf(row, sizeof row, "%s,%.17g,%.17g,%.17g,%s,%.17g,%.17g\n", name.c_str(), c.drop_height_m,
                      truth.mass_kg, c.capture_fps, s.name.c_str(), truth.tread.free_radius_m,
                      truth.tread.section_radius_m);
        csv << row;
      }
    }
  }
  std::ofstream(set / "manifest.csv") << csv.str();
}

struct ClipTruthRef {
  std::string specimen;
  const cli::RenderTruth* unit = nullptr;
  const cli::ClipTruth* clip = nullptr;
};

const analysis::ImpactTruth* FirstComplete(const cli::ClipTruth& c) {
  for (const analysis::ImpactTruth& i : c.impacts) {
    if (i.complete) return &i;
  }
  return nullptr;
}

const char* Verdict(bool ok) { return ok ? "PASS" : "FAIL"; }

struct Tally {
  int pass = 0, fail = 0;
  void Add(bool ok) { (ok ? pass : fail)++; }
};

double ExtraValue(const cli::NamedValues& values, const std::string& key) {
  for (const auto& [k, v] : values) {
    if (k == key) return v;
  }
  return NAN;
}

std::string RunValue(const cli::Summary& s, const std::string& key) {
  for (const auto& [k, v] : s.run) {
    if (k == key) return v;
  }
  return "";
}

using Truths = std::map<std::string, std::vector<cli::RenderTruth>>;

// The per-height summary groups against the truth of their clips' first complete impacts.
void CheckSummaryGroups(const fs::path& out, const cli::Summary& summary, const Truths& truths, Tally& tally) {
  std::printf("\n== summary groups against truth (%s; truth = mean over the group's clips of the first impact)\n",
              out.filename().c_str());
  std::printf("%-8s %6s %4s | %-28s | %-28s | %-28s | %-28s | %-28s\n", "specimen", "h_m", "n",
              "impact speed m/s (tol 0.5%)", "COR (tol 0.005)", "duration ms (tol 0.1)", "max defl mm (tol 0.2)",
              "peak force N (tol 3%)");
  for (const cli::SummaryGroup& g : summary.groups) {
    double v = 0, cor = 0, dur = 0, defl = 0, force = 0;
    int n = 0;
    for (const cli::RenderTruth& t : truths.at(g.specimen)) {
      for (const cli::ClipTruth& c : t.clips) {
        if (std::abs(c.drop_height_m - g.drop_height_m) > 1e-9) continue;
        const analysis::ImpactTruth* i = FirstComplete(c);
        if (!i) continue;
        v += i->impact_speed_mps;
        cor += i->cor;
        dur += i->contact_duration_s;
        defl += i->max_deflection_m;
        force += i->peak_force_n;
        ++n;
      }
    }
    if (n == 0) continue;
    v /= n, cor /= n, dur /= n, defl /= n, force /= n;
    const bool ok_v = std::abs(g.impact_speed_mps_mean / v - 1) <= kImpactSpeedRelTol;
    const bool ok_c = std::abs(g.cor_mean - cor) <= kCorTol;
    const bool ok_d = std::abs(g.contact_duration_s_mean - dur) <= kDurationTolS;
    const bool ok_x = std::abs(g.max_deflection_m_mean - defl) <= kDeflectionTolM;
    const bool ok_f = std::abs(g.peak_force_n_mean / force - 1) <= kPeakForceRelTol;
    for (bool ok : {ok_v, ok_c, ok_d, ok_x, ok_f}) tally.Add(ok);
    std::printf(
        "%-8s %6.3f %4d | %7.4f %7.4f %+6.3f%% %s | %6.4f %6.4f %+7.4f %s | %6.2f %6.2f %+6.3f %s | %6.2f %6.2f %+6.3f "
        "%s | %6.1f %6.1f %+6.2f%% %s\n",
        g.specimen.c_str(), g.drop_height_m, g.clips, g.impact_speed_mps_mean, v,
        100 * (g.impact_speed_mps_mean / v - 1), Verdict(ok_v), g.cor_mean, cor, g.cor_mean - cor, Verdict(ok_c),
        1e3 * g.contact_duration_s_mean, 1e3 * dur, 1e3 * (g.contact_duration_s_mean - dur), Verdict(ok_d),
        1e3 * g.max_deflection_m_mean, 1e3 * defl, 1e3 * (g.max_deflection_m_mean - defl), Verdict(ok_x),
        g.peak_force_n_mean, force, 100 * (g.peak_force_n_mean / force - 1), Verdict(ok_f));
  }
  std::printf("(columns: measured, truth, error, verdict)\n");
}

// Each specimen's joint fits against the law it was rendered with.
void CheckJointFits(const fs::path& out, const cli::Summary& summary, const Truths& truths, Tally& tally) {
  std::printf("\n== joint fits per specimen against truth (%s)\n", out.filename().c_str());
  for (const cli::SpecimenSummary& sp : summary.specimens) {
    const cli::RenderTruth& t0 = truths.at(sp.specimen).front();
    const analysis::LawId truth_law = analysis::LawIdFromString(t0.law);
    std::vector<double> truth_params;
    for (const auto& [k, v] : t0.params) truth_params.push_back(v);
    double dmax = 0;
    for (const cli::RenderTruth& t : truths.at(sp.specimen)) {
      for (const cli::ClipTruth& c : t.clips) {
        for (const analysis::ImpactTruth& i : c.impacts) {
          if (i.complete) dmax = std::max(dmax, i.max_deflection_m);
        }
      }
    }
    std::printf("specimen %s: truth %s (", sp.specimen.c_str(), t0.law.c_str());
    for (const auto& [k, v] : t0.params) std::printf(" %s=%g", k.c_str(), v);
    std::printf(" ), best law %s\n", sp.best_law.value_or("none").c_str());
    std::vector<const cli::JointFitRecord*> ranked;
    for (const cli::JointFitRecord& j : sp.joint_fits) ranked.push_back(&j);
    // The tool's own ranking first (best_law), then by BIC.
    std::sort(ranked.begin(), ranked.end(), [&](auto* a, auto* b) {
      const bool a_best = sp.best_law && a->fit.law == *sp.best_law, b_best = sp.best_law && b->fit.law == *sp.best_law;
      if (a_best != b_best) return a_best;
      const double ba = std::isfinite(a->fit.bic) ? a->fit.bic : INFINITY,
                   bb = std::isfinite(b->fit.bic) ? b->fit.bic : INFINITY;
      return ba < bb;
    });
    const cli::JointFitRecord* truth_fit = nullptr;
    for (const cli::JointFitRecord* j : ranked) {
      if (j->fit.law == t0.law) truth_fit = j;
    }
    for (const cli::JointFitRecord* j : ranked) {
      std::printf("  %-14s BIC %14.2f  dBIC %9.2f  rms %7.2f um  %s  ", j->fit.law.c_str(), j->fit.bic,
                  j->fit.bic - ranked.front()->fit.bic, 1e6 * j->fit.rms_residual_m,
                  j->fit.converged ? "converged" : "NOT converged");
      for (const auto& [k, v] : j->fit.params) std::printf(" %s=%.5g", k.c_str(), v);
      std::printf("\n");
    }
    // Ranking: the true law first, or tied (within 2 BIC) with a law that nests it.
    bool rank_ok = false;
    if (truth_fit && std::isfinite(truth_fit->fit.bic) && !ranked.empty()) {
      const cli::JointFitRecord* best = ranked.front();
      const analysis::LawId best_law = analysis::LawIdFromString(best->fit.law);
      rank_ok = best_law == truth_law ||
                (analysis::LawNests(best_law, truth_law) && truth_fit->fit.bic - best->fit.bic < kBicTie);
    }
    tally.Add(rank_ok);
    std::printf("  ranking: true law %s  %s (first, or within %.0f BIC of a law nesting it)\n", t0.law.c_str(),
                Verdict(rank_ok), kBicTie);
    if (!truth_fit) {
      tally.Add(false);
      std::printf("  no joint fit of the true law: FAIL\n");
      continue;
    }
    std::vector<double> fitted;
    for (const auto& [k, v] : truth_fit->fit.params) fitted.push_back(v);
    const double f_fit = analysis::ElasticContactForce(truth_law, fitted.data(), t0.tread, dmax);
    const double f_true = analysis::ElasticContactForce(truth_law, truth_params.data(), t0.tread, dmax);
    const double stiff = f_fit / f_true - 1;
    const bool ok_k = std::abs(stiff) <= kStiffnessRelTol;
    tally.Add(ok_k);
    std::printf("  stiffness (elastic force at %.2f mm): fit %.2f N, truth %.2f N, %+.3f %%  %s (tol 2 %%)\n",
                1e3 * dmax, f_fit, f_true, 100 * stiff, Verdict(ok_k));
    const size_t damp = truth_law == analysis::LawId::kHuntCrossley ? 2 : 1;
    const double d_err = fitted[damp] / truth_params[damp] - 1;
    const bool ok_c = std::abs(d_err) <= kDampingRelTol;
    tally.Add(ok_c);
    std::printf("  damping %s: fit %.5g, truth %.5g, %+.3f %%  %s (tol 10 %%)\n",
                analysis::ParameterNames(truth_law)[damp].c_str(), fitted[damp], truth_params[damp], 100 * d_err,
                Verdict(ok_c));
    if (truth_law == analysis::LawId::kHuntCrossley) {
      const double n_err = fitted[1] - truth_params[1];
      const bool ok_n = std::abs(n_err) <= kExponentTol;
      tally.Add(ok_n);
      std::printf("  exponent n: fit %.4f, truth %.4f, %+.4f  %s (tol 0.05)\n", fitted[1], truth_params[1], n_err,
                  Verdict(ok_n));
    }
    const double onset_err = truth_fit->fit.onset_height_m - t0.tread.free_radius_m;
    const bool ok_o = std::abs(onset_err) <= kOnsetTolM;
    tally.Add(ok_o);
    std::printf("  onset height (%s): %.5f m, truth %.5f m, %+.3f mm  %s (tol 0.2 mm)\n",
                truth_fit->fit.onset_height_source.c_str(), truth_fit->fit.onset_height_m, t0.tread.free_radius_m,
                1e3 * onset_err, Verdict(ok_o));
  }
}

void CheckSummary(const fs::path& out, const Truths& truths, Tally& tally) {
  const cli::Summary summary = cli::ReadSummaryJson(out / "summary.json");
  CheckSummaryGroups(out, summary, truths, tally);
  CheckJointFits(out, summary, truths, tally);
}

struct StageTimes {
  double decode = 0, track = 0, fits = 0, joint = NAN, clip_stage_wall = NAN, clip_stage_cpu = NAN, run_wall = 0,
         run_cpu = 0;
  int clips = 0, frames = 0;
  std::string load_before, load_after;
};

StageTimes ReadStageTimes(const fs::path& out) {
  StageTimes s;
  const cli::Summary summary = cli::ReadSummaryJson(out / "summary.json");
  for (const auto& e : fs::directory_iterator(out / "clips")) {
    if (!fs::exists(e.path() / "result.json")) continue;
    const cli::ClipResult r = cli::ReadClipResult(e.path() / "result.json");
    s.decode += ExtraValue(r.extra, "time_decode_s");
    s.track += ExtraValue(r.extra, "time_track_s");
    s.fits += ExtraValue(r.extra, "time_fits_s");
    s.frames += r.frames;
    ++s.clips;
  }
  const std::string joint = RunValue(summary, "time_joint_fits_s");
  const std::string stage = RunValue(summary, "time_clip_stage_s");
  if (!joint.empty()) s.joint = std::stod(joint);
  if (!stage.empty()) s.clip_stage_wall = std::stod(stage);
  const std::string stage_cpu = RunValue(summary, "cpu_time_clip_stage_s");
  if (!stage_cpu.empty()) s.clip_stage_cpu = std::stod(stage_cpu);
  return s;
}

// Calibrates the rig (cache/rig.json) from the first unit's rendered checkerboard views through
// `dropfit calibrate`'s own function, as a user would.
bool CalibrateFromRenderedViews(const fs::path& cache, const std::vector<SpecimenPlan>& specimens,
                                const std::map<std::string, std::vector<cli::RenderTruth>>& truths) {
  const fs::path calib_unit = cache / "render" / UnitName(specimens[0], kHeightsM[0]);
  const cli::RenderTruth& calib_truth = truths.at(specimens[0].name).front();
  if (!calib_truth.calibration) {
    std::fprintf(stderr, "run_bench: %s has no calibration views\n", calib_unit.c_str());
    return false;
  }
  cli::CalibrateCommandOptions co;
  co.inputs = {(calib_unit / "calib").string()};
  co.board = calib_truth.calibration->board;
  co.square_m = calib_truth.calibration->square_m;
  co.plane_image = (calib_unit / "calib" / "plane.png").string();
  co.corner_height_m = calib_truth.calibration->corner_height_m;
  co.out_path = (cache / "rig.json").string();
  const auto t0 = std::chrono::steady_clock::now();
  std::ostringstream out, err;
  const int status = cli::RunCalibrate(co, out, err);
  std::printf("calibrate: exit %d in %.1f s\n%s%s", status, Seconds(t0), out.str().c_str(), err.str().c_str());
  return status == 0;
}

}  // namespace

int main(int argc, char** argv) {
  google::InitGoogleLogging(argv[0]);
  FLAGS_minloglevel = 3;  // Ceres logs through glog; as in cli/main.cpp
  fs::path cache = fs::temp_directory_path() / "dropfit_run_bench";
  bool skip_render = false;
  std::vector<int> job_counts = {1, 2};
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    if (a == "--cache" && i + 1 < argc) {
      cache = argv[++i];
    } else if (a == "--skip-render") {
      skip_render = true;
    } else if (a == "--jobs" && i + 1 < argc) {
      job_counts.clear();
      std::stringstream list(argv[++i]);
      for (std::string item; std::getline(list, item, ',');) job_counts.push_back(std::stoi(item));
    } else {
      std::fprintf(stderr, "usage: run_bench [--cache DIR] [--skip-render] [--jobs 1,2]\n");
      return 2;
    }
  }
  cache = fs::absolute(cache);
  fs::create_directories(cache);
  std::printf("run_bench: cache %s; load average %s; %u hardware threads\n", cache.c_str(), LoadAverage().c_str(),
              std::thread::hardware_concurrency());

  // 1. Render (resumable per unit), assemble the folder.
  const std::vector<SpecimenPlan> specimens = Specimens();
  if (!skip_render) {
    for (size_t s = 0; s < specimens.size(); ++s) {
      for (size_t h = 0; h < kHeightsM.size(); ++h) {
        if (!RenderUnit(cache, specimens[s], h, s == 0 && h == 0)) return 1;
      }
    }
    AssembleSet(cache);
  } else if (!fs::exists(cache / "set" / "manifest.csv")) {
    std::fprintf(stderr, "run_bench: --skip-render but %s has no rendered set\n", cache.c_str());
    return 2;
  }
  std::map<std::string, std::vector<cli::RenderTruth>> truths;
  for (const SpecimenPlan& s : specimens) {
    for (double h : kHeightsM)
      truths[s.name].push_back(cli::ReadTruthFile(cache / "render" / UnitName(s, h) / "truth.json"));
  }

  // 2. Calibrate from the rendered checkerboard views, as a user would.
  if (!CalibrateFromRenderedViews(cache, specimens, truths)) return 1;

  // 3. Run the folder with each job count into a fresh output folder.
  Tally tally;
  std::vector<std::pair<int, StageTimes>> times;
  for (int jobs : job_counts) {
    const fs::path out = cache / ("out_jobs" + std::to_string(jobs));
    fs::remove_all(out);
    cli::RunCommandOptions ro;
    ro.folder = (cache / "set").string();
    ro.rig_path = (cache / "rig.json").string();
    ro.out_dir = out.string();
    ro.jobs = jobs;
    StageTimes st;
    st.load_before = LoadAverage();
    const double cpu0 = CpuSeconds();
    const auto t0 = std::chrono::steady_clock::now();
    const int status = cli::RunRun(ro);
    const double wall = Seconds(t0), cpu = CpuSeconds() - cpu0;
    std::printf("\nrun --jobs %d: exit %d, %.1f s wall, %.1f s CPU\n", jobs, status, wall, cpu);
    const std::string load_after = LoadAverage();
    if (!fs::exists(out / "summary.json")) return 1;
    StageTimes read = ReadStageTimes(out);
    read.run_wall = wall;
    read.run_cpu = cpu;
    read.load_before = st.load_before;
    read.load_after = load_after;
    times.emplace_back(jobs, read);
    CheckSummary(out, truths, tally);
  }

  std::printf("\n== stage split (seconds; decode is the reader thread's wall time, which overlaps tracking)\n");
  std::printf("%5s %6s %7s %8s %8s %9s %10s | %15s %14s %6s | %8s %8s  %s\n", "jobs", "clips", "frames", "decode",
              "track", "clip fits", "joint fits", "clip stage wall", "clip stage CPU", "cores", "run wall", "run CPU",
              "load avg before -> after");
  for (const auto& [jobs, s] : times) {
    std::printf("%5d %6d %7d %8.2f %8.2f %9.2f %10.2f | %15.2f %14.2f %6.2f | %8.2f %8.2f  %s -> %s\n", jobs, s.clips,
                s.frames, s.decode, s.track, s.fits, s.joint, s.clip_stage_wall, s.clip_stage_cpu,
                s.clip_stage_cpu / s.clip_stage_wall, s.run_wall, s.run_cpu, s.load_before.c_str(),
                s.load_after.c_str());
  }
  std::printf(
      "(decode, track, clip fits: sums over the clips of result.json's time_decode_s, time_track_s, time_fits_s;\n"
      " joint fits and the clip stage: summary.json run.time_joint_fits_s, time_clip_stage_s, cpu_time_clip_stage_s;\n"
      " cores = clip-stage CPU / wall: what the run got; below ~1.9 with 2 jobs the machine was busy)\n");
  const StageTimes* one = nullptr;
  const StageTimes* two = nullptr;
  for (const auto& [jobs, s] : times) {
    if (jobs == 1) one = &s;
    if (jobs == 2) two = &s;
  }
  if (one && two) {
    const double ratio = one->clip_stage_wall / two->clip_stage_wall;
    std::printf("per-clip stage speed-up, 2 jobs over 1: %.2f x (target >= %.1f on 2 otherwise idle cores)  %s\n",
                ratio, kSpeedupTarget, Verdict(ratio >= kSpeedupTarget));
  }
  std::printf("\naccuracy checks: %d PASS, %d FAIL\n", tally.pass, tally.fail);
  std::printf("reproduce: %s --cache %s   (renders what the cache lacks)\n", argv[0], cache.c_str());
  std::printf("timing on a quiet machine: %s --cache %s --skip-render --jobs 1,2\n", argv[0], cache.c_str());
  return tally.fail == 0 ? 0 : 1;
}
