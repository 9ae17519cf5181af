#include "cli/run_plan.h"

#include <unistd.h>

#include <nlohmann/json.hpp>

#include <atomic>
#include <cmath>
#include <cstdio>
#include <iostream>
#include <mutex>
#include <random>
#include <thread>

#include "analysis/forward_model.h"
#include "cli/atomic_write.h"
#include "cli/exit_status.h"
#include "cli/parallel_for.h"
#include "dropfit/version.h"
#include "media/video_out.h"
#include "pipeline/clip.h"
#include "synth/camera.h"
#include "synth/fit_synthetic.h"
#include "synth/render.h"

namespace dropfit::cli {

namespace {

using nlohmann::json;

json Num(double v) { return std::isfinite(v) ? json(v) : json(nullptr); }

json SpreadJson(const plan::Spread& s, int repeats) {
  return {{"truth", Num(s.truth)},
          {"mean", Num(s.mean)},
          {"sd", Num(s.sd)},
          {"sd_repeats", Num(s.sd / std::sqrt(static_cast<double>(repeats)))}};
}

json InputsJson(const plan::PlanOptions& o) {
  return {{"mass_kg", o.mass_kg},
          {"free_radius_m", o.free_radius_m},
          {"law", o.law},
          {"params", o.params},
          {"static_force_n", o.static_force_n},
          {"static_deflection_m", o.static_deflection_m},
          {"expected_cor", o.expected_cor},
          {"cor_speed_mps", o.cor_speed_mps},
          {"heights_m", o.heights_m},
          {"impact_speeds_mps", o.impact_speeds_mps},
          {"sensor_px", {o.sensor_width_px, o.sensor_height_px}},
          {"rates", o.rates},
          {"scales_m_per_px", o.scales_m_per_px},
          {"fov_width_m", o.fov_width_m},
          {"shortest_exposure_s", o.shortest_exposure_s},
          {"marker", o.marker},
          {"marker_diameter_m", o.marker_diameter_m},
          {"read_noise_grey", o.read_noise_grey},
          {"contrast_grey", o.contrast_grey},
          {"floor_margin_px", o.floor_margin_px},
          {"target_cor", o.target_cor},
          {"target_duration", o.target_duration},
          {"target_deflection", o.target_deflection},
          {"target_stiffness", o.target_stiffness},
          {"max_repeats", o.max_repeats},
          {"realisations", o.realisations},
          {"seed", o.seed},
          {"gravity_mps2", o.gravity_mps2}};
}

// Terminal progress on stderr, rewritten in place, only on a terminal.
class Progress {
 public:
  explicit Progress(std::ostream& err) : err_(err), tty_(&err == &std::cerr && ::isatty(STDERR_FILENO) == 1) {}
  void operator()(const char* what, int done, int total) {
    if (!tty_) return;
    err_ << "\r" << what << " " << done << "/" << total << std::flush;
    if (done == total) err_ << "\r\033[K" << std::flush;
  }

 private:
  std::ostream& err_;
  bool tty_;
};

}  // namespace

plan::ClipFigures RenderAndMeasure(const plan::PlanOptions& o, const plan::PlannedSpecimen& sp,
                                   const plan::RateOffer& rate, double scale, double h, uint64_t seed,
                                   const std::filesystem::path& work_dir) {
  plan::ClipFigures f;
  std::mt19937_64 rng(seed);
  const double phase = std::uniform_real_distribution<double>(0.0, 1.0)(rng);
  const plan::PlannedClip span = plan::PlanClipSpan(o, sp, rate, scale, h, phase);
  const synth::PinholeCamera camera = synth::MakeCamera(plan::SettingCamera(o, rate, scale));
  synth::WheelLook look;
  look.free_radius_m = o.free_radius_m;
  look.rim_radius_m = 0.55 * o.free_radius_m;
  look.marker = synth::MarkerShapeFromString(o.marker);
  look.marker_diameter_m = o.marker_diameter_m;
  synth::SceneLook scene;
  scene.texture_seed = seed;
  const synth::SceneRenderer renderer(camera, look, scene);

  const double exposure_s = std::min(o.shortest_exposure_s, 1.0 / rate.fps);
  const double end_s = span.frames / rate.fps + exposure_s;
  analysis::DropScenario scenario =
      synth::MakeDropScenario(sp.law, sp.params, analysis::TreadGeometry{}, o.mass_kg, o.free_radius_m, h,
                              end_s - span.release_time_s, o.gravity_mps2);
  scenario.start_time_s = span.release_time_s;
  scenario.end_time_s = end_s;
  scenario.spin_rate_radps = 1.5;
  const analysis::Trajectory trajectory = analysis::SimulateDrop(scenario);

  synth::ExposureSettings exposure;
  exposure.exposure_s = exposure_s;
  const double blur = plan::BlurPx(plan::ImpactSpeed(h, o.gravity_mps2), exposure_s, scale);
  exposure.subframes = std::clamp(static_cast<int>(std::ceil(blur * 2.0)), 2, 64);  // >= 2 per px of blur
  exposure.read_noise_grey = o.read_noise_grey;

  std::filesystem::create_directories(work_dir);
  const std::filesystem::path file = work_dir / ("check_" + std::to_string(seed) + ".mov");
  {
    auto sink = media::OpenFrameSink(file, media::VideoFormat::kFfv1Mov, renderer.image_size(), rate.fps);
    synth::RenderClip(renderer, trajectory, span.frames, rate.fps, exposure, true, seed ^ 0x5EED, *sink);
    sink->Close();
  }
  pipeline::ClipRequest request;
  request.clip_path = file;
  request.clip_id = file.stem().string();
  request.mass_kg = o.mass_kg;
  request.drop_height_m = h;
  request.free_radius_m = o.free_radius_m;
  request.fps_option = rate.fps;
  request.gravity_mps2 = o.gravity_mps2;
  const calib::Rig rig = synth::RigFromCamera(camera, std::nullopt, rate.fps);
  pipeline::OpenedClip opened = pipeline::OpenClip(request, rig);
  const pipeline::ClipOutcome outcome = pipeline::AnalyzeClip(request, rig, std::move(opened));
  std::filesystem::remove(file);
  if (!outcome.measurement) {
    f.failure = outcome.opened.problem.value_or("the marker was never found");
    return f;
  }
  const pipeline::ClipMeasurement& m = *outcome.measurement;
  if (m.kinematics.failure || m.kinematics.impacts.empty() || !m.kinematics.impacts[0].complete) {
    f.failure = m.kinematics.failure.value_or("the first bounce is not complete");
    return f;
  }
  if (!m.laws) {
    f.failure = "no law fits";
    return f;
  }
  for (const analysis::LawFitResult& fit : m.laws->fits) {
    if (fit.law != sp.law) continue;
    if (fit.failure || !fit.converged) {
      f.failure = "law fit: " + fit.failure.value_or("did not converge");
      return f;
    }
    for (const analysis::BounceFitFigures& b : fit.figures) {
      if (b.bounce_index != 0) continue;
      f.ok = true;
      f.noise_sd_m = m.kinematics.segmentation.noise_sd_m;
      f.cor = m.kinematics.impacts[0].cor.value;
      f.duration_s = b.contact_duration_s;
      f.deflection_m = b.max_deflection_m;
      f.stiffness = fit.params.front();
      f.damping = fit.params.back();
      return f;
    }
  }
  f.failure = "the planned law's fit has no first bounce";
  return f;
}

std::vector<plan::ClipFigures> RenderCheck(const plan::PlanOptions& o, const plan::PlannedSpecimen& sp,
                                           const plan::RateOffer& rate, double scale, double h, int n, uint64_t seed,
                                           int threads, const std::filesystem::path& work_dir,
                                           const std::function<void(int, int)>& done) {
  std::vector<plan::ClipFigures> clips(static_cast<size_t>(n));
  std::mutex mutex;
  int finished = 0;
  ParallelFor(clips.size(), threads, [&](size_t i) {
    try {
      clips[i] = RenderAndMeasure(o, sp, rate, scale, h, seed * 1000 + i + 1, work_dir);
    } catch (const std::exception& e) {
      clips[i].failure = e.what();
    }
    std::lock_guard<std::mutex> lock(mutex);
    ++finished;
    if (done) done(finished, n);
  });
  return clips;
}

int RunPlan(const PlanCommandOptions& options, std::ostream& out, std::ostream& err) {
  const plan::PlanOptions& o = options.plan;
  if (auto msg = plan::ValidatePlanOptions(o)) {
    err << "dropfit plan: " << *msg << "\n";
    return kExitBadUsage;
  }
  if (options.render < 0 || options.render > 200) {
    err << "dropfit plan: --render " << options.render << " is outside [0, 200]\n";
    return kExitBadUsage;
  }
  plan::PlanResult result;
  Progress progress(err);
  try {
    result = plan::MakePlan(o, [&](int done, int total) { progress("simulated clips", done, total); });
  } catch (const std::invalid_argument& e) {
    err << "dropfit plan: " << e.what() << "\n";
    return kExitBadUsage;
  }
  out << plan::FormatPlanTable(o, result);

  json check = nullptr;
  if (options.render > 0) {
    const plan::SettingResult& s = result.settings[result.chosen.value_or(0)];
    check = json::array();
    out << "\ncheck: " << options.render << " rendered clips per height at " << s.rate.fps << " frames/s, "
        << s.scale_m_per_px * 1e3 << " mm/px (" << (result.chosen ? "the choice" : "no choice: the first setting")
        << "), analysed as `dropfit run` does\n";
    for (size_t hi = 0; hi < s.heights.size(); ++hi) {
      const plan::HeightResult& hr = s.heights[hi];
      const auto clips = RenderCheck(o, result.specimen, s.rate, s.scale_m_per_px, hr.height_m, options.render,
                                     o.seed + 7 * hi, o.threads, std::filesystem::path(options.out_dir) / "check",
                                     [&](int d, int t) { progress("rendered clips", d, t); });
      int ok = 0;
      std::string failure;
      for (const auto& c : clips) {
        ok += c.ok;
        if (!c.ok && failure.empty()) failure = c.failure;
      }
      json row = {{"height_m", hr.height_m}, {"clips", options.render}, {"measured", ok}};
      char line[256];
      std::snprintf(line, sizeof line, "  %.3g m: %d/%d measured%s%s\n", hr.height_m, ok, options.render,
                    failure.empty() ? "" : "; first failure: ", failure.c_str());
      out << line;
      const std::pair<const char*, std::pair<double plan::ClipFigures::*, const plan::Spread*>> figures[] = {
          {"cor", {&plan::ClipFigures::cor, &hr.cor}},
          {"contact_duration_s", {&plan::ClipFigures::duration_s, &hr.duration_s}},
          {"max_deflection_m", {&plan::ClipFigures::deflection_m, &hr.deflection_m}},
          {"stiffness", {&plan::ClipFigures::stiffness, &hr.stiffness}},
          {"damping", {&plan::ClipFigures::damping, &hr.damping}}};
      for (const auto& [name, what] : figures) {
        const plan::Spread st = plan::SpreadOf(clips, what.first);
        row[name] = {{"predicted_sd", Num(what.second->sd)},
                     {"measured_sd", Num(st.sd)},
                     {"measured_mean", Num(st.mean)},
                     {"truth", Num(what.second->truth)}};
        std::snprintf(line, sizeof line, "    %-20s predicted sd %-11.4g measured sd %-11.4g (mean %.5g, truth %.5g)\n",
                      name, what.second->sd, st.sd, st.mean, what.second->truth);
        out << line;
      }
      check.push_back(row);
    }
    std::filesystem::remove_all(std::filesystem::path(options.out_dir) / "check");
  }

  json j;
  j["tool"] = "dropfit plan";
  j["version"] = kVersion;
  j["inputs"] = InputsJson(o);
  json params = json::object();
  const auto& names = analysis::ParameterNames(result.specimen.law);
  for (size_t i = 0; i < names.size(); ++i) params[names[i]] = result.specimen.params[i];
  j["specimen"] = {{"law", analysis::ToString(result.specimen.law)}, {"params", params}, {"how", result.specimen.how}};
  j["heights_m"] = result.heights_m;
  j["settings"] = json::array();
  for (const plan::SettingResult& s : result.settings) {
    const int repeats = s.repeats ? s.repeats : o.max_repeats;
    json heights = json::array();
    for (const plan::HeightResult& h : s.heights) {
      heights.push_back({{"height_m", h.height_m},
                         {"impact_speed_mps", Num(h.impact_speed_mps)},
                         {"frames_per_contact", Num(h.frames_per_contact)},
                         {"blur_px", Num(h.blur_px)},
                         {"release_in_view", h.release_in_view},
                         {"rebound_in_view", h.rebound_in_view},
                         {"visible_fall_m", Num(h.visible_fall_m)},
                         {"measured", h.measured},
                         {"failure", h.failure},
                         {"repeats_needed", h.repeats_needed},
                         {"track_noise_sd_m", Num(h.track_noise_sd_m)},
                         {"cor", SpreadJson(h.cor, repeats)},
                         {"contact_duration_s", SpreadJson(h.duration_s, repeats)},
                         {"max_deflection_m", SpreadJson(h.deflection_m, repeats)},
                         {"stiffness", SpreadJson(h.stiffness, repeats)},
                         {"damping", SpreadJson(h.damping, repeats)}});
    }
    j["settings"].push_back({{"fps", s.rate.fps},
                             {"width_px", s.rate.width_px},
                             {"height_px", s.rate.height_px},
                             {"scale_m_per_px", s.scale_m_per_px},
                             {"exposure_s", s.exposure_s},
                             {"marker_px", s.marker_px},
                             {"view_height_m", s.view_height_m},
                             {"view_width_m", s.view_width_m},
                             {"wheel_fits", s.wheel_fits},
                             {"repeats", s.repeats},
                             {"repeats_used_for_sd_repeats", repeats},
                             {"missing", s.missing},
                             {"heights", heights}});
  }
  j["chosen"] = result.chosen ? json(*result.chosen) : json(nullptr);
  j["verdict"] = result.verdict;
  j["seconds"] = result.seconds;
  j["render_check"] = check;
  try {
    std::filesystem::create_directories(options.out_dir);
    WriteFileAtomically(std::filesystem::path(options.out_dir) / "plan.json", j.dump(2) + "\n");
    WriteFileAtomically(std::filesystem::path(options.out_dir) / "plan.html", plan::PlanHtml(o, result));
  } catch (const std::exception& e) {
    err << "dropfit plan: " << e.what() << "\n";
    return kExitBadUsage;
  }
  out << "wrote " << (std::filesystem::path(options.out_dir) / "plan.json").string() << " and plan.html ("
      << std::round(result.seconds * 10) / 10 << " s)\n";
  return kExitDone;
}

int RunPlan(const PlanCommandOptions& options) { return RunPlan(options, std::cout, std::cerr); }

}  // namespace dropfit::cli
