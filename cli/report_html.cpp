#include "cli/report_html.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>
#include <map>
#include <sstream>

#include "cli/svg_plot.h"
#include "dropfit/version.h"

namespace dropfit::cli {

namespace {

constexpr const char* kMeasuredColour = "#2b2b2b";
constexpr const char* kTrackColour = "#8c8c8c";
constexpr const char* kContactShade = "#f3e3c3";

std::string Num(double v, int significant = 4) {
  if (!std::isfinite(v)) return "&ndash;";
  char buf[48];
  std::snprintf(buf, sizeof(buf), "%.*g", significant, v);
  return buf;
}

std::string Scaled(double v, double scale, int decimals) {
  if (!std::isfinite(v)) return "&ndash;";
  char buf[48];
  std::snprintf(buf, sizeof(buf), "%.*f", decimals, v * scale);
  return buf;
}

const Curve* FindCurve(const std::vector<Curve>& curves, CurveKind kind, const std::string& name) {
  for (const Curve& c : curves) {
    if (c.kind == kind && (name.empty() || c.name == name)) return &c;
  }
  return nullptr;
}

constexpr const char* kStyle = R"CSS(
body{font-family:"DejaVu Sans","Liberation Sans",sans-serif;margin:0;background:#efece4;color:#1d1d1d;font-size:14px}
main{max-width:1320px;margin:0 auto;padding:18px 26px 40px}
h1{font-size:24px;margin:6px 0 2px;letter-spacing:.3px}
h2{font-size:18px;margin:28px 0 8px;border-bottom:2px solid #1b7f79;padding-bottom:3px}
h3{font-size:15px;margin:18px 0 6px}
.meta{color:#555;margin-bottom:14px}
.attention{background:#fff6e0;border-left:6px solid #d08a00;padding:8px 14px;margin:10px 0}
.attention.bad{background:#fde8e4;border-left-color:#b3261e}
.attention li{margin:3px 0}
.safety{background:#e8f0ef;border-left:6px solid #1b7f79;padding:8px 14px;margin:10px 0;font-size:13px}
table{border-collapse:collapse;margin:6px 0 10px;background:#fff}
th,td{border:1px solid #c9c4b6;padding:3px 8px;text-align:right;white-space:nowrap}
th{background:#e2ddd0;font-weight:600}
td.t,th.t{text-align:left}
td.p{white-space:normal;min-width:380px;max-width:560px}
tr.best td{background:#eaf5ef}
.charts{display:flex;flex-wrap:wrap;gap:12px}
svg.chart{border:1px solid #c9c4b6}
svg .ct{font-size:13px;font-weight:600;fill:#222}
svg .cl{font-size:11px;fill:#333}
svg .cg{stroke:#e4e0d6;stroke-width:1}
.clip{background:#f8f6f0;border:1px solid #d8d2c2;padding:4px 14px 12px;margin:14px 0}
.small{font-size:12px;color:#555}
)CSS";

void AttentionList(std::ostringstream& html, const std::vector<std::pair<std::string, std::string>>& items,
                   const std::string& title, bool bad) {
  if (items.empty()) return;
  html << "<div class=\"attention" << (bad ? " bad" : "") << "\"><strong>" << EscapeHtml(title) << " (" << items.size()
       << ")</strong><ul>";
  for (const auto& [clip, message] : items) {
    html << "<li>" << (clip.empty() ? "" : "<strong>" + EscapeHtml(clip) + "</strong>: ") << EscapeHtml(message)
         << "</li>";
  }
  html << "</ul></div>";
}

void SummaryTable(std::ostringstream& html, const std::vector<SummaryGroup>& groups) {
  html << "<h2>Impact summary per height</h2>";
  if (groups.empty()) {
    html << "<p>No complete impact was measured.</p>";
    return;
  }
  html << "<table><tr><th class=\"t\">specimen</th><th>drop height [m]</th><th>clips</th>"
          "<th>impact speed [m/s]</th><th>COR</th><th>contact duration [ms]</th><th>max deflection [mm]</th>"
          "<th>peak force [N]</th></tr>";
  auto pm = [](double mean, const std::optional<double>& sd, double scale, int decimals,
               const std::optional<double>& u = std::nullopt) {
    std::string s = Scaled(mean, scale, decimals);
    if (sd) s += " &plusmn; " + Scaled(*sd, scale, decimals);
    if (u && std::isfinite(*u)) s += " <span class=\"small\">(u " + Num(*u * scale, 2) + ")</span>";
    return s;
  };
  for (const SummaryGroup& g : groups) {
    html << "<tr><td class=\"t\">" << EscapeHtml(g.specimen) << "</td><td>" << Scaled(g.drop_height_m, 1, 3)
         << "</td><td>" << g.clips << "</td><td>"
         << pm(g.impact_speed_mps_mean, g.impact_speed_mps_sd, 1, 3, g.MeanU("impact_speed_mps")) << "</td><td>"
         << pm(g.cor_mean, g.cor_sd, 1, 4, g.MeanU("cor")) << "</td><td>"
         << pm(g.contact_duration_s_mean, g.contact_duration_s_sd, 1e3, 2, g.MeanU("contact_duration_s")) << "</td><td>"
         << pm(g.max_deflection_m_mean, g.max_deflection_m_sd, 1e3, 2, g.MeanU("max_deflection_m")) << "</td><td>"
         << pm(g.peak_force_n_mean, g.peak_force_n_sd, 1, 0, g.MeanU("peak_force_n")) << "</td></tr>";
  }
  html << "</table><p class=\"small\">Mean &plusmn; standard deviation over clips (first complete impact of each "
          "clip); u: the mean's standard uncertainty, with the parts the clips share (rig scale, capture rate, "
          "gravity) that averaging does not shrink. COR, impact and rebound speed are taken where the hub passes the "
          "contact-onset height.</p>";
}

std::string ParamText(const FitRecord& f) {
  std::string s;
  for (size_t i = 0; i < f.params.size(); ++i) {
    const auto& [name, value] = f.params[i];
    s += (i ? "; " : "") + EscapeHtml(name) + " = " + Num(value, 5);
    for (const auto& [sd_name, sd] : f.param_sd) {
      if (sd_name == name && std::isfinite(sd)) s += " &plusmn; " + Num(sd, 2);
    }
  }
  return s;
}

// The laws the data cannot tell from the best one, and the verdict when no law fits.
std::string LawChoiceNote(const std::vector<std::string>& equivalent, const std::optional<std::string>& no_law_fits) {
  std::string s;
  if (!equivalent.empty()) {
    s += "; equivalent for these data: ";
    for (size_t i = 0; i < equivalent.size(); ++i) s += (i ? ", " : "") + EscapeHtml(equivalent[i]);
  }
  if (no_law_fits) s += "<br><strong>" + EscapeHtml(*no_law_fits) + "</strong>";
  return s;
}

// "; on a bound: ..." when a parameter of the fit ended on a bound of its search.
std::string BoundNote(const FitRecord& f) {
  for (const auto& [name, text] : f.notes) {
    if (name == "bounds_reached") return "; on a bound: " + EscapeHtml(text);
  }
  return "";
}

void FitTable(std::ostringstream& html, const std::vector<const FitRecord*>& fits,
              const std::optional<std::string>& best) {
  // Delta BIC is relative to the best law (docs/formats.md, "best_law"), which a law with an
  // undetermined parameter can undercut.
  double best_bic = std::numeric_limits<double>::quiet_NaN();
  for (const FitRecord* f : fits) {
    if (best && *best == f->law) best_bic = f->bic;
  }
  html << "<table><tr><th class=\"t\">law</th><th class=\"t\">parameters &plusmn; standard deviation</th>"
          "<th>onset height [mm]</th><th>RMS residual [&micro;m]</th><th>BIC</th><th>&Delta;BIC</th>"
          "<th class=\"t\">converged</th></tr>";
  for (const FitRecord* f : fits) {
    html << "<tr" << (best && *best == f->law ? " class=\"best\"" : "")
         << "><td class=\"t\"><span style=\"color:" << LawColour(f->law) << "\">&#9632;</span> " << EscapeHtml(f->law)
         << "</td><td class=\"t p\">" << ParamText(*f) << "</td><td>" << Scaled(f->onset_height_m, 1e3, 2) << " ("
         << EscapeHtml(f->onset_height_source) << ")</td><td>" << Scaled(f->rms_residual_m, 1e6, 1) << "</td><td>"
         << Scaled(f->bic, 1, 1) << "</td><td>"
         << (std::isfinite(best_bic) && std::isfinite(f->bic) ? Scaled(f->bic - best_bic, 1, 1) : "&ndash;")
         << "</td><td class=\"t\">" << (f->converged ? "yes" : "no") << BoundNote(*f) << "</td></tr>";
  }
  html << "</table>";
}

void SpecimenSection(std::ostringstream& html, const SpecimenSummary& sp) {
  html << "<h2>Specimen: " << EscapeHtml(sp.specimen.empty() ? "(unnamed)" : sp.specimen) << "</h2>";
  html << "<p>Best law over all heights: <strong>" << EscapeHtml(sp.best_law.value_or("none")) << "</strong>"
       << LawChoiceNote(sp.equivalent_laws, sp.no_law_fits) << "</p>";
  double pooled = std::numeric_limits<double>::quiet_NaN(), pooled_sd = pooled, clips = pooled;
  for (const auto& [name, value] : sp.extra) {
    if (name == "marker_offset_gravity_m") pooled = value;
    if (name == "marker_offset_gravity_sd_m") pooled_sd = value;
    if (name == "marker_offset_gravity_clips") clips = value;
  }
  if (std::isfinite(pooled)) {
    html << "<p>Marker plane from the flights (gravity ruler, " << Num(clips, 3)
         << " clips pooled): " << Num(pooled * 1000, 4) << " &plusmn; " << Num(pooled_sd * 1000, 2)
         << " mm in front of the board</p>";
  }
  std::vector<const FitRecord*> fits;
  for (const JointFitRecord& jf : sp.joint_fits) fits.push_back(&jf.fit);
  html << "<h3>Joint fits (one law, one onset height, all clips)</h3>";
  FitTable(html, fits, sp.best_law);

  Plot cor{"COR against impact speed", "impact speed [m/s]", "COR", {}, {}, 620, 340};
  if (const Curve* m = FindCurve(sp.curves, CurveKind::kCorMeasured, "")) {
    cor.series.push_back({"measured", kMeasuredColour, SeriesStyle::kPoints, m->x, m->y});
  }
  for (const Curve& c : sp.curves) {
    if (c.kind == CurveKind::kCorVsSpeed)
      cor.series.push_back({c.name, LawColour(c.name), SeriesStyle::kLine, c.x, c.y});
  }
  html << "<div class=\"charts\">" << RenderSvg(cor) << "</div>";

  bool any_holdout = false;
  for (const JointFitRecord& jf : sp.joint_fits) any_holdout |= !jf.holdout.empty();
  html << "<h3>Leave-one-height-out prediction</h3>";
  if (!any_holdout) {
    html << "<p>Needs at least two drop heights.</p>";
    return;
  }
  html << "<p class=\"small\">Each law is fitted without one height and predicts the held-out bounces from their "
          "pre-impact state; the errors are that prediction minus the same law fitted to the held-out height alone. "
          "A law that extrapolates keeps them small at every height.</p>";
  html << "<table><tr><th class=\"t\">law</th><th>held-out height [m]</th><th>COR error</th>"
          "<th>contact duration error [ms]</th><th>max deflection error [mm]</th></tr>";
  for (const JointFitRecord& jf : sp.joint_fits) {
    for (const HoldoutRecord& h : jf.holdout) {
      html << "<tr><td class=\"t\">" << EscapeHtml(jf.fit.law) << "</td><td>" << Scaled(h.drop_height_m, 1, 3)
           << "</td><td>" << Scaled(h.cor_error, 1, 4) << "</td><td>" << Scaled(h.contact_duration_error_s, 1e3, 3)
           << "</td><td>" << Scaled(h.max_deflection_error_m, 1e3, 3) << "</td></tr>";
    }
  }
  html << "</table>";
}

void RigSection(std::ostringstream& html, const Summary& summary) {
  html << "<h2>Rig and run</h2>";
  if (!summary.rig_quality.empty()) {
    html << "<table><tr><th class=\"t\">rig quality figure</th><th>value</th></tr>";
    for (const auto& [name, value] : summary.rig_quality) {
      html << "<tr><td class=\"t\">" << EscapeHtml(name) << "</td><td>" << Num(value, 5) << "</td></tr>";
    }
    html << "</table>";
  }
  if (!summary.run.empty()) {
    html << "<table><tr><th class=\"t\">run setting</th><th class=\"t\">value</th></tr>";
    for (const auto& [name, value] : summary.run) {
      html << "<tr><td class=\"t\">" << EscapeHtml(name) << "</td><td class=\"t\">" << EscapeHtml(value)
           << "</td></tr>";
    }
    html << "</table>";
  }
}

// "; marker plane ... (source); gravity ruler: d +- sd mm" (docs/formats.md, "Gravity ruler").
// The budget of the clip's first complete bounce (docs/methods.md §23): per figure its value,
// its combined standard uncertainty and each part's contribution, the dominant part in bold.
void BudgetTable(std::ostringstream& html, const ClipResult& r) {
  const auto im = std::find_if(r.impacts.begin(), r.impacts.end(),
                               [](const ImpactRecord& x) { return x.complete && !x.budget.empty(); });
  if (im == r.impacts.end()) return;
  struct Row {
    const char* figure;
    const char* label;
    double scale;
  };
  const Row rows[] = {{"impact_speed_mps", "impact speed [m/s]", 1.0},
                      {"rebound_speed_mps", "rebound speed [m/s]", 1.0},
                      {"cor", "COR", 1.0},
                      {"contact_duration_s", "contact duration [ms]", 1e3},
                      {"max_deflection_m", "max deflection [mm]", 1e3},
                      {"peak_force_n", "peak force [N]", 1.0},
                      {"energy_lost_j", "energy lost [J]", 1.0}};
  const char* const parts[] = {"fit", "onset_height", "rig_scale", "marker_plane", "capture_rate", "gravity"};
  html << "<p class=\"small\">Uncertainty budget of bounce " << (im - r.impacts.begin())
       << ": standard uncertainties combined in quadrature (GUM); the largest part in bold.</p><table><tr>"
          "<th class=\"t\">figure</th><th>u</th><th>fit</th><th>onset height</th><th>rig scale</th>"
          "<th>marker plane</th><th>capture rate</th><th>gravity</th></tr>";
  for (const Row& row : rows) {
    const auto b = std::find_if(im->budget.begin(), im->budget.end(),
                                [&](const BudgetRecord& x) { return x.figure == row.figure; });
    if (b == im->budget.end()) continue;
    html << "<tr><td class=\"t\">" << row.label << "</td><td>" << Num(b->sd * row.scale, 2) << "</td>";
    for (const char* part : parts) {
      double v = std::nan("");
      for (const auto& [name, value] : b->parts)
        if (name == part) v = value;
      const std::string text = !std::isfinite(v) ? "&ndash;" : v == 0.0 ? "0" : Num(v * row.scale, 2);
      html << "<td>" << (b->dominant == part ? "<strong>" + text + "</strong>" : text) << "</td>";
    }
    html << "</tr>";
  }
  html << "</table>";
}

std::string MarkerPlaneNote(const ClipResult& r) {
  const double offset = ExtraValue(r, "marker_offset_m");
  if (!std::isfinite(offset)) return "";
  std::string s = "; marker plane " + Num(offset * 1000, 4) + " mm in front of the board (" +
                  EscapeHtml(InfoValue(r, "marker_offset_source")) + ")";
  const double est = ExtraValue(r, "marker_offset_gravity_m"), sd = ExtraValue(r, "marker_offset_gravity_sd_m");
  if (std::isfinite(est)) s += "; gravity ruler: " + Num(est * 1000, 4) + " &plusmn; " + Num(sd * 1000, 2) + " mm";
  return s;
}

void ClipSection(std::ostringstream& html, const ClipReportData& clip) {
  const ClipResult& r = clip.result;
  html << "<div class=\"clip\"><h3>Clip " << EscapeHtml(r.clip) << "</h3><p class=\"small\">" << r.frames
       << " frames at " << Num(r.capture_fps, 6) << " frames/s (" << EscapeHtml(r.capture_fps_source) << "), "
       << r.tracked_frames << " tracked; y origin: " << EscapeHtml(r.y_origin)
       << "; best law: " << EscapeHtml(r.best_law.value_or("none")) << "; flight acceleration "
       << (r.gravity_check.flight_accel_mps2 ? Num(*r.gravity_check.flight_accel_mps2, 5) : std::string("&ndash;"))
       << " m/s&sup2; (expected " << Num(r.gravity_check.expected_mps2, 6) << ")" << MarkerPlaneNote(r) << "</p>";
  if (!r.impacts.empty()) {
    html << "<table><tr><th>#</th><th>contact at [s]</th><th>impact speed [m/s]</th><th>rebound speed [m/s]</th>"
            "<th>COR</th><th>contact duration [ms]</th><th>max deflection [mm]</th><th>peak force [N]</th>"
            "<th class=\"t\">from</th><th class=\"t\">complete</th></tr>";
    for (size_t i = 0; i < r.impacts.size(); ++i) {
      const ImpactRecord& im = r.impacts[i];
      html << "<tr><td>" << i << "</td><td>" << Scaled(im.t_contact_s, 1, 4) << "</td><td>"
           << Scaled(im.impact_speed_mps, 1, 3) << "</td><td>" << Scaled(im.rebound_speed_mps, 1, 3) << "</td><td>"
           << Scaled(im.cor, 1, 4) << "</td><td>" << Scaled(im.contact_duration_s, 1e3, 2) << "</td><td>"
           << Scaled(im.max_deflection_m, 1e3, 2) << "</td><td>" << Scaled(im.peak_force_n, 1, 0)
           << "</td><td class=\"t\">" << EscapeHtml(im.source) << "</td><td class=\"t\">"
           << (im.complete ? "yes" : "no (cut by the clip)") << "</td></tr>";
    }
    html << "</table>";
    BudgetTable(html, r);
  }
  // Height against time.
  Plot height{"Hub height against time", "time [s]", "height y [m]", {}, {}, 620, 340};
  PlotSeries measured{"measured", kMeasuredColour, SeriesStyle::kPoints, {}, {}};
  for (const TrackRow& row : clip.track) {
    if (row.y_m) {
      measured.x.push_back(row.t_s);
      measured.y.push_back(*row.y_m);
    }
  }
  height.series.push_back(measured);
  if (r.best_law) {
    if (const Curve* c = FindCurve(r.curves, CurveKind::kTrajectory, *r.best_law)) {
      height.series.push_back({*r.best_law + " (simulated)", LawColour(*r.best_law), SeriesStyle::kLine, c->x, c->y});
    }
  }
  for (const ImpactRecord& im : r.impacts) height.spans.push_back({im.t_contact_s, im.t_separation_s, kContactShade});
  // Force against deflection.
  Plot force{"Contact force against deflection", "deflection [mm]", "force [N]", {}, {}, 620, 340};
  auto to_mm = [](std::vector<double> v) {
    for (double& x : v) x *= 1e3;
    return v;
  };
  if (const Curve* c = FindCurve(r.curves, CurveKind::kForceDeflectionTrack, "")) {
    force.series.push_back({"track: m (a + g)", kTrackColour, SeriesStyle::kPoints, to_mm(c->x), c->y});
  }
  for (const Curve& c : r.curves) {
    if (c.kind == CurveKind::kForceDeflection) {
      force.series.push_back({c.name, LawColour(c.name), SeriesStyle::kLine, to_mm(c.x), c.y});
    }
  }
  // Residuals per law.
  Plot residual{"Residuals per law (measured minus simulated)", "time [s]", "residual [µm]", {}, {}, 620, 340};
  for (const Curve& c : r.curves) {
    if (c.kind == CurveKind::kResidual) {
      residual.series.push_back({c.name, LawColour(c.name), SeriesStyle::kPoints, c.x, to_mm(to_mm(c.y))});
    }
  }
  html << "<div class=\"charts\">" << RenderSvg(height);
  if (!force.series.empty()) html << RenderSvg(force);
  if (!residual.series.empty()) html << RenderSvg(residual);
  html << "</div>";
  if (!r.fits.empty()) {
    std::vector<const FitRecord*> fits;
    for (const FitRecord& f : r.fits) fits.push_back(&f);
    html << "<p class=\"small\">Per-clip fits" << LawChoiceNote(r.equivalent_laws, r.no_law_fits) << "</p>";
    FitTable(html, fits, r.best_law);
  }
  html << "</div>";
}

}  // namespace

std::string LawColour(const std::string& law) {
  static const std::map<std::string, std::string> colours{{"kelvin-voigt", "#1b7f79"},
                                                          {"hunt-crossley", "#c2571a"},
                                                          {"hertz", "#6a4c93"},
                                                          {"bilinear", "#7d7d22"},
                                                          {"volumetric", "#2f5fa7"}};
  auto it = colours.find(law);
  return it == colours.end() ? "#777777" : it->second;
}

std::string BuildReportHtml(const Summary& summary, const std::vector<ClipReportData>& clips,
                            const std::string& generated_note) {
  std::ostringstream html;
  html << "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>dropfit report</title><style>"
       << kStyle << "</style></head><body><main>";
  html << "<h1>dropfit &middot; drop-test report</h1><div class=\"meta\">dropfit " << kVersion << " &middot; "
       << EscapeHtml(generated_note) << " &middot; " << clips.size() << " clip result(s), " << summary.errors.size()
       << " failed</div>";

  std::vector<std::pair<std::string, std::string>> errors, warnings;
  for (const ClipMessage& m : summary.errors) errors.emplace_back(m.clip, m.message);
  for (const ClipMessage& m : summary.warnings) warnings.emplace_back(m.clip, m.message);
  AttentionList(html, errors, "Failed clips and errors", true);
  AttentionList(html, warnings, "Warnings", false);
  html << "<div class=\"safety\"><strong>Safety.</strong> Drop rigs involve falling masses, pinch points, "
          "inflated tyres that store energy, and intense lighting: follow your local rules and qualified practice. "
          "The contact-law parameters here are for simulation and comparison; they do not certify a "
          "safety-critical part.</div>";

  SummaryTable(html, summary.groups);
  for (const SpecimenSummary& sp : summary.specimens) SpecimenSection(html, sp);
  RigSection(html, summary);
  html << "<h2>Clips</h2>";
  for (const ClipReportData& clip : clips) ClipSection(html, clip);
  html << "</main></body></html>\n";
  return html.str();
}

}  // namespace dropfit::cli
