// JSON halves of cli/results.h. nlohmann/json is slow to compile: keep it in this file,
// rig_io.cpp and the few others that must parse JSON.
#include <nlohmann/json.hpp>

#include <cmath>
#include <cstdint>
#include <fstream>
#include <stdexcept>

#include "cli/atomic_write.h"
#include "cli/json_numbers.h"
#include "cli/results.h"

namespace dropfit::cli {

namespace {

using nlohmann::ordered_json;
// Read with insertion order kept, so parameter lists come back in the law's order.
using json = nlohmann::ordered_json;

// A finite number, a whole one as an integer; null otherwise (cli/json_numbers.h).
ordered_json Number(double v) { return JsonNumber<ordered_json>(v); }
ordered_json Number(const std::optional<double>& v) { return v ? Number(*v) : ordered_json(nullptr); }

ordered_json Values(const NamedValues& values) {
  ordered_json out = ordered_json::object();
  for (const auto& [name, value] : values) out[name] = Number(value);
  return out;
}

void AddExtra(ordered_json& out, const NamedValues& extra) {
  for (const auto& [name, value] : extra) out[name] = Number(value);
}
void AddTexts(ordered_json& out, const NamedTexts& texts) {
  for (const auto& [name, value] : texts) out[name] = value;
}

double GetNumber(const json& j, const char* key) {
  if (!j.contains(key) || j.at(key).is_null()) return std::nan("");
  return j.at(key).get<double>();
}
std::optional<double> GetOptional(const json& j, const char* key) {
  if (!j.contains(key) || j.at(key).is_null()) return std::nullopt;
  return j.at(key).get<double>();
}
NamedValues GetValues(const json& j) {
  NamedValues out;
  if (!j.is_object()) return out;
  for (auto it = j.begin(); it != j.end(); ++it) {
    out.emplace_back(it.key(), it.value().is_null() ? std::nan("") : it.value().get<double>());
  }
  return out;
}

const char* const kImpactKeys[] = {"t_contact_s",
                                   "t_separation_s",
                                   "impact_speed_mps",
                                   "rebound_speed_mps",
                                   "cor",
                                   "contact_duration_s",
                                   "max_deflection_m",
                                   "peak_force_n",
                                   "onset_height_m",
                                   "onset_height_source",
                                   "source",
                                   "complete",
                                   "flags"};
const char* const kFitKeys[] = {"law",     "params",         "param_sd", "onset_height_m", "onset_height_source",
                                "bounces", "rms_residual_m", "bic",      "converged"};

bool IsKey(const std::string& key, const auto& keys) {
  for (const char* k : keys) {
    if (key == k) return true;
  }
  return false;
}

// Extra fields: every number (or string) beside the contract's keys.
void ReadExtras(const json& j, const auto& keys, NamedValues& numbers, NamedTexts* texts) {
  for (auto it = j.begin(); it != j.end(); ++it) {
    if (IsKey(it.key(), keys)) continue;
    if (it.value().is_number())
      numbers.emplace_back(it.key(), it.value().get<double>());
    else if (it.value().is_null())
      numbers.emplace_back(it.key(), std::nan(""));
    else if (texts && it.value().is_string())
      texts->emplace_back(it.key(), it.value().get<std::string>());
  }
}

ordered_json CurvesToJson(const std::vector<Curve>& curves) {
  ordered_json a = ordered_json::array();
  for (const Curve& c : curves) {
    ordered_json x = ordered_json::array(), y = ordered_json::array();
    for (double v : c.x) x.push_back(Number(v));
    for (double v : c.y) y.push_back(Number(v));
    a.push_back({{"name", c.name}, {"kind", ToString(c.kind)}, {"x", x}, {"y", y}});
  }
  return a;
}

std::vector<double> NumbersOf(const json& a) {
  std::vector<double> out;
  for (const json& v : a) out.push_back(v.is_null() ? std::nan("") : v.get<double>());
  return out;
}

std::vector<Curve> CurvesFromJson(const json& j) {
  std::vector<Curve> out;
  if (!j.contains("curves")) return out;
  for (const json& c : j.at("curves")) {
    out.push_back({c.at("name").get<std::string>(), CurveKindFromString(c.at("kind").get<std::string>()),
                   NumbersOf(c.at("x")), NumbersOf(c.at("y"))});
  }
  return out;
}

// "budget": {figure: {"sd", "dominant", "parts": {part: contribution}}} (docs/formats.md).
ordered_json BudgetToJson(const std::vector<BudgetRecord>& budget) {
  ordered_json out = ordered_json::object();
  for (const BudgetRecord& b : budget)
    out[b.figure] = {{"sd", Number(b.sd)}, {"dominant", b.dominant}, {"parts", Values(b.parts)}};
  return out;
}

std::vector<BudgetRecord> BudgetFromJson(const json& j, const char* key = "budget") {
  std::vector<BudgetRecord> out;
  if (!j.contains(key) || !j.at(key).is_object()) return out;
  for (auto it = j.at(key).begin(); it != j.at(key).end(); ++it) {
    BudgetRecord b;
    b.figure = it.key();
    b.sd = GetNumber(it.value(), "sd");
    b.dominant = it.value().value("dominant", "");
    b.parts = GetValues(it.value().value("parts", json::object()));
    out.push_back(b);
  }
  return out;
}

ordered_json FitToJson(const FitRecord& f) {
  ordered_json j;
  j["law"] = f.law;
  j["params"] = Values(f.params);
  j["param_sd"] = Values(f.param_sd);
  j["onset_height_m"] = Number(f.onset_height_m);
  j["onset_height_source"] = f.onset_height_source;
  j["bounces"] = f.bounces;
  j["rms_residual_m"] = Number(f.rms_residual_m);
  j["bic"] = Number(f.bic);
  j["converged"] = f.converged;
  AddExtra(j, f.extra);
  AddTexts(j, f.notes);
  if (!f.budget.empty()) j["budget"] = BudgetToJson(f.budget);
  return j;
}

FitRecord FitFromJson(const json& j) {
  FitRecord f;
  f.law = j.at("law").get<std::string>();
  f.params = GetValues(j.value("params", json::object()));
  f.param_sd = GetValues(j.value("param_sd", json::object()));
  f.onset_height_m = GetNumber(j, "onset_height_m");
  f.onset_height_source = j.value("onset_height_source", "fit");
  f.bounces = j.value("bounces", std::vector<int>{});
  f.rms_residual_m = GetNumber(j, "rms_residual_m");
  f.bic = GetNumber(j, "bic");
  f.converged = j.value("converged", false);
  ReadExtras(j, kFitKeys, f.extra, &f.notes);
  f.budget = BudgetFromJson(j);
  return f;
}

json ParseFile(const std::filesystem::path& path) {
  std::ifstream in(path);
  if (!in) throw std::runtime_error(path.string() + ": cannot be read");
  try {
    return json::parse(in);
  } catch (const json::parse_error& e) {
    throw std::runtime_error(path.string() + ": not valid JSON (" + std::string(e.what()) + ")");
  }
}

void WriteJson(const std::filesystem::path& path, const ordered_json& j) {
  WriteFileAtomically(path, j.dump(2) + "\n");
}

}  // namespace

void WriteClipResult(const std::filesystem::path& path, const ClipResult& r) {
  ordered_json j;
  j["clip"] = r.clip;
  j["capture_fps"] = Number(r.capture_fps);
  j["capture_fps_source"] = r.capture_fps_source;
  j["frames"] = r.frames;
  j["tracked_frames"] = r.tracked_frames;
  j["y_origin"] = r.y_origin;
  j["gravity_check"] = {{"flight_accel_mps2", Number(r.gravity_check.flight_accel_mps2)},
                        {"expected_mps2", Number(r.gravity_check.expected_mps2)}};
  j["impacts"] = ordered_json::array();
  for (const ImpactRecord& im : r.impacts) {
    ordered_json ji;
    ji["t_contact_s"] = Number(im.t_contact_s);
    ji["t_separation_s"] = Number(im.t_separation_s);
    ji["impact_speed_mps"] = Number(im.impact_speed_mps);
    ji["rebound_speed_mps"] = Number(im.rebound_speed_mps);
    ji["cor"] = Number(im.cor);
    ji["contact_duration_s"] = Number(im.contact_duration_s);
    ji["max_deflection_m"] = Number(im.max_deflection_m);
    ji["peak_force_n"] = Number(im.peak_force_n);
    ji["onset_height_m"] = Number(im.onset_height_m);
    ji["onset_height_source"] = im.onset_height_source;
    ji["source"] = im.source;
    ji["complete"] = im.complete;
    if (!im.flags.empty()) ji["flags"] = im.flags;
    AddExtra(ji, im.extra);
    if (!im.budget.empty()) ji["budget"] = BudgetToJson(im.budget);
    j["impacts"].push_back(ji);
  }
  j["fits"] = ordered_json::array();
  for (const FitRecord& f : r.fits) j["fits"].push_back(FitToJson(f));
  j["best_law"] = r.best_law ? ordered_json(*r.best_law) : ordered_json(nullptr);
  j["equivalent_laws"] = r.equivalent_laws;
  j["no_law_fits"] = r.no_law_fits ? ordered_json(*r.no_law_fits) : ordered_json(nullptr);
  j["flags"] = r.flags;
  j["warnings"] = r.warnings;
  j["errors"] = r.errors;
  j["frames_left_empty"] = ordered_json::array();
  for (const FrameLeftEmpty& e : r.frames_left_empty) {
    j["frames_left_empty"].push_back({{"frame", e.frame}, {"reason", e.reason}});
  }
  AddExtra(j, r.extra);
  AddTexts(j, r.info);
  j["curves"] = CurvesToJson(r.curves);
  WriteJson(path, j);
}

ClipResult ReadClipResult(const std::filesystem::path& path) {
  const json j = ParseFile(path);
  try {
    ClipResult r;
    r.clip = j.at("clip").get<std::string>();
    r.capture_fps = GetNumber(j, "capture_fps");
    r.capture_fps_source = j.value("capture_fps_source", "");
    r.frames = j.value("frames", 0);
    r.tracked_frames = j.value("tracked_frames", 0);
    r.y_origin = j.value("y_origin", "board");
    if (j.contains("gravity_check")) {
      r.gravity_check.flight_accel_mps2 = GetOptional(j["gravity_check"], "flight_accel_mps2");
      r.gravity_check.expected_mps2 = GetNumber(j["gravity_check"], "expected_mps2");
    }
    for (const json& ji : j.value("impacts", json::array())) {
      ImpactRecord im;
      im.t_contact_s = GetNumber(ji, "t_contact_s");
      im.t_separation_s = GetNumber(ji, "t_separation_s");
      im.impact_speed_mps = GetNumber(ji, "impact_speed_mps");
      im.rebound_speed_mps = GetNumber(ji, "rebound_speed_mps");
      im.cor = GetNumber(ji, "cor");
      im.contact_duration_s = GetNumber(ji, "contact_duration_s");
      im.max_deflection_m = GetNumber(ji, "max_deflection_m");
      im.peak_force_n = GetNumber(ji, "peak_force_n");
      im.onset_height_m = GetNumber(ji, "onset_height_m");
      im.onset_height_source = ji.value("onset_height_source", "track");
      im.source = ji.value("source", "track");
      im.complete = ji.value("complete", false);
      im.flags = ji.value("flags", std::vector<std::string>{});
      ReadExtras(ji, kImpactKeys, im.extra, nullptr);
      im.budget = BudgetFromJson(ji);
      r.impacts.push_back(im);
    }
    for (const json& jf : j.value("fits", json::array())) r.fits.push_back(FitFromJson(jf));
    if (j.contains("best_law") && j["best_law"].is_string()) r.best_law = j["best_law"].get<std::string>();
    r.equivalent_laws = j.value("equivalent_laws", std::vector<std::string>{});
    if (j.contains("no_law_fits") && j["no_law_fits"].is_string()) r.no_law_fits = j["no_law_fits"].get<std::string>();
    r.flags = j.value("flags", std::vector<std::string>{});
    r.warnings = j.value("warnings", std::vector<std::string>{});
    r.errors = j.value("errors", std::vector<std::string>{});
    for (const json& e : j.value("frames_left_empty", json::array())) {
      r.frames_left_empty.push_back({e.at("frame").get<int>(), e.at("reason").get<std::string>()});
    }
    static const char* const kTop[] = {"clip",           "capture_fps",     "capture_fps_source", "frames",
                                       "tracked_frames", "y_origin",        "gravity_check",      "impacts",
                                       "fits",           "best_law",        "warnings",           "errors",
                                       "curves",         "equivalent_laws", "no_law_fits",        "frames_left_empty",
                                       "flags"};
    ReadExtras(j, kTop, r.extra, &r.info);
    r.curves = CurvesFromJson(j);
    return r;
  } catch (const json::exception& e) {
    throw std::runtime_error(path.string() + ": not a dropfit result (" + std::string(e.what()) + ")");
  }
}

void WriteSummaryJson(const std::filesystem::path& path, const Summary& s) {
  ordered_json j;
  j["groups"] = ordered_json::array();
  for (const SummaryGroup& g : s.groups) {
    j["groups"].push_back({{"specimen", g.specimen},
                           {"drop_height_m", Number(g.drop_height_m)},
                           {"clips", g.clips},
                           {"impact_speed_mps_mean", Number(g.impact_speed_mps_mean)},
                           {"impact_speed_mps_sd", Number(g.impact_speed_mps_sd)},
                           {"cor_mean", Number(g.cor_mean)},
                           {"cor_sd", Number(g.cor_sd)},
                           {"contact_duration_s_mean", Number(g.contact_duration_s_mean)},
                           {"contact_duration_s_sd", Number(g.contact_duration_s_sd)},
                           {"max_deflection_m_mean", Number(g.max_deflection_m_mean)},
                           {"max_deflection_m_sd", Number(g.max_deflection_m_sd)},
                           {"peak_force_n_mean", Number(g.peak_force_n_mean)},
                           {"peak_force_n_sd", Number(g.peak_force_n_sd)},
                           {"rebound_speed_mps_mean", Number(g.rebound_speed_mps_mean)},
                           {"rebound_speed_mps_sd", Number(g.rebound_speed_mps_sd)},
                           {"energy_lost_j_mean", Number(g.energy_lost_j_mean)},
                           {"energy_lost_j_sd", Number(g.energy_lost_j_sd)},
                           {"flags", g.flags}});
    ordered_json& jg = j["groups"].back();
    for (const BudgetRecord& b : g.mean_budget) jg[b.figure + "_mean_u"] = Number(b.sd);
    if (!g.mean_budget.empty()) jg["mean_budget"] = BudgetToJson(g.mean_budget);
  }
  j["specimens"] = ordered_json::array();
  for (const SpecimenSummary& sp : s.specimens) {
    ordered_json js;
    js["specimen"] = sp.specimen;
    js["best_law"] = sp.best_law ? ordered_json(*sp.best_law) : ordered_json(nullptr);
    js["equivalent_laws"] = sp.equivalent_laws;
    js["no_law_fits"] = sp.no_law_fits ? ordered_json(*sp.no_law_fits) : ordered_json(nullptr);
    js["joint_fits"] = ordered_json::array();
    for (const JointFitRecord& jf : sp.joint_fits) {
      ordered_json f = FitToJson(jf.fit);
      f["holdout"] = ordered_json::array();
      for (const HoldoutRecord& h : jf.holdout) {
        f["holdout"].push_back({{"drop_height_m", Number(h.drop_height_m)},
                                {"cor_error", Number(h.cor_error)},
                                {"contact_duration_error_s", Number(h.contact_duration_error_s)},
                                {"max_deflection_error_m", Number(h.max_deflection_error_m)}});
      }
      js["joint_fits"].push_back(f);
    }
    js["curves"] = CurvesToJson(sp.curves);
    AddExtra(js, sp.extra);
    j["specimens"].push_back(js);
  }
  auto messages = [](const std::vector<ClipMessage>& list) {
    ordered_json a = ordered_json::array();
    for (const ClipMessage& m : list) a.push_back({{"clip", m.clip}, {"message", m.message}});
    return a;
  };
  j["errors"] = messages(s.errors);
  j["warnings"] = messages(s.warnings);
  j["clips"] = s.clips;
  j["rig_quality"] = Values(s.rig_quality);
  ordered_json run = ordered_json::object();
  for (const auto& [k, v] : s.run) run[k] = v;
  j["run"] = run;
  WriteJson(path, j);
}

Summary ReadSummaryJson(const std::filesystem::path& path) {
  const json j = ParseFile(path);
  try {
    Summary s;
    for (const json& jg : j.at("groups")) {
      SummaryGroup g;
      g.specimen = jg.at("specimen").get<std::string>();
      g.drop_height_m = GetNumber(jg, "drop_height_m");
      g.clips = jg.value("clips", 0);
      g.impact_speed_mps_mean = GetNumber(jg, "impact_speed_mps_mean");
      g.impact_speed_mps_sd = GetOptional(jg, "impact_speed_mps_sd");
      g.cor_mean = GetNumber(jg, "cor_mean");
      g.cor_sd = GetOptional(jg, "cor_sd");
      g.contact_duration_s_mean = GetNumber(jg, "contact_duration_s_mean");
      g.contact_duration_s_sd = GetOptional(jg, "contact_duration_s_sd");
      g.max_deflection_m_mean = GetNumber(jg, "max_deflection_m_mean");
      g.max_deflection_m_sd = GetOptional(jg, "max_deflection_m_sd");
      g.peak_force_n_mean = GetNumber(jg, "peak_force_n_mean");
      g.peak_force_n_sd = GetOptional(jg, "peak_force_n_sd");
      // Added by issue 18; a summary.json written before has none of them.
      g.rebound_speed_mps_mean = GetOptional(jg, "rebound_speed_mps_mean").value_or(std::nan(""));
      g.rebound_speed_mps_sd = GetOptional(jg, "rebound_speed_mps_sd");
      g.energy_lost_j_mean = GetOptional(jg, "energy_lost_j_mean").value_or(std::nan(""));
      g.energy_lost_j_sd = GetOptional(jg, "energy_lost_j_sd");
      g.flags = jg.value("flags", std::vector<std::string>{});
      g.mean_budget = BudgetFromJson(jg, "mean_budget");  // added by issue 19
      s.groups.push_back(g);
    }
    for (const json& js : j.at("specimens")) {
      SpecimenSummary sp;
      sp.specimen = js.at("specimen").get<std::string>();
      if (js.contains("best_law") && js["best_law"].is_string()) sp.best_law = js["best_law"].get<std::string>();
      sp.equivalent_laws = js.value("equivalent_laws", std::vector<std::string>{});
      if (js.contains("no_law_fits") && js["no_law_fits"].is_string()) {
        sp.no_law_fits = js["no_law_fits"].get<std::string>();
      }
      for (const json& jf : js.value("joint_fits", json::array())) {
        JointFitRecord rec;
        rec.fit = FitFromJson(jf);
        rec.fit.extra.erase(std::remove_if(rec.fit.extra.begin(), rec.fit.extra.end(),
                                           [](const auto& kv) { return kv.first == "holdout"; }),
                            rec.fit.extra.end());
        for (const json& jh : jf.value("holdout", json::array())) {
          rec.holdout.push_back({GetNumber(jh, "drop_height_m"), GetNumber(jh, "cor_error"),
                                 GetNumber(jh, "contact_duration_error_s"), GetNumber(jh, "max_deflection_error_m")});
        }
        sp.joint_fits.push_back(rec);
      }
      sp.curves = CurvesFromJson(js);
      for (const char* key : {"marker_offset_gravity_m", "marker_offset_gravity_sd_m", "marker_offset_gravity_clips",
                              "marker_offset_gravity_birge_ratio"}) {
        if (js.contains(key)) sp.extra.emplace_back(key, GetNumber(js, key));
      }
      s.specimens.push_back(sp);
    }
    for (const json& m : j.value("errors", json::array())) s.errors.push_back({m.at("clip"), m.at("message")});
    for (const json& m : j.value("warnings", json::array())) s.warnings.push_back({m.at("clip"), m.at("message")});
    s.clips = j.value("clips", std::vector<std::string>{});
    s.rig_quality = GetValues(j.value("rig_quality", json::object()));
    const json run = j.value("run", json::object());
    for (const auto& [k, v] : run.items()) {
      if (v.is_string()) s.run.emplace_back(k, v.get<std::string>());
    }
    return s;
  } catch (const json::exception& e) {
    throw std::runtime_error(path.string() + ": not a dropfit summary (" + std::string(e.what()) + ")");
  }
}

}  // namespace dropfit::cli
