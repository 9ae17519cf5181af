#include "plan/plan.h"

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <map>
#include <mutex>
#include <random>
#include <sstream>
#include <stdexcept>
#include <thread>

#include "analysis/fit_initial_guess.h"
#include "analysis/forward_model.h"
#include "analysis/kinematics.h"
#include "analysis/law_fit.h"
#include "pipeline/clip.h"
#include "plan/precision_table.h"
#include "synth/fit_synthetic.h"

namespace dropfit::plan {

namespace {

// Clip start before release when the marker is in view then [s] (as `dropfit render`).
constexpr double kPreReleaseS = 0.01;
// The simulated tracks start at release instead: on them the kinematics alone
// (analysis::AnalyzeKinematics) let the held frames before release double the COR's spread
// (measured: 40 realisations, 1,000 frames/s, 1 mm/px: 3.2e-5 with 10 held frames, 1.6e-5 without),
// while the road of `dropfit run` on rendered clips with those frames gave 1.5e-5 (bench/plan_bench);
// docs/methods.md §22.
constexpr double kSimulatedPreReleaseS = 0.0;
// The marker counts as in view with this margin inside the image [px] (synth/render.h,
// MarkerInView).
constexpr double kViewMarginPx = 2.0;
// Fewer realisations measured than this fraction: the setting does not measure that height.
constexpr double kMinMeasuredFraction = 0.5;

std::string Num(double v, int digits = 4) {
  std::ostringstream s;
  s.precision(digits);
  s << v;
  return s.str();
}

bool InRange(double v, double lo, double hi) { return std::isfinite(v) && v >= lo && v <= hi; }

double ViewTopM(const PlanOptions& o, const RateOffer& rate, double scale) {
  return (rate.height_px - 1 - o.floor_margin_px) * scale;
}

// Highest hub height at which the marker is wholly in view [m].
double HighestVisibleHubM(const PlanOptions& o, const RateOffer& rate, double scale) {
  return ViewTopM(o, rate, scale) - o.marker_diameter_m / 2 - kViewMarginPx * scale;
}

struct HeightTruth {
  double height_m = 0.0;
  analysis::Trajectory trajectory;  // release at t = 0
  analysis::ImpactTruth first;
  double second_contact_s = NAN;  // trajectory time; NaN when none in the simulation
};

HeightTruth SimulateHeight(const PlanOptions& o, const PlannedSpecimen& sp, double h) {
  HeightTruth t;
  t.height_m = h;
  const double fall = FallTime(h, o.gravity_mps2);
  const analysis::DropScenario scenario = synth::MakeDropScenario(
      sp.law, sp.params, analysis::TreadGeometry{}, o.mass_kg, o.free_radius_m, h, 3.0 * fall + 0.1, o.gravity_mps2);
  t.trajectory = analysis::SimulateDrop(scenario);
  const auto& impacts = t.trajectory.impacts();
  if (impacts.empty() || !impacts[0].complete) {
    throw std::invalid_argument("the planned specimen does not rebound from " + Num(h) +
                                " m: no complete first bounce (check the stiffness and the expected COR)");
  }
  t.first = impacts[0];
  if (impacts.size() > 1) t.second_contact_s = impacts[1].t_contact_s;
  return t;
}

// Samples of one realisation: the track the tracker would deliver, in metres.
analysis::TimeSeries PlannedTrack(const PlanOptions& o, const HeightTruth& truth, const RateOffer& rate, double scale,
                                  double exposure_s, const PlannedClip& span, std::mt19937_64& rng) {
  const synth::MarkerShape shape = synth::MarkerShapeFromString(o.marker);
  const double marker_px = o.marker_diameter_m / scale;
  const double top = HighestVisibleHubM(o, rate, scale);
  analysis::TimeSeries series = analysis::MakeTimeSeries(span.frames, rate.fps, 0);
  std::normal_distribution<double> normal(0.0, 1.0);
  std::uniform_real_distribution<double> uniform(0.0, 1.0);
  for (int k = 0; k < span.frames; ++k) {
    const analysis::HubState s = truth.trajectory.At(series.t_s[k] - span.release_time_s);
    const double z1 = normal(rng), z2 = normal(rng), u = uniform(rng);
    if (s.y_m > top) continue;  // marker out of view
    const Precision p = LookUpPrecision(shape, marker_px, BlurPx(std::abs(s.vy_mps), exposure_s, scale),
                                        o.read_noise_grey, o.contrast_grey);
    if (!std::isfinite(p.centre_sd_px) || u > p.found_fraction) continue;  // the tracker loses it
    const double sd_m = p.centre_sd_px * scale;
    series.y_m[k] = s.y_m + sd_m * z1;
    series.x_m[k] = s.x_m + sd_m * z2;
    series.valid[k] = true;
  }
  return series;
}

// The clip span (PlanClipSpan) given the second contact's time after release (NaN: none).
PlannedClip SpanOf(const PlanOptions& o, const RateOffer& rate, double scale, double h, double phase,
                   double second_contact_s, double pre_release_s) {
  const double g = o.gravity_mps2;
  const double release_hub = o.free_radius_m + h;
  const double top = HighestVisibleHubM(o, rate, scale);
  // Time after release at which the marker comes into view (0 when it is in view at release).
  const double t_enter = release_hub <= top ? 0.0 : std::sqrt(2.0 * (release_hub - top) / g);
  PlannedClip c;
  c.release_time_s = (t_enter > 0 ? -t_enter : pre_release_s) + phase / rate.fps;
  double end = 3.0 * FallTime(h, g) + 0.1;
  if (std::isfinite(second_contact_s)) end = second_contact_s - 2.0 / rate.fps;
  end = std::min(end, 3.0);
  c.frames = std::max(1, static_cast<int>(std::floor((c.release_time_s + end) * rate.fps)) + 1);
  return c;
}

}  // namespace

RateOffer ParseRateOffer(const std::string& text, int sensor_width_px, int sensor_height_px) {
  RateOffer r;
  const size_t colon = text.find(':');
  try {
    size_t used = 0;
    const std::string fps = text.substr(0, colon);
    r.fps = std::stod(fps, &used);
    if (used != fps.size()) throw std::invalid_argument("trailing text");
    if (colon == std::string::npos) {
      r.width_px = sensor_width_px;
      r.height_px = sensor_height_px;
    } else {
      const std::string size = text.substr(colon + 1);
      const size_t x = size.find('x');
      if (x == std::string::npos) throw std::invalid_argument("no x");
      const std::string w = size.substr(0, x), h = size.substr(x + 1);
      r.width_px = std::stoi(w, &used);
      if (used != w.size()) throw std::invalid_argument("trailing text");
      r.height_px = std::stoi(h, &used);
      if (used != h.size()) throw std::invalid_argument("trailing text");
    }
  } catch (const std::exception&) {
    throw std::invalid_argument("--rates '" + text + "' is not FPS:WIDTHxHEIGHT (e.g. 2000:1280x512) or FPS");
  }
  if (!InRange(r.fps, 1e-9, 1e6) || r.width_px < 16 || r.width_px > 8192 || r.height_px < 16 || r.height_px > 8192) {
    throw std::invalid_argument("--rates '" + text +
                                "': the rate must be in (0, 1e6] frames/s and each side in [16, 8192] px");
  }
  return r;
}

std::optional<std::string> ValidatePlanOptions(const PlanOptions& o) {
  auto bad = [](const std::string& name, double v, const std::string& range) {
    return std::optional<std::string>(name + " " + Num(v, 6) + " is outside " + range);
  };
  if (!InRange(o.mass_kg, 1e-12, 1e4) || o.mass_kg <= 0) return bad("--mass", o.mass_kg, "(0, 1e4] kg");
  if (!InRange(o.free_radius_m, 0.02, 1)) return bad("--free-radius", o.free_radius_m, "[0.02, 1] m");
  if (!InRange(o.static_force_n, 1e-12, 1e7)) return bad("--static-force", o.static_force_n, "(0, 1e7] N");
  if (!InRange(o.static_deflection_m, 1e-12, 0.5)) {
    return bad("--static-deflection", o.static_deflection_m, "(0, 0.5] m");
  }
  if (!(o.expected_cor > 0 && o.expected_cor < 1)) return bad("--cor", o.expected_cor, "(0, 1)");
  if (!InRange(o.cor_speed_mps, 1e-12, 20)) return bad("--cor-speed", o.cor_speed_mps, "(0, 20] m/s");
  if (o.heights_m.empty() && o.impact_speeds_mps.empty()) return "--heights: give at least one drop height";
  for (double h : o.heights_m) {
    if (!InRange(h, 1e-12, 5)) return bad("--heights", h, "(0, 5] m");
  }
  for (double v : o.impact_speeds_mps) {
    if (!InRange(v, 1e-12, 10)) return bad("--impact-speeds", v, "(0, 10] m/s");
  }
  if (o.sensor_width_px < 16 || o.sensor_width_px > 8192) return bad("--sensor", o.sensor_width_px, "[16, 8192] px");
  if (o.sensor_height_px < 16 || o.sensor_height_px > 8192) return bad("--sensor", o.sensor_height_px, "[16, 8192] px");
  if (o.rates.empty()) return "--rates: give at least one frame rate";
  for (const std::string& r : o.rates) {
    try {
      const RateOffer offer = ParseRateOffer(r, o.sensor_width_px, o.sensor_height_px);
      if (offer.width_px > o.sensor_width_px || offer.height_px > o.sensor_height_px) {
        return "--rates '" + r + "': the image is larger than the sensor (" + std::to_string(o.sensor_width_px) + "x" +
               std::to_string(o.sensor_height_px) + ")";
      }
    } catch (const std::invalid_argument& e) {
      return std::string(e.what());
    }
  }
  for (double s : o.scales_m_per_px) {
    if (!InRange(s, 1e-5, 0.1)) return bad("--scale", s, "[1e-5, 0.1] m/px");
  }
  if (!InRange(o.fov_width_m, 1e-3, 100)) return bad("--fov-width", o.fov_width_m, "[0.001, 100] m");
  if (!InRange(o.shortest_exposure_s, 1e-9, 1)) return bad("--exposure", o.shortest_exposure_s, "(0, 1] s");
  try {
    synth::MarkerShapeFromString(o.marker);
  } catch (const std::invalid_argument& e) {
    return "--marker: " + std::string(e.what());
  }
  if (!InRange(o.marker_diameter_m, 0.004, 0.2)) return bad("--marker-size", o.marker_diameter_m, "[0.004, 0.2] m");
  if (!InRange(o.read_noise_grey, 0, 50)) return bad("--read-noise", o.read_noise_grey, "[0, 50] grey levels");
  if (!InRange(o.contrast_grey, 5, 255)) return bad("--contrast", o.contrast_grey, "[5, 255] grey levels");
  if (!InRange(o.floor_margin_px, 0, 1000)) return bad("--floor-margin", o.floor_margin_px, "[0, 1000] px");
  if (!InRange(o.target_cor, 1e-9, 1)) return bad("--target-cor", o.target_cor, "(0, 1]");
  if (!InRange(o.target_duration, 1e-9, 1)) return bad("--target-duration", o.target_duration, "(0, 1]");
  if (!InRange(o.target_deflection, 1e-9, 1)) return bad("--target-deflection", o.target_deflection, "(0, 1]");
  if (!InRange(o.target_stiffness, 1e-9, 1)) return bad("--target-stiffness", o.target_stiffness, "(0, 1]");
  if (o.max_repeats < 1 || o.max_repeats > 100) return bad("--max-repeats", o.max_repeats, "[1, 100]");
  if (o.realisations < 4 || o.realisations > 1000) return bad("--realisations", o.realisations, "[4, 1000]");
  if (o.threads < 1 || o.threads > 64) return bad("--threads", o.threads, "[1, 64]");
  if (!InRange(o.gravity_mps2, 9.7, 9.9)) return bad("--gravity", o.gravity_mps2, "[9.7, 9.9] m/s^2");
  return std::nullopt;
}

PlannedSpecimen MakeSpecimen(const PlanOptions& o) {
  PlannedSpecimen sp;
  const double w = analysis::MultiplicativeDampingFromCor(o.expected_cor);  // alpha v, exact
  if (o.law.empty()) {
    if (!o.params.empty()) throw std::invalid_argument("--param needs --law");
    sp.law = analysis::LawId::kHertz;
    const double k = o.static_force_n / std::pow(o.static_deflection_m, 1.5);
    sp.params = {k, 1.5, w / o.cor_speed_mps};
    sp.how = "hertz from " + Num(o.static_force_n) + " N at " + Num(o.static_deflection_m * 1e3) +
             " mm (k = F / delta^1.5), damping from COR " + Num(o.expected_cor) + " at " + Num(o.cor_speed_mps) +
             " m/s (alpha v = " + Num(w) + ", the exact relation of the fits' starting values)";
    return sp;
  }
  sp.law = analysis::LawIdFromString(o.law);
  if (sp.law == analysis::LawId::kVolumetric || sp.law == analysis::LawId::kBottoming) {
    throw std::invalid_argument("--law " + o.law + ": plan supports kelvin-voigt, hunt-crossley, hertz and bilinear");
  }
  const std::vector<std::string>& names = analysis::ParameterNames(sp.law);
  std::map<std::string, double> given;
  for (const std::string& p : o.params) {
    const size_t eq = p.find('=');
    const std::string name = p.substr(0, eq);
    if (eq == std::string::npos || std::find(names.begin(), names.end(), name) == names.end()) {
      std::string valid;
      for (const std::string& n : names) valid += (valid.empty() ? "" : ", ") + n;
      throw std::invalid_argument("--param '" + p + "': expected name=value with a name of law " + o.law + " (" +
                                  valid + ")");
    }
    try {
      size_t used = 0;
      given[name] = std::stod(p.substr(eq + 1), &used);
      if (used != p.size() - eq - 1) throw std::invalid_argument("trailing");
    } catch (const std::exception&) {
      throw std::invalid_argument("--param '" + p + "': the value is not a number");
    }
  }
  if (sp.law == analysis::LawId::kHertz && !given.count("n")) given["n"] = 1.5;
  const std::string& damping = names.back();
  std::string how = o.law + " with the parameters given";
  if (!given.count(damping) && given.count(names[0])) {
    const double k = given[names[0]];
    if (sp.law == analysis::LawId::kKelvinVoigt) {
      given[damping] = 2.0 * analysis::KelvinVoigtZetaFromCor(o.expected_cor) * std::sqrt(k * o.mass_kg);
      how += ", damping from COR " + Num(o.expected_cor) + " (exact Kelvin-Voigt relation, speed-free)";
    } else if (sp.law != analysis::LawId::kBilinear) {
      given[damping] = w / o.cor_speed_mps;
      how += ", damping from COR " + Num(o.expected_cor) + " at " + Num(o.cor_speed_mps) + " m/s";
    }
  }
  for (const std::string& n : names) {
    if (!given.count(n)) throw std::invalid_argument("--param " + n + "=VALUE is needed for law " + o.law);
    sp.params.push_back(given[n]);
  }
  if (auto msg = analysis::ValidateLawParameters(sp.law, sp.params)) throw std::invalid_argument(*msg);
  sp.how = how;
  return sp;
}

std::vector<double> PlannedHeights(const PlanOptions& o) {
  if (o.impact_speeds_mps.empty()) return o.heights_m;
  std::vector<double> h;
  for (double v : o.impact_speeds_mps) h.push_back(v * v / (2.0 * o.gravity_mps2));
  return h;
}

std::vector<double> PlannedScales(const PlanOptions& o) {
  if (!o.scales_m_per_px.empty()) return o.scales_m_per_px;
  return {o.fov_width_m / o.sensor_width_px};
}

double HertzContactTime(double mass_kg, double k, double v) {
  const double delta_max = std::pow(5.0 * mass_kg * v * v / (4.0 * k), 0.4);
  return analysis::PowerLawContactTimeConstant(1.5) * delta_max / v;
}
double ImpactSpeed(double h, double g) { return std::sqrt(2.0 * g * h); }
double FallTime(double h, double g) { return std::sqrt(2.0 * h / g); }
double BlurPx(double speed_mps, double exposure_s, double scale_m_per_px) {
  return speed_mps * exposure_s / scale_m_per_px;
}

synth::CameraSetup SettingCamera(const PlanOptions& o, const RateOffer& rate, double scale) {
  synth::CameraSetup c;
  c.intrinsics.image_size = cv::Size(rate.width_px, rate.height_px);
  c.intrinsics.fx_px = c.intrinsics.fy_px = 1000.0;
  c.intrinsics.cx_px = rate.width_px / 2.0 - 0.5;
  c.intrinsics.cy_px = rate.height_px / 2.0 - 0.5;
  c.intrinsics.k1 = c.intrinsics.k2 = c.intrinsics.p1 = c.intrinsics.p2 = c.intrinsics.k3 = 0.0;
  c.distance_m = scale * 1000.0;
  c.aim_x_m = 0.0;
  // Floor row = cy + aim_y / scale = height - 1 - margin.
  c.aim_y_m = (rate.height_px / 2.0 - 0.5 - o.floor_margin_px) * scale;
  c.pitch_deg = c.roll_deg = c.yaw_deg = 0.0;
  return c;
}

PlannedClip PlanClipSpan(const PlanOptions& o, const PlannedSpecimen& sp, const RateOffer& rate, double scale, double h,
                         double phase) {
  const HeightTruth t = SimulateHeight(o, sp, h);
  return SpanOf(o, rate, scale, h, phase, t.second_contact_s, kPreReleaseS);
}

namespace {

ClipFigures Measure(const PlanOptions& o, const PlannedSpecimen& sp, const calib::Rig& rig, double h, double fps,
                    analysis::TimeSeries series) {
  ClipFigures f;
  pipeline::ClipRequest request;
  request.clip_id = "plan";
  request.mass_kg = o.mass_kg;
  request.drop_height_m = h;
  request.free_radius_m = o.free_radius_m;
  request.gravity_mps2 = o.gravity_mps2;
  const analysis::KinematicsOptions ko = pipeline::KinematicsOptionsFor(request, rig, fps);
  const analysis::KinematicsResult kin = analysis::AnalyzeKinematics(series, ko);
  if (kin.failure) {
    f.failure = "kinematics: " + *kin.failure;
    return f;
  }
  if (kin.impacts.empty() || !kin.impacts[0].complete) {
    f.failure = "the first bounce is not complete in the clip";
    return f;
  }
  const analysis::FitClip clip = analysis::MakeFitClip("plan", h, o.mass_kg, series, kin.segmentation, kin.impacts);
  const analysis::LawFitResult fit = analysis::FitLaw(sp.law, {clip}, pipeline::LawFitOptionsFor(request));
  if (fit.failure || !fit.converged) {
    f.failure = "law fit: " + fit.failure.value_or("did not converge");
    return f;
  }
  const auto first = std::find_if(fit.figures.begin(), fit.figures.end(),
                                  [](const analysis::BounceFitFigures& b) { return b.bounce_index == 0; });
  if (first == fit.figures.end()) {
    f.failure = "the first bounce was not fitted";
    return f;
  }
  f.ok = true;
  f.noise_sd_m = kin.segmentation.noise_sd_m;
  f.cor = kin.impacts[0].cor.value;
  f.duration_s = first->contact_duration_s;
  f.deflection_m = first->max_deflection_m;
  f.stiffness = fit.params.front();
  f.damping = fit.params.back();
  return f;
}

Spread SpreadOf(const std::vector<double>& v, double truth) {
  Spread s;
  s.truth = truth;
  if (v.empty()) {
    s.mean = s.sd = NAN;
    return s;
  }
  double sum = 0;
  for (double x : v) sum += x;
  s.mean = sum / v.size();
  double ss = 0;
  for (double x : v) ss += (x - s.mean) * (x - s.mean);
  s.sd = v.size() > 1 ? std::sqrt(ss / (v.size() - 1)) : NAN;
  return s;
}

int RepeatsFor(double sd, double target) {
  if (!std::isfinite(sd)) return 1000000;
  return std::max(1, static_cast<int>(std::ceil((sd / target) * (sd / target) - 1e-9)));
}

}  // namespace

PlanResult MakePlan(const PlanOptions& o, const PlanProgress& progress) {
  if (auto msg = ValidatePlanOptions(o)) throw std::invalid_argument(*msg);
  const auto start = std::chrono::steady_clock::now();
  PlanResult result;
  result.specimen = MakeSpecimen(o);
  result.heights_m = PlannedHeights(o);
  const PlannedSpecimen& sp = result.specimen;

  std::vector<HeightTruth> truths;
  for (double h : result.heights_m) truths.push_back(SimulateHeight(o, sp, h));

  // Settings: rates x scales.
  std::vector<calib::Rig> rigs;
  for (const std::string& r : o.rates) {
    const RateOffer rate = ParseRateOffer(r, o.sensor_width_px, o.sensor_height_px);
    for (double scale : PlannedScales(o)) {
      SettingResult s;
      s.rate = rate;
      s.scale_m_per_px = scale;
      s.exposure_s = std::min(o.shortest_exposure_s, 1.0 / rate.fps);
      s.marker_px = o.marker_diameter_m / scale;
      s.view_height_m = ViewTopM(o, rate, scale);
      s.view_width_m = rate.width_px * scale;
      s.wheel_fits = 2.0 * o.free_radius_m <= s.view_width_m;
      for (const HeightTruth& t : truths) {
        HeightResult hr;
        hr.height_m = t.height_m;
        hr.impact_speed_mps = t.first.impact_speed_mps;
        hr.frames_per_contact = t.first.contact_duration_s * rate.fps;
        hr.blur_px = BlurPx(t.first.impact_speed_mps, s.exposure_s, scale);
        const double top = HighestVisibleHubM(o, rate, scale);
        hr.release_in_view = o.free_radius_m + t.height_m <= top;
        const double apex = o.free_radius_m + std::pow(t.first.rebound_speed_mps, 2) / (2.0 * o.gravity_mps2);
        hr.rebound_in_view = apex <= top;
        hr.visible_fall_m = std::max(0.0, std::min(top, o.free_radius_m + t.height_m) - o.free_radius_m);
        s.heights.push_back(hr);
      }
      result.settings.push_back(s);
      rigs.push_back(synth::RigFromCamera(synth::MakeCamera(SettingCamera(o, rate, scale)), std::nullopt, rate.fps));
    }
  }
  // Spans per setting and height (the end depends on the height only, the start on the view).
  const size_t n_settings = result.settings.size(), n_heights = truths.size();
  const size_t n_real = static_cast<size_t>(o.realisations);
  const size_t total = n_settings * n_heights * n_real;
  std::vector<ClipFigures> figures(total);
  std::atomic<size_t> next{0};
  std::atomic<int> done{0};
  std::mutex progress_mutex;
  auto worker = [&] {
    for (size_t i = next++; i < total; i = next++) {
      const size_t si = i / (n_heights * n_real), hi = (i / n_real) % n_heights;
      const SettingResult& s = result.settings[si];
      std::mt19937_64 rng(o.seed * 1000003ULL + i * 7919ULL + 17);
      const double phase = std::uniform_real_distribution<double>(0.0, 1.0)(rng);
      try {
        if (s.heights[hi].visible_fall_m <= 0.0) {
          figures[i].failure = "the marker is never in view above the contact";
        } else {
          const PlannedClip span = SpanOf(o, s.rate, s.scale_m_per_px, truths[hi].height_m, phase,
                                          truths[hi].second_contact_s, kSimulatedPreReleaseS);
          analysis::TimeSeries series = PlannedTrack(o, truths[hi], s.rate, s.scale_m_per_px, s.exposure_s, span, rng);
          figures[i] = Measure(o, sp, rigs[si], truths[hi].height_m, s.rate.fps, std::move(series));
        }
      } catch (const std::exception& e) {
        figures[i].failure = e.what();
      }
      const int d = ++done;
      if (progress) {
        std::lock_guard<std::mutex> lock(progress_mutex);
        progress(d, static_cast<int>(total));
      }
    }
  };
  {
    std::vector<std::jthread> pool;
    for (int t = 1; t < o.threads; ++t) pool.emplace_back(worker);
    worker();
  }

  // Spreads, repeats, the choice.
  for (size_t si = 0; si < n_settings; ++si) {
    SettingResult& s = result.settings[si];
    int repeats = 1;
    bool possible = true;
    for (size_t hi = 0; hi < n_heights; ++hi) {
      HeightResult& hr = s.heights[hi];
      const HeightTruth& t = truths[hi];
      std::vector<double> cor, dur, defl, k, c, noise;
      for (size_t ri = 0; ri < n_real; ++ri) {
        const ClipFigures& f = figures[(si * n_heights + hi) * n_real + ri];
        if (!f.ok) {
          if (hr.failure.empty()) hr.failure = f.failure;
          continue;
        }
        cor.push_back(f.cor);
        dur.push_back(f.duration_s);
        defl.push_back(f.deflection_m);
        k.push_back(f.stiffness);
        c.push_back(f.damping);
        noise.push_back(f.noise_sd_m);
      }
      hr.track_noise_sd_m = SpreadOf(noise, 0.0).mean;
      hr.measured = static_cast<int>(cor.size());
      hr.cor = SpreadOf(cor, t.first.cor);
      hr.duration_s = SpreadOf(dur, t.first.contact_duration_s);
      hr.deflection_m = SpreadOf(defl, t.first.max_deflection_m);
      hr.stiffness = SpreadOf(k, sp.params.front());
      hr.damping = SpreadOf(c, sp.params.back());
      const std::string at = " at " + Num(hr.height_m) + " m";
      if (hr.measured < kMinMeasuredFraction * o.realisations) {
        possible = false;
        s.missing.push_back("only " + std::to_string(hr.measured) + " of " + std::to_string(o.realisations) +
                            " simulated clips measured" + at + (hr.failure.empty() ? "" : " (" + hr.failure + ")"));
        continue;
      }
      const int need = std::max({RepeatsFor(hr.cor.sd, o.target_cor),
                                 RepeatsFor(hr.duration_s.sd, o.target_duration * hr.duration_s.truth),
                                 RepeatsFor(hr.deflection_m.sd, o.target_deflection * hr.deflection_m.truth),
                                 RepeatsFor(hr.stiffness.sd, o.target_stiffness * hr.stiffness.truth)});
      hr.repeats_needed = need <= o.max_repeats ? need : 0;
      auto miss = [&](const char* name, double sd, double target, const char* unit, double factor) {
        if (RepeatsFor(sd, target) > o.max_repeats) {
          s.missing.push_back(std::string(name) + at + ": one clip's sd " + Num(sd * factor, 3) + unit + " needs " +
                              "more than " + std::to_string(o.max_repeats) + " repeats for the target " +
                              Num(target * factor, 3) + unit);
        }
      };
      miss("COR", hr.cor.sd, o.target_cor, "", 1.0);
      miss("contact duration", hr.duration_s.sd, o.target_duration * hr.duration_s.truth, " ms", 1e3);
      miss("max deflection", hr.deflection_m.sd, o.target_deflection * hr.deflection_m.truth, " mm", 1e3);
      miss("stiffness", hr.stiffness.sd / hr.stiffness.truth, o.target_stiffness, " (relative)", 1.0);
      if (hr.repeats_needed == 0) possible = false;
      repeats = std::max(repeats, need);
    }
    s.repeats = possible ? repeats : 0;
  }
  std::optional<size_t> best;
  for (size_t i = 0; i < n_settings; ++i) {
    const SettingResult& s = result.settings[i];
    if (s.repeats == 0) continue;
    if (!best) {
      best = i;
      continue;
    }
    const SettingResult& b = result.settings[*best];
    if (std::tie(s.rate.fps, s.repeats) < std::tie(b.rate.fps, b.repeats) ||
        (s.rate.fps == b.rate.fps && s.repeats == b.repeats && s.scale_m_per_px > b.scale_m_per_px)) {
      best = i;
    }
  }
  result.chosen = best;
  if (best) {
    const SettingResult& b = result.settings[*best];
    result.verdict = "cheapest setting meeting every target: " + Num(b.rate.fps) + " frames/s at " +
                     std::to_string(b.rate.width_px) + "x" + std::to_string(b.rate.height_px) + " px, " +
                     Num(b.scale_m_per_px * 1e3) + " mm/px, exposure " + Num(b.exposure_s * 1e6) + " us, " +
                     std::to_string(b.repeats) + " repeat" + (b.repeats > 1 ? "s" : "") + " per height";
  } else {
    result.verdict = "no setting meets every target with at most " + std::to_string(o.max_repeats) +
                     " repeats; see what is missing per setting";
  }
  result.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  return result;
}

Spread SpreadOf(const std::vector<ClipFigures>& clips, double ClipFigures::*field) {
  std::vector<double> v;
  for (const ClipFigures& c : clips) {
    if (c.ok) v.push_back(c.*field);
  }
  return SpreadOf(v, NAN);
}

}  // namespace dropfit::plan
