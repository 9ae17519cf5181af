// Contact-law fit benchmark: timings, iteration counts and recovery figures on tracks of the
// forward model (analysis/forward_model.h) with white noise. Prints numbers; asserts nothing.
//
//   fit_bench [--quick]
//
// Sections:
//   1. all five laws on one clip (3 bounces, 2000 frames/s), per law: time, iterations,
//      starts, BIC; geometry known and unknown.
//   2. joint fits of 12 clips (4 heights x 3 clips), geometry unknown: time per law, and
//      the leave-one-height-out run of the true law.
//   3. recovery per truth law: per-clip fits with the geometry known, and joint fits over
//      three heights with the geometry unknown: stiffness (power laws: the force at the
//      clip's maximum deflection), damping, exponent, contact duration, peak force, onset
//      height, BIC rank of the true law, holdout COR error.
#include <glog/logging.h>

#include <cmath>
#include <cstdio>
#include <cstring>
#include <ctime>
#include <string>
#include <vector>

#include "analysis/joint_fit.h"
#include "analysis/law_fit.h"
#include "synth/fit_synthetic.h"

namespace {

using namespace dropfit::analysis;
using namespace dropfit::synth;

constexpr double kMassKg = 10.0;
constexpr double kOnsetM = 0.3;
constexpr double kNoiseM = 5e-5;

// The damping parameter (c, alpha or a) is the last of every law's ParameterNames.
int DampingIndex(LawId law) { return ParameterCount(law) - 1; }

FitClip Clip(LawId law, double drop_m, std::uint64_t seed, bool geometry_known, double* max_deflection_m = nullptr,
             double* duration_s = nullptr, double* peak_n = nullptr) {
  const DropScenario s = MakeDropScenario(law, TyreLikeLawParams(law), TyreLikeTread(), kMassKg, kOnsetM, drop_m, 1.0);
  SyntheticClipOptions so;
  so.noise_sd_m = kNoiseM;
  so.seed = seed;
  so.geometry_known = geometry_known;
  so.onset_guess_error_m = 1e-3;
  so.drop_height_m = drop_m;
  SyntheticClip c = MakeSyntheticClip("bench", s, so);
  const ImpactTruth& first = c.truth.impacts().front();
  if (max_deflection_m) *max_deflection_m = first.max_deflection_m;
  if (duration_s) *duration_s = first.contact_duration_s;
  if (peak_n) *peak_n = first.peak_force_n;
  return c.clip;
}

LawFitOptions Options() {
  LawFitOptions o;
  o.tread = TyreLikeTread();
  return o;
}

// CPU time of this process (one thread): the machine may be shared, so wall time overstates.
struct Clock {
  std::clock_t cpu = std::clock();
};
double Seconds(const Clock& c) { return static_cast<double>(std::clock() - c.cpu) / CLOCKS_PER_SEC; }

void FiveLawsOnOneClip(bool geometry_known) {
  std::printf("\n== 1. five laws on one clip (hunt-crossley truth, 3 bounces, 2000 fps, noise %.0e m, geometry %s)\n",
              kNoiseM, geometry_known ? "known" : "fitted");
  const FitClip clip = Clip(LawId::kHuntCrossley, 0.2, 5, geometry_known);
  double total = 0.0;
  std::printf("%-14s %8s %6s %6s %12s %12s %9s\n", "law", "cpu_s", "iters", "starts", "rms_m", "bic", "converged");
  for (LawId law : AllLaws()) {
    const Clock t0;
    const LawFitResult fit = FitLaw(law, {clip}, Options());
    const double dt = Seconds(t0);
    total += dt;
    std::printf("%-14s %8.3f %6d %6d %12.3e %12.1f %9s\n", ToString(law).c_str(), dt, fit.iterations, fit.starts,
                fit.rms_residual_m, fit.bic, fit.converged ? "yes" : "no");
  }
  std::printf("all five laws: %.3f s (target < 1 s on one core)\n", total);
}

void JointTwelveClips() {
  std::printf("\n== 2. joint fit of 12 clips (4 heights x 3 clips, hunt-crossley truth, geometry fitted)\n");
  std::vector<FitClip> clips;
  int seed = 100;
  for (double h : {0.1, 0.2, 0.3, 0.45})
    for (int r = 0; r < 3; ++r) clips.push_back(Clip(LawId::kHuntCrossley, h, seed++, false));
  double total = 0.0;
  std::printf("%-14s %8s %6s %6s %12s %12s %9s\n", "law", "cpu_s", "iters", "starts", "rms_m", "bic", "converged");
  for (LawId law : AllLaws()) {
    const Clock t0;
    const LawFitResult fit = FitLaw(law, clips, Options());
    const double dt = Seconds(t0);
    total += dt;
    std::printf("%-14s %8.3f %6d %6d %12.3e %12.1f %9s\n", ToString(law).c_str(), dt, fit.iterations, fit.starts,
                fit.rms_residual_m, fit.bic, fit.converged ? "yes" : "no");
  }
  std::printf("all five joint fits: %.3f s (target: one joint fit < 15 s)\n", total);
  const Clock t0;
  const JointFitResult joint = FitJoint(LawId::kHuntCrossley, clips, Options());
  std::printf("hunt-crossley joint fit + leave-one-height-out (4 heights): %.3f s\n", Seconds(t0));
  for (const HoldoutError& h : joint.holdout) {
    std::printf(
        "  held out %.2f m: cor_error %+.4f (max |.| %.4f)  duration_error %+.3f ms  deflection_error %+.3f mm%s\n",
        h.drop_height_m, h.cor_error, h.cor_error_max_abs, 1e3 * h.contact_duration_error_s,
        1e3 * h.max_deflection_error_m, h.failure ? (" FAILED: " + *h.failure).c_str() : "");
  }
}

void Recovery(int clips_per_law) {
  std::printf("\n== 3a. recovery, per-clip fits, geometry known (%d clips per truth law, drops 0.1-0.35 m)\n",
              clips_per_law);
  std::printf("%-14s %10s %10s %9s %11s %10s %12s\n", "truth", "stiff_%", "damp_%", "exp_abs", "t_c_ms", "peak_%",
              "rank_ok_%");
  const std::vector<double> heights = {0.1, 0.2, 0.35};
  for (LawId truth : AllLaws()) {
    double worst_stiff = 0, worst_damp = 0, worst_exp = 0, worst_tc = 0, worst_peak = 0;
    int rank_ok = 0;
    for (int r = 0; r < clips_per_law; ++r) {
      double dmax = 0, tc = 0, peak = 0;
      const FitClip clip = Clip(truth, heights[r % heights.size()], 500 + r, true, &dmax, &tc, &peak);
      const LawComparison all = FitAllLaws({clip}, Options());
      const LawFitResult& fit = all.fits[static_cast<int>(truth)];
      const std::vector<double> t = TyreLikeLawParams(truth);
      const TreadGeometry tread = TyreLikeTread();
      const double f_fit = ElasticContactForce(truth, fit.params.data(), tread, dmax);
      const double f_true = ElasticContactForce(truth, t.data(), tread, dmax);
      worst_stiff = std::max(worst_stiff, std::abs(f_fit / f_true - 1.0));
      if (truth == LawId::kBilinear) {  // both stiffnesses count
        worst_stiff = std::max(worst_stiff, std::abs(fit.params[0] / t[0] - 1.0));
      }
      const int d = DampingIndex(truth);
      worst_damp = std::max(worst_damp, std::abs(fit.params[d] / t[d] - 1.0));
      if (truth == LawId::kHuntCrossley) worst_exp = std::max(worst_exp, std::abs(fit.params[1] - t[1]));
      if (!fit.figures.empty()) {
        worst_tc = std::max(worst_tc, std::abs(fit.figures[0].contact_duration_s - tc));
        worst_peak = std::max(worst_peak, std::abs(fit.figures[0].peak_force_n / peak - 1.0));
      }
      if (all.choice.best) {
        const LawFitResult& best = all.fits[*all.choice.best];
        if (best.law == truth ||
            ((LawNests(best.law, truth) || truth == LawId::kHertz || truth == LawId::kVolumetric) &&
             fit.bic - best.bic < 2.0)) {
          ++rank_ok;
        } else {  // say which law won, by how much, and with what
          std::printf("  (%s clip %d, drop %.2f m: %s ranked first by %.1f BIC:", ToString(truth).c_str(), r,
                      heights[r % heights.size()], ToString(best.law).c_str(), fit.bic - best.bic);
          for (size_t i = 0; i < best.params.size(); ++i)
            std::printf(" %s=%.5g", best.param_names[i].c_str(), best.params[i]);
          std::printf("; rms %.3g vs %.3g um)\n", 1e6 * best.rms_residual_m, 1e6 * fit.rms_residual_m);
        }
      }
    }
    std::printf("%-14s %10.3f %10.3f %9.4f %11.4f %10.3f %12.0f\n", ToString(truth).c_str(), 100 * worst_stiff,
                100 * worst_damp, worst_exp, 1e3 * worst_tc, 100 * worst_peak, 100.0 * rank_ok / clips_per_law);
  }
  std::printf(
      "(worst over the clips; targets: stiffness 2 %%, damping 10 %%, exponent 0.05, t_c 0.1 ms, peak 3 %%,"
      " rank >= 90 %%; hertz vs volumetric-cylinder counted as numerically equivalent)\n");

  std::printf("\n== 3b. recovery, joint fits over 3 heights (0.1, 0.2, 0.35 m), geometry fitted\n");
  std::printf("%-14s %10s %10s %9s %11s %12s %10s\n", "truth", "stiff_%", "damp_%", "exp_abs", "onset_mm",
              "holdout_cor", "cpu_s");
  for (LawId truth : AllLaws()) {
    std::vector<FitClip> clips;
    double dmax = 0;
    for (size_t i = 0; i < heights.size(); ++i)
      clips.push_back(Clip(truth, heights[i], 700 + i, false, i == 1 ? &dmax : nullptr));
    const Clock t0;
    const JointFitResult joint = FitJoint(truth, clips, Options());
    const double dt = Seconds(t0);
    const LawFitResult& fit = joint.fit;
    if (fit.failure) {
      std::printf("%-14s failed: %s\n", ToString(truth).c_str(), fit.failure->c_str());
      continue;
    }
    const std::vector<double> t = TyreLikeLawParams(truth);
    const double stiff = std::abs(ElasticContactForce(truth, fit.params.data(), TyreLikeTread(), dmax) /
                                      ElasticContactForce(truth, t.data(), TyreLikeTread(), dmax) -
                                  1.0);
    const int d = DampingIndex(truth);
    double holdout = 0.0;
    for (const HoldoutError& h : joint.holdout) holdout = std::max(holdout, h.failure ? 1.0 : h.cor_error_max_abs);
    std::printf("%-14s %10.3f %10.3f %9.4f %11.4f %12.4f %10.2f\n", ToString(truth).c_str(), 100 * stiff,
                100 * std::abs(fit.params[d] / t[d] - 1.0),
                truth == LawId::kHuntCrossley ? std::abs(fit.params[1] - t[1]) : 0.0,
                1e3 * std::abs(fit.onset_height_m - kOnsetM), holdout, dt);
  }
  std::printf("(targets: onset 0.2 mm, holdout COR 0.01)\n");
}

}  // namespace

int main(int argc, char** argv) {
  google::InitGoogleLogging(argv[0]);
  FLAGS_minloglevel = 3;
  const bool quick = argc > 1 && std::strcmp(argv[1], "--quick") == 0;
  FiveLawsOnOneClip(true);
  FiveLawsOnOneClip(false);
  JointTwelveClips();
  Recovery(quick ? 3 : 9);
  return 0;
}
