// Contact-law recovery on rendered clips (issue 7's acceptance on video): for each law as
// truth, clips at three drop heights are rendered under the reference conditions (`dropfit
// render`'s defaults: 800x640 8-bit grey, ~1 px/mm, 2000 frames/s, 0.2 ms exposure from 4
// sub-frames, read and shot noise, quadrant marker 30 mm, camera pitch/roll, lens distortion,
// MJPG q90), tracked and analysed through the per-clip pipeline of `dropfit run`
// (cli/clip_records.h: AnalyzeClip for the track, then the same kinematics, fit windows and
// fit options) with the exact rig the renderer writes (rig_exact.json), then
//   * per clip: all five laws fitted with the geometry known (floor and free radius);
//   * per law-as-truth: the joint fits over the three heights with the geometry unknown (the
//     rig's floor withheld: onset height fitted), with the leave-one-height-out test
//     (cli/joint_stage.h's path: analysis/joint_fit.h FitSpecimen).
// Printed against the tolerances, each with PASS/FAIL:
//   stiffness 2 % (hunt-crossley, hertz, volumetric: the elastic force at the largest true
//   deflection of the data, since k and n trade off; bilinear: k1 and k2 each), damping 10 %,
//   exponent 0.05 (hunt-crossley), contact duration 0.1 ms and peak force 3 % (every fitted
//   bounce against the forward model's truth), onset height 0.2 mm (joint), BIC ranking (the
//   true law first, or within 2 BIC of a law that nests it or describes the same bounces: every
//   bounce's contact duration within 0.1 ms, peak force within 3 % and COR within 0.01 of the
//   true law's fit), share of fits where that holds (target >= 90 %), holdout COR error of the
//   true law (largest over the held-out bounces, target <= 0.01).
//
//   law_recovery_bench [--cache DIR] [--laws a,b,...] [--heights h1,h2,h3] [--bounces N]
//                      [--threads N] [--retrack] [--plan]
//
//   --cache DIR   rendered clips (and their tracks) are kept in DIR/<law>/h<height>/ and reused
//                 by the next run (default: a fresh folder under the temporary directory).
//   --laws        laws as truth (default: all five).
//   --heights     drop heights [m] (default 0.05,0.10,0.15).
//   --bounces     complete bounces per clip (default 2: clips end shortly after the second).
//   --threads     clips rendered, tracked and fitted at once (default 2).
//   --retrack     track cached clips again (default: reuse DIR/.../track.csv).
//   --plan        print the truth of each clip from the forward model only (no rendering).
//   --verbose     print every law's fit (parameters, RMS residual, BIC, Ceres' termination).
//   --white-control  a control run, not the benchmark: each tracked height is replaced by the
//                 renderer's truth plus white Gaussian noise of the clip's measured RMS tracking
//                 error (same frames, same pipeline after tracking). Separates what the
//                 tracker's systematic (sub-pixel-phase) error does to the fits from white noise.
//
//   --presmooth S an experiment on the tracker: track with TrackOptions::presmooth_sigma_px = S
//                 (tracker::TrackClip directly, as AnalyzeClip does, other options default);
//                 tracks cached as track_presmooth<S>.csv.
//
// Each clip's line also reports its tracking error against the truth: the RMS, and the
// sub-pixel-phase bias (mean error in 8 bins of the fractional v_px, largest |bin mean|): a
// periodic error that repeats at the same heights in every bounce, so not white noise.
#include <glog/logging.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <ctime>
#include <filesystem>
#include <map>
#include <mutex>
#include <optional>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include <unistd.h>

#include "analysis/contact_law.h"
#include "analysis/forward_model.h"
#include "analysis/geometry.h"
#include "analysis/joint_fit.h"
#include "analysis/kinematics.h"
#include "analysis/law_choice.h"
#include "analysis/law_fit.h"
#include "cli/analyze_command.h"
#include "cli/clip_records.h"
#include "cli/manifest.h"
#include "cli/parallel_for.h"
#include "cli/render_command.h"
#include "cli/results.h"
#include "cli/rig_io.h"
#include "cli/track_command.h"
#include "cli/truth_io.h"
#include "media/frame_source.h"
#include "pipeline/clip.h"
#include "tracker/track.h"

namespace {

using namespace dropfit;
using analysis::LawId;
namespace fs = std::filesystem;

// The tyre-like specimen (invented): 2.5 kg wheel, free radius 0.2 m, torus tread of section
// radius 45 mm (the renderer's default wheel), deflections of 4-8 mm and COR 0.6-0.85.
constexpr double kMassKg = 2.5;
constexpr double kFreeRadiusM = 0.20;
constexpr double kSectionRadiusM = 0.045;
constexpr double kPreReleaseS = 0.01;  // the render command's default
constexpr double kHeightJitterM = 0.001;

// The tolerances.
constexpr double kStiffnessTol = 0.02;  // relative
constexpr double kDampingTol = 0.10;    // relative
constexpr double kExponentTol = 0.05;   // absolute
constexpr double kDurationTolS = 1e-4;
constexpr double kPeakTol = 0.03;  // relative
constexpr double kOnsetTolM = 2e-4;
constexpr double kBicTol = 2.0;
constexpr double kCorEquivTol = 0.01;  // for "describes the same bounces"
constexpr double kHoldoutCorTol = 0.01;
constexpr double kRankShareTarget = 0.90;

std::vector<std::string> TruthParams(LawId law) {
  switch (law) {
    case LawId::kKelvinVoigt:
      return {"k_n_per_m=1.6e5", "c_ns_per_m=140"};
    case LawId::kHuntCrossley:
      return {"k=1.4e6", "n=1.4", "alpha_s_per_m=0.3"};
    case LawId::kHertz:
      return {"k=2.3e6", "n=1.5", "alpha_s_per_m=0.25"};
    case LawId::kBilinear:
      return {"k1_n_per_m=1e5", "k2_n_per_m=2.5e5", "knee_m=0.003", "c_ns_per_m=120"};
    case LawId::kVolumetric:
      return {"kv_n_per_m3=1.1e8", "a_s_per_m=0.3"};
  }
  return {};
}

std::vector<double> ParamValues(const std::vector<std::string>& pairs) {
  std::vector<double> v;
  for (const std::string& p : pairs) v.push_back(std::stod(p.substr(p.find('=') + 1)));
  return v;
}

// The damping parameter (c, alpha or a) is the last of every law's ParameterNames.
int DampingIndex(LawId law) { return analysis::ParameterCount(law) - 1; }

analysis::TreadGeometry Tread() { return analysis::MakeTreadGeometry(kFreeRadiusM, 0.0, kSectionRadiusM); }

analysis::DropScenario Scenario(LawId law, double height_m) {
  analysis::DropScenario s;
  s.setup.law = law;
  s.setup.tread = Tread();
  s.setup.mass_kg = kMassKg;
  s.law_params = ParamValues(TruthParams(law));
  s.onset_height_m = kFreeRadiusM;
  s.start_time_s = kPreReleaseS;
  s.start_height_m = kFreeRadiusM + height_m + kHeightJitterM;  // the longest the jitter makes it
  s.end_time_s = 4.0;
  return s;
}

// Clip length for `bounces` complete bounces: through the last one's return to the onset
// height, plus a margin for its rising flight.
double ClipDuration(LawId law, double height_m, int bounces) {
  const analysis::Trajectory tr = analysis::SimulateDrop(Scenario(law, height_m));
  std::vector<analysis::ImpactTruth> complete;
  for (const auto& i : tr.impacts()) {
    if (i.complete && std::isfinite(i.t_level_s)) complete.push_back(i);
  }
  if (complete.empty()) throw std::runtime_error("no complete bounce in the simulated drop");
  return complete[static_cast<size_t>(std::min<int>(bounces, static_cast<int>(complete.size())) - 1)].t_level_s + 0.03;
}

std::string HeightTag(double h) {
  char b[32];
  std::snprintf(b, sizeof b, "h%.3f", h);
  return b;
}

// ---------------------------------------------------------------------------------------
// One check against a tolerance.
struct Check {
  std::string name;
  double value = NAN;  // |error| in display units
  double tol = NAN;
  std::string unit;
  bool pass() const { return std::isfinite(value) && value <= tol; }
};

std::string FormatChecks(const std::vector<Check>& checks) {
  std::string s;
  for (const Check& c : checks) {
    char b[128];
    std::snprintf(b, sizeof b, "  %s %.3g%s (<= %.3g) %s", c.name.c_str(), c.value, c.unit.c_str(), c.tol,
                  c.pass() ? "PASS" : "FAIL");
    s += b;
  }
  return s;
}

// Truth impacts per fit clip (FitLaw's clip_index), bounce-indexed.
using ClipImpacts = std::vector<std::vector<analysis::ImpactTruth>>;

// The law-dependent checks of the true law's fit.
std::vector<Check> ParameterChecks(LawId law, const analysis::LawFitResult& fit, const ClipImpacts& impacts) {
  std::vector<Check> out;
  const std::vector<double> t = ParamValues(TruthParams(law));
  if (fit.failure || fit.params.size() != t.size()) {
    out.push_back({"fit", INFINITY, 0.0, ""});
    return out;
  }
  double dmax = 0.0;
  for (const auto& clip : impacts)
    for (const auto& i : clip)
      if (std::isfinite(i.max_deflection_m)) dmax = std::max(dmax, i.max_deflection_m);
  const analysis::TreadGeometry tread = Tread();
  switch (law) {
    case LawId::kKelvinVoigt:
      out.push_back({"k", 100 * std::abs(fit.params[0] / t[0] - 1), 100 * kStiffnessTol, "%"});
      break;
    case LawId::kBilinear:
      out.push_back({"k1", 100 * std::abs(fit.params[0] / t[0] - 1), 100 * kStiffnessTol, "%"});
      out.push_back({"k2", 100 * std::abs(fit.params[1] / t[1] - 1), 100 * kStiffnessTol, "%"});
      break;
    default: {
      const double f_fit = analysis::ElasticContactForce(law, fit.params.data(), tread, dmax);
      const double f_true = analysis::ElasticContactForce(law, t.data(), tread, dmax);
      out.push_back({"F(dmax)", 100 * std::abs(f_fit / f_true - 1), 100 * kStiffnessTol, "%"});
    }
  }
  const int d = DampingIndex(law);
  out.push_back({"damp", 100 * std::abs(fit.params[static_cast<size_t>(d)] / t[static_cast<size_t>(d)] - 1),
                 100 * kDampingTol, "%"});
  if (law == LawId::kHuntCrossley) out.push_back({"n", std::abs(fit.params[1] - t[1]), kExponentTol, ""});
  double dur = 0.0, peak = 0.0;
  int n = 0;
  for (const analysis::BounceFitFigures& f : fit.figures) {
    const auto& clip = impacts.at(static_cast<size_t>(f.clip_index));
    if (f.bounce_index < 0 || f.bounce_index >= static_cast<int>(clip.size())) continue;
    const analysis::ImpactTruth& tr = clip[static_cast<size_t>(f.bounce_index)];
    dur = std::max(dur, std::abs(f.contact_duration_s - tr.contact_duration_s));
    peak = std::max(peak, std::abs(f.peak_force_n / tr.peak_force_n - 1));
    if (!std::isfinite(f.contact_duration_s) || !std::isfinite(f.peak_force_n)) dur = peak = INFINITY;
    ++n;
  }
  if (n == 0) dur = peak = INFINITY;
  out.push_back({"t_c", 1e3 * dur, 1e3 * kDurationTolS, "ms"});
  out.push_back({"peak", 100 * peak, 100 * kPeakTol, "%"});
  if (fit.onset_height_fitted) {
    out.push_back({"onset", 1e3 * std::abs(fit.onset_height_m - kFreeRadiusM), 1e3 * kOnsetTolM, "mm"});
  }
  return out;
}

// Do two fits describe the same bounces (every bounce's duration, peak force, COR)?
bool SameBounces(const analysis::LawFitResult& a, const analysis::LawFitResult& b) {
  if (a.failure || b.failure || a.figures.size() != b.figures.size() || a.figures.empty()) return false;
  for (size_t i = 0; i < a.figures.size(); ++i) {
    const auto& x = a.figures[i];
    const auto& y = b.figures[i];
    if (!(std::abs(x.contact_duration_s - y.contact_duration_s) <= kDurationTolS)) return false;
    if (!(std::abs(x.peak_force_n / y.peak_force_n - 1) <= kPeakTol)) return false;
    if (!(std::abs(x.cor - y.cor) <= kCorEquivTol)) return false;
  }
  return true;
}

void PrintFits(const std::vector<analysis::LawFitResult>& fits) {
  for (const analysis::LawFitResult& f : fits) {
    std::printf("%-24s%-14s", "", analysis::ToString(f.law).c_str());
    if (f.failure) {
      std::printf(" failed: %s\n", f.failure->c_str());
      continue;
    }
    for (size_t i = 0; i < f.params.size(); ++i) std::printf(" %s=%.6g", f.param_names[i].c_str(), f.params[i]);
    std::printf(" onset=%.5f rms=%.3g um bic=%.1f conv=%d iter=%d starts=%d (%s)\n", f.onset_height_m,
                1e6 * f.rms_residual_m, f.bic, f.converged ? 1 : 0, f.iterations, f.starts, f.termination.c_str());
  }
}

struct RankVerdict {
  bool ok = false;
  std::string how;      // "first", "nests", "same bounces", "FAIL"
  std::string ranking;  // "law(+dBIC) ..."
};

RankVerdict JudgeRanking(LawId truth, const std::vector<analysis::LawFitResult>& fits) {
  RankVerdict v;
  std::vector<analysis::LawFitResult> chosen = fits;
  const analysis::LawChoice choice = analysis::ChooseLaw(chosen, std::nan(""));  // as FitAllLaws' choice
  const std::vector<int> order = analysis::RankLaws(chosen);
  const int best_index = choice.best.value_or(order.front());
  const analysis::LawFitResult& best = fits[static_cast<size_t>(best_index)];
  const analysis::LawFitResult& tf = fits[static_cast<size_t>(static_cast<int>(truth))];
  for (int i : order) {
    const analysis::LawFitResult& f = fits[static_cast<size_t>(i)];
    char b[64];
    if (f.failure) {
      std::snprintf(b, sizeof b, "%s(failed) ", analysis::ToString(f.law).c_str());
    } else {
      std::snprintf(b, sizeof b, "%s(%+.1f%s) ", analysis::ToString(f.law).c_str(), f.bic - best.bic,
                    f.converged ? "" : ", no conv");
    }
    v.ranking += b;
  }
  const bool truth_equivalent =
      std::find(choice.equivalent.begin(), choice.equivalent.end(), static_cast<int>(truth)) != choice.equivalent.end();
  if (best.law == truth && !best.failure) {
    v.ok = true;
    v.how = "first";
  } else if (truth_equivalent && analysis::LawNests(truth, best.law)) {
    v.ok = true;
    v.how = "nested in the truth, truth equivalent";
  } else if (!tf.failure && tf.bic - best.bic <= kBicTol) {
    if (analysis::LawNests(best.law, truth)) {
      v.ok = true;
      v.how = "nests";
    } else if (SameBounces(best, tf)) {
      v.ok = true;
      v.how = "same bounces";
    } else {
      v.how = "FAIL (within 2 BIC, not nesting, bounces differ)";
    }
  } else {
    v.how = "FAIL";
  }
  return v;
}

// ---------------------------------------------------------------------------------------
struct ClipJob {
  LawId law = LawId::kKelvinVoigt;
  double height_m = 0.0;
  int index = 0;  // height index
  fs::path dir;
  // Results.
  std::string error;
  pipeline::ClipRequest request;
  calib::Rig rig;
  double fps = 0.0;
  std::vector<cli::TrackRow> track;
  std::vector<analysis::ImpactTruth> impacts;
  int frames = 0;
  double render_s = 0.0, track_s = 0.0, fit_s = 0.0;  // wall seconds (0: cached)
  double track_rms_m = NAN, phase_bias_m = NAN;       // tracking error against the truth
  std::vector<analysis::LawFitResult> fits;           // geometry known, AllLaws() order
  analysis::FitClip unknown_clip;                     // geometry unknown (for the joint fit)
};

double Since(std::chrono::steady_clock::time_point t0) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
}

std::mutex g_log_mutex;
void Log(const std::string& line) {
  std::lock_guard<std::mutex> lock(g_log_mutex);
  std::fprintf(stderr, "%s\n", line.c_str());
}

// Tracking error against the drawn truth: RMS of the height error, and the largest mean error
// over 8 bins of the fractional vertical pixel position. With `white_control`, the heights are
// replaced by truth + white noise of that RMS.
void TrackError(const cli::ClipTruth& truth, std::vector<cli::TrackRow>& track, ClipJob& job, bool white_control) {
  double sum2 = 0.0;
  int n = 0;
  double bin_sum[8] = {}, bin_n[8] = {};
  for (cli::TrackRow& r : track) {
    if (!r.y_m || !r.v_px || r.frame < 0 || r.frame >= static_cast<int>(truth.frames.size())) continue;
    const synth::FrameTruth& f = truth.frames[static_cast<size_t>(r.frame)];
    const double e = *r.y_m - f.y_m;
    sum2 += e * e;
    ++n;
    const int b = std::clamp(static_cast<int>(8.0 * (f.v_px - std::floor(f.v_px))), 0, 7);
    bin_sum[b] += e;
    bin_n[b] += 1;
  }
  job.track_rms_m = n > 0 ? std::sqrt(sum2 / n) : NAN;
  job.phase_bias_m = 0.0;
  for (int b = 0; b < 8; ++b)
    if (bin_n[b] > 0) job.phase_bias_m = std::max(job.phase_bias_m, std::abs(bin_sum[b] / bin_n[b]));
  if (!white_control) return;
  std::mt19937_64 rng(977 + static_cast<uint64_t>(job.law) * 10 + static_cast<uint64_t>(job.index));
  std::normal_distribution<double> noise(0.0, job.track_rms_m);
  for (cli::TrackRow& r : track) {
    if (!r.y_m || r.frame < 0 || r.frame >= static_cast<int>(truth.frames.size())) continue;
    r.y_m = truth.frames[static_cast<size_t>(r.frame)].y_m + noise(rng);
  }
}

std::optional<double> g_presmooth_px;  // --presmooth

void RunClipJob(ClipJob& job, int bounces, bool retrack, bool white_control) {
  const std::string law = analysis::ToString(job.law);
  const std::string name = law + " " + HeightTag(job.height_m);
  if (!fs::exists(job.dir / "truth.json")) {
    cli::RenderCommandOptions ro;
    ro.out_dir = job.dir.string();
    ro.law = law;
    ro.params = TruthParams(job.law);
    ro.mass_kg = kMassKg;
    ro.heights_m = {job.height_m};
    ro.seed = 7001 + 10 * static_cast<uint64_t>(job.law) + static_cast<uint64_t>(job.index);
    ro.specimen = "bench-" + law;
    ro.free_radius_m = kFreeRadiusM;
    ro.section_radius_m = kSectionRadiusM;
    ro.duration_s = ClipDuration(job.law, job.height_m, bounces);
    ro.pre_release_s = kPreReleaseS;
    ro.calibration = false;
    ro.threads = 1;
    const auto t0 = std::chrono::steady_clock::now();
    if (cli::RunRender(ro) != 0) {
      job.error = "render failed";
      return;
    }
    job.render_s = Since(t0);
    fs::remove(job.dir / "track.csv");
  }
  const cli::RenderTruth truth = cli::ReadTruthFile(job.dir / "truth.json");
  job.rig = cli::ReadRigFile(job.dir / "rig_exact.json");
  const cli::Manifest manifest = cli::ReadManifest(job.dir);
  if (manifest.rows.size() != 1 || truth.clips.size() != 1 || !manifest.rows[0].ok()) {
    job.error = "unexpected render folder " + job.dir.string();
    return;
  }
  job.request = cli::ClipRequestFor(manifest.rows[0], job.dir);
  job.request.gravity_mps2 = truth.gravity_mps2;
  job.request.fit_laws = false;  // fitted below with the same functions, keeping the results
  job.impacts = truth.clips[0].impacts;
  job.frames = static_cast<int>(truth.clips[0].frames.size());
  job.fps = truth.clips[0].capture_fps;

  const fs::path track_file =
      job.dir / (g_presmooth_px ? "track_presmooth" + std::to_string(*g_presmooth_px) + ".csv" : "track.csv");
  if (!retrack && fs::exists(track_file)) {
    job.track = cli::ReadTrackCsv(track_file);
  } else if (g_presmooth_px) {
    const auto t0 = std::chrono::steady_clock::now();
    auto source = media::FrameSource::Open(job.request.clip_path);
    tracker::TrackOptions to;
    to.presmooth_sigma_px = *g_presmooth_px;
    const tracker::Track track = tracker::TrackClip(*source, to);
    job.track = cli::TrackRowsFromTrack(track, pipeline::TimeSeriesFromTrack(track, job.rig, job.fps), job.fps);
    job.track_s = Since(t0);
    cli::WriteTrackCsv(track_file, job.track);
  } else {
    const auto t0 = std::chrono::steady_clock::now();
    const cli::ClipAnalysis a = cli::AnalyzeAndRecordClip(job.request, job.rig);
    job.track_s = Since(t0);
    if (a.track.empty()) {
      job.error = "tracking failed";
      for (const std::string& e : a.result.errors) job.error += "; " + e;
      return;
    }
    job.track = a.track;
    cli::WriteTrackCsv(track_file, job.track);
  }

  TrackError(truth.clips[0], job.track, job, white_control);

  // Per-clip fits, geometry known: the pipeline's measurement (pipeline/clip.h, MeasureClip).
  const auto t0 = std::chrono::steady_clock::now();
  const analysis::TimeSeries series = cli::TimeSeriesFromTrackRows(job.track, job.fps);
  pipeline::MeasureOptions with_fits;
  with_fits.fit_laws = true;
  const pipeline::ClipMeasurement known = pipeline::MeasureClip(job.request, job.rig, series, job.fps, with_fits);
  if (known.kinematics.failure) {
    job.error = "kinematics: " + *known.kinematics.failure;
    return;
  }
  if (!known.laws) {
    job.error = "no complete bounce";
    return;
  }
  job.fits = known.laws->fits;
  job.fit_s = Since(t0);

  // The joint stage's input with the floor withheld (the rig as from a board-origin
  // calibration): the onset height is the track's estimate, then fitted.
  calib::Rig no_floor = job.rig;
  no_floor.y_origin = calib::YOrigin::kBoard;
  pipeline::MeasureOptions no_fits;
  no_fits.fit_laws = false;
  const pipeline::ClipMeasurement unknown = pipeline::MeasureClip(job.request, no_floor, series, job.fps, no_fits);
  if (unknown.fit_clip) job.unknown_clip = *unknown.fit_clip;
  char line[256];
  std::snprintf(line, sizeof line, "%s: %d frames, render %.1f s, track %.1f s, fits %.1f s, %zu bounce windows",
                name.c_str(), job.frames, job.render_s, job.track_s, job.fit_s, known.fit_clip->windows.size());
  Log(line);
}

struct JointJob {
  LawId law = LawId::kKelvinVoigt;
  std::vector<ClipJob*> clips;
  analysis::SpecimenFit fit;
  ClipImpacts impacts;  // per fit clip
  std::string error;
  double seconds = 0.0;
};

void RunJointJob(JointJob& job) {
  std::vector<analysis::FitClip> clips;
  for (ClipJob* c : job.clips) {
    if (!c->error.empty() || c->unknown_clip.windows.empty()) continue;
    clips.push_back(c->unknown_clip);
    job.impacts.push_back(c->impacts);
  }
  if (clips.size() < 2) {
    job.error = "fewer than two usable clips";
    return;
  }
  const auto t0 = std::chrono::steady_clock::now();
  job.fit = analysis::FitSpecimen(clips, pipeline::LawFitOptionsFor(job.clips.front()->request));
  job.seconds = Since(t0);
  char line[160];
  std::snprintf(line, sizeof line, "%s: joint fits over %zu clips, %.1f s", analysis::ToString(job.law).c_str(),
                clips.size(), job.seconds);
  Log(line);
}

template <typename Job, typename F>
void RunPool(std::vector<Job>& jobs, int threads, F&& f) {
  dropfit::cli::ParallelFor(jobs.size(), threads, [&](size_t i) {
    try {
      f(jobs[i]);
    } catch (const std::exception& e) {
      jobs[i].error = e.what();
      Log(std::string("job failed: ") + e.what());
    }
  });
}

std::vector<std::string> SplitList(const std::string& s) {
  std::vector<std::string> out;
  std::stringstream ss(s);
  std::string item;
  while (std::getline(ss, item, ','))
    if (!item.empty()) out.push_back(item);
  return out;
}

void PrintPlan(const std::vector<LawId>& laws, const std::vector<double>& heights, int bounces) {
  std::printf("== plan: forward-model truth of each clip (mass %.2f kg, free radius %.3f m, torus section %.3f m)\n",
              kMassKg, kFreeRadiusM, kSectionRadiusM);
  for (LawId law : laws) {
    for (double h : heights) {
      const analysis::Trajectory tr = analysis::SimulateDrop(Scenario(law, h));
      const double dur = ClipDuration(law, h, bounces);
      std::printf("%-14s h %.3f m: clip %.3f s (%d frames)", analysis::ToString(law).c_str(), h, dur,
                  static_cast<int>(dur * 2000) + 1);
      for (size_t i = 0; i < tr.impacts().size() && i < static_cast<size_t>(bounces); ++i) {
        const auto& im = tr.impacts()[i];
        std::printf(" | v %.2f m/s COR %.3f defl %.2f mm t_c %.2f ms F %.0f N", im.impact_speed_mps, im.cor,
                    1e3 * im.max_deflection_m, 1e3 * im.contact_duration_s, im.peak_force_n);
      }
      std::printf("\n");
    }
  }
}

struct Args {
  fs::path cache = fs::temp_directory_path() / ("dropfit_law_recovery_" + std::to_string(::getpid()));
  std::vector<LawId> laws = analysis::AllLaws();
  std::vector<double> heights = {0.05, 0.10, 0.15};
  int bounces = 2, threads = 2;
  bool retrack = false, plan = false, verbose = false, white_control = false;
};

// Nothing when the arguments are not understood (usage printed).
std::optional<Args> ParseArgs(int argc, char** argv) {
  Args a;
  for (int i = 1; i < argc; ++i) {
    const std::string arg = argv[i];
    const bool has_value = i + 1 < argc;
    if (arg == "--cache" && has_value) {
      a.cache = argv[++i];
    } else if (arg == "--laws" && has_value) {
      a.laws.clear();
      for (const std::string& s : SplitList(argv[++i])) a.laws.push_back(analysis::LawIdFromString(s));
    } else if (arg == "--heights" && has_value) {
      a.heights.clear();
      for (const std::string& s : SplitList(argv[++i])) a.heights.push_back(std::stod(s));
    } else if (arg == "--bounces" && has_value) {
      a.bounces = std::max(1, std::stoi(argv[++i]));
    } else if (arg == "--threads" && has_value) {
      a.threads = std::clamp(std::stoi(argv[++i]), 1, 16);
    } else if (arg == "--retrack") {
      a.retrack = true;
    } else if (arg == "--plan") {
      a.plan = true;
    } else if (arg == "--verbose") {
      a.verbose = true;
    } else if (arg == "--presmooth" && has_value) {
      g_presmooth_px = std::stod(argv[++i]);
    } else if (arg == "--white-control") {
      a.white_control = true;
    } else {
      std::fprintf(stderr,
                   "usage: law_recovery_bench [--cache DIR] [--laws a,b] [--heights h1,h2,h3] [--bounces N] "
                   "[--threads N] [--retrack] [--plan] [--verbose] [--white-control] [--presmooth S]\n");
      return std::nullopt;
    }
  }
  return a;
}

struct Tally {
  int passed = 0, failed = 0;
  void Count(bool ok) { ok ? ++passed : ++failed; }
};

// Per-clip fits with the geometry known: the true law's errors and the ranking of each clip.
void ReportPerClipFits(const std::vector<ClipJob>& clip_jobs, bool verbose, Tally& tally, int& rank_ok,
                       int& rank_total) {
  std::printf(
      "\n== per-clip fits, geometry known (floor + free radius): the true law's errors against truth, tolerance in "
      "brackets\n");
  std::map<LawId, std::pair<int, int>> per_law_rank;
  for (const ClipJob& c : clip_jobs) {
    const std::string label = analysis::ToString(c.law) + " " + HeightTag(c.height_m);
    if (!c.error.empty()) {
      std::printf("%-22s ERROR %s\n", label.c_str(), c.error.c_str());
      tally.Count(false);
      ++rank_total;
      continue;
    }
    const std::vector<Check> checks =
        ParameterChecks(c.law, c.fits[static_cast<size_t>(static_cast<int>(c.law))], {c.impacts});
    std::printf("%-22s%s\n", label.c_str(), FormatChecks(checks).c_str());
    std::printf("%-22s  tracking error: RMS %.1f um, sub-pixel-phase bias up to %.1f um; %zu bounces fitted\n", "",
                1e6 * c.track_rms_m, 1e6 * c.phase_bias_m,
                c.fits[static_cast<size_t>(static_cast<int>(c.law))].figures.size());
    for (const Check& k : checks) tally.Count(k.pass());
    const RankVerdict v = JudgeRanking(c.law, c.fits);
    std::printf("%-22s  BIC: %s-> %s\n", "", v.ranking.c_str(), v.how.c_str());
    if (verbose || !v.ok) PrintFits(c.fits);
    ++rank_total;
    rank_ok += v.ok ? 1 : 0;
    per_law_rank[c.law].first += v.ok ? 1 : 0;
    per_law_rank[c.law].second += 1;
  }
  std::printf("\n");
  for (const auto& [law, ok] : per_law_rank)
    std::printf("%-14s per-clip ranking %d/%d\n", analysis::ToString(law).c_str(), ok.first, ok.second);
}

// Joint fits with the geometry unknown: the true law's errors, the ranking and the holdout COR.
void ReportJointFits(const std::vector<JointJob>& joint_jobs, bool verbose, Tally& tally, int& rank_ok,
                     int& rank_total) {
  std::printf("\n== joint fits over the heights, geometry unknown (onset height fitted)\n");
  for (const JointJob& j : joint_jobs) {
    const std::string label = analysis::ToString(j.law) + " joint";
    if (!j.error.empty()) {
      std::printf("%-22s ERROR %s\n", label.c_str(), j.error.c_str());
      tally.Count(false);
      ++rank_total;
      continue;
    }
    std::vector<analysis::LawFitResult> fits;
    for (const analysis::JointFitResult& r : j.fit.laws) fits.push_back(r.fit);
    const analysis::JointFitResult& tj = j.fit.laws[static_cast<size_t>(static_cast<int>(j.law))];
    const std::vector<Check> checks = ParameterChecks(j.law, tj.fit, j.impacts);
    std::printf("%-22s%s  (%.1f s)\n", label.c_str(), FormatChecks(checks).c_str(), j.seconds);
    for (const Check& k : checks) tally.Count(k.pass());
    const RankVerdict v = JudgeRanking(j.law, fits);
    std::printf("%-22s  BIC: %s-> %s\n", "", v.ranking.c_str(), v.how.c_str());
    if (verbose || !v.ok) PrintFits(fits);
    ++rank_total;
    rank_ok += v.ok ? 1 : 0;
    for (const analysis::HoldoutError& h : tj.holdout) {
      const double e = h.failure ? INFINITY : h.cor_error_max_abs;
      std::printf("%-22s  holdout %.3f m: COR error mean %+.4f, max |.| %.4f (<= %.2f) %s%s\n", "", h.drop_height_m,
                  h.cor_error, h.cor_error_max_abs, kHoldoutCorTol, e <= kHoldoutCorTol ? "PASS" : "FAIL",
                  h.failure ? (" " + *h.failure).c_str() : "");
      tally.Count(e <= kHoldoutCorTol);
    }
  }
}

void ReportRankingShare(int rank_ok, int rank_total, int joint_rank_ok, int joint_rank_total, Tally& tally) {
  std::printf(
      "\n== BIC ranking: true law first, or within %.0f BIC of a law nesting it or describing the same bounces\n",
      kBicTol);
  const double share = rank_total > 0 ? static_cast<double>(rank_ok) / rank_total : 0.0;
  std::printf("per-clip fits: %d/%d = %.0f %% (target >= %.0f %%) %s\n", rank_ok, rank_total, 100 * share,
              100 * kRankShareTarget, share >= kRankShareTarget ? "PASS" : "FAIL");
  tally.Count(share >= kRankShareTarget);
  const double jshare = joint_rank_total > 0 ? static_cast<double>(joint_rank_ok) / joint_rank_total : 0.0;
  std::printf("joint fits:    %d/%d = %.0f %% (target >= %.0f %%) %s\n", joint_rank_ok, joint_rank_total, 100 * jshare,
              100 * kRankShareTarget, jshare >= kRankShareTarget ? "PASS" : "FAIL");
  tally.Count(jshare >= kRankShareTarget);
}

void ReportTimes(const std::vector<ClipJob>& clip_jobs, const std::vector<JointJob>& joint_jobs, double wall,
                 double cpu) {
  double render_s = 0, track_s = 0, fit_s = 0;
  for (const ClipJob& c : clip_jobs) {
    render_s += c.render_s;
    track_s += c.track_s;
    fit_s += c.fit_s;
  }
  double joint_s = 0;
  for (const JointJob& j : joint_jobs) joint_s += j.seconds;
  std::printf(
      "\ntime: wall %.1f s, CPU %.1f s (summed over jobs, wall: render %.1f s, track %.1f s, per-clip fits %.1f s, "
      "joint fits %.1f s)\n",
      wall, cpu, render_s, track_s, fit_s, joint_s);
}

}  // namespace

int main(int argc, char** argv) {
  google::InitGoogleLogging(argv[0]);
  FLAGS_minloglevel = 3;
  const std::optional<Args> parsed = ParseArgs(argc, argv);
  if (!parsed) return 2;
  const Args& args = *parsed;
  if (args.plan) {
    PrintPlan(args.laws, args.heights, args.bounces);
    return 0;
  }
  const auto wall0 = std::chrono::steady_clock::now();
  const std::clock_t cpu0 = std::clock();

  std::vector<ClipJob> clip_jobs;
  for (LawId law : args.laws) {
    for (size_t i = 0; i < args.heights.size(); ++i) {
      ClipJob j;
      j.law = law;
      j.height_m = args.heights[i];
      j.index = static_cast<int>(i);
      j.dir = args.cache / analysis::ToString(law) / HeightTag(args.heights[i]);
      clip_jobs.push_back(j);
    }
  }
  std::printf("law_recovery_bench: cache %s, %zu clips, heights", args.cache.string().c_str(), clip_jobs.size());
  for (double h : args.heights) std::printf(" %.3f", h);
  std::printf(" m, %d complete bounces per clip, %d threads\n", args.bounces, args.threads);
  if (args.white_control) {
    std::printf(
        "CONTROL RUN (--white-control): tracked heights replaced by truth + white noise of each clip's RMS "
        "tracking error\n");
  }
  std::fflush(stdout);
  RunPool(clip_jobs, args.threads, [&](ClipJob& j) { RunClipJob(j, args.bounces, args.retrack, args.white_control); });

  std::vector<JointJob> joint_jobs;
  for (LawId law : args.laws) {
    JointJob j;
    j.law = law;
    for (ClipJob& c : clip_jobs)
      if (c.law == law) j.clips.push_back(&c);
    joint_jobs.push_back(j);
  }
  RunPool(joint_jobs, args.threads, [&](JointJob& j) { RunJointJob(j); });

  Tally tally;
  int rank_ok = 0, rank_total = 0, joint_rank_ok = 0, joint_rank_total = 0;
  ReportPerClipFits(clip_jobs, args.verbose, tally, rank_ok, rank_total);
  ReportJointFits(joint_jobs, args.verbose, tally, joint_rank_ok, joint_rank_total);
  ReportRankingShare(rank_ok, rank_total, joint_rank_ok, joint_rank_total, tally);
  ReportTimes(clip_jobs, joint_jobs, Since(wall0), static_cast<double>(std::clock() - cpu0) / CLOCKS_PER_SEC);
  std::printf("law_recovery_bench: %d passed, %d failed\n", tally.passed, tally.failed);
  return tally.failed == 0 ? 0 : 1;
}
