// The plan's terminal table and its self-contained HTML page (plan/plan.h).
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <map>
#include <sstream>
#include <string>
#include <vector>

#include "analysis/contact_law.h"
#include "plan/plan.h"

namespace dropfit::plan {

namespace {

std::string Fmt(const char* format, double v) {
  if (!std::isfinite(v)) return "-";
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, format, v);
  return buffer;
}

std::string Percent(const Spread& s) { return Fmt("%.2f", 100.0 * s.sd / std::abs(s.truth)); }

std::string Escape(const std::string& text) {
  std::string out;
  for (char c : text) {
    if (c == '<')
      out += "&lt;";
    else if (c == '>')
      out += "&gt;";
    else if (c == '&')
      out += "&amp;";
    else if (c == '"')
      out += "&quot;";
    else
      out += c;
  }
  return out;
}

std::string SettingLabel(const SettingResult& s) {
  std::string label = Fmt("%g", s.rate.fps);
  label += " fps ";
  label += std::to_string(s.rate.width_px);
  label += "x";
  label += std::to_string(s.rate.height_px);
  return label;
}

std::string ParamText(const PlannedSpecimen& sp) {
  std::string text = analysis::ToString(sp.law) + ":";
  const auto& names = analysis::ParameterNames(sp.law);
  for (size_t i = 0; i < names.size(); ++i) {
    text += " ";
    text += names[i];
    text += "=";
    text += Fmt("%.5g", sp.params[i]);
  }
  return text;
}

}  // namespace

std::string FormatPlanTable(const PlanOptions& o, const PlanResult& r) {
  std::ostringstream out;
  out << "specimen: " << o.mass_kg << " kg, free radius " << o.free_radius_m << " m; " << ParamText(r.specimen)
      << "\n  (" << r.specimen.how << ")\n";
  out << "targets (sd of a height's mean): COR " << o.target_cor << ", contact duration " << 100 * o.target_duration
      << " %, max deflection " << 100 * o.target_deflection << " %, stiffness " << 100 * o.target_stiffness
      << " %; at most " << o.max_repeats << " repeats; " << o.realisations << " simulated clips per cell\n\n";
  char line[512];
  std::snprintf(line, sizeof line, "%-22s %6s %6s %6s %6s %6s %4s %-9s %7s %6s %6s %6s %7s %5s %4s\n", "setting",
                "mm/px", "exp_us", "mk_px", "h_m", "f/ctc", "blur", "in view", "sd_COR", "tc_%", "dmax_%", "k_%",
                "damp_%", "ok", "rep");
  out << line;
  for (size_t i = 0; i < r.settings.size(); ++i) {
    const SettingResult& s = r.settings[i];
    for (const HeightResult& h : s.heights) {
      std::string view = h.release_in_view ? "drop" : Fmt("%.2fm", h.visible_fall_m);
      view += h.rebound_in_view ? "+reb" : "-reb";
      std::snprintf(line, sizeof line, "%-22s %6s %6s %6s %6s %6s %4s %-9s %7s %6s %6s %6s %7s %2d/%-2d %4s\n",
                    (SettingLabel(s) + (r.chosen && *r.chosen == i ? " *" : "")).c_str(),
                    Fmt("%.3g", s.scale_m_per_px * 1e3).c_str(), Fmt("%.0f", s.exposure_s * 1e6).c_str(),
                    Fmt("%.1f", s.marker_px).c_str(), Fmt("%.3g", h.height_m).c_str(),
                    Fmt("%.1f", h.frames_per_contact).c_str(), Fmt("%.1f", h.blur_px).c_str(), view.c_str(),
                    Fmt("%.2g", h.cor.sd).c_str(), Percent(h.duration_s).c_str(), Percent(h.deflection_m).c_str(),
                    Percent(h.stiffness).c_str(), Percent(h.damping).c_str(), h.measured, o.realisations,
                    h.repeats_needed ? std::to_string(h.repeats_needed).c_str() : "-");
      out << line;
    }
  }
  out << "\n(f/ctc: frames per contact; blur: marker blur at impact [px]; in view: the release (drop) or the fall "
         "seen [m], and the rebound's apex; sd_*: one clip's standard uncertainty, percentages of the value; "
         "rep: repeats needed at that height; * the choice)\n";
  out << r.verdict << "\n";
  if (!r.chosen) {
    for (const SettingResult& s : r.settings) {
      for (const std::string& m : s.missing) out << "  " << SettingLabel(s) << ": " << m << "\n";
    }
  }
  return out.str();
}

std::string PlanHtml(const PlanOptions& o, const PlanResult& r) {
  std::ostringstream h;
  h << "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>dropfit plan</title>\n<style>\n"
       "body{font-family:system-ui,sans-serif;margin:2em auto;max-width:1100px;color:#1d2b36;background:#fbfaf7}\n"
       "h1{font-weight:600;border-bottom:3px solid #c8553d;padding-bottom:.2em}\n"
       "table{border-collapse:collapse;font-size:13px;margin:1em 0}td,th{padding:3px 8px;border-bottom:1px "
       "solid #ddd;text-align:right}th{background:#ece8df}tr.chosen td{background:#fbe3d6;font-weight:600}\n"
       ".plots{display:flex;flex-wrap:wrap;gap:12px}.verdict{font-size:1.1em;padding:.6em;border-left:5px solid "
       "#c8553d;background:#f3efe6}\n"
       "</style></head><body>\n<h1>Test plan</h1>\n";
  h << "<p class=\"verdict\">" << Escape(r.verdict) << "</p>\n";
  h << "<p>Specimen: " << o.mass_kg << " kg, free radius " << o.free_radius_m << " m; " << Escape(ParamText(r.specimen))
    << " (" << Escape(r.specimen.how) << ").<br>Targets (standard uncertainty of a height's mean): COR " << o.target_cor
    << ", contact duration " << 100 * o.target_duration << " %, maximum deflection " << 100 * o.target_deflection
    << " %, stiffness " << 100 * o.target_stiffness << " %. " << o.realisations
    << " simulated clips per setting and height (forward model, tracker noise as measured, real kinematics and "
       "fits).</p>\n";

  // Plots: one clip's sd against frame rate, one line per (scale, height); the target dashed.
  struct Figure {
    const char* title;
    double target;
    double (*value)(const HeightResult&);
  };
  const Figure figures[] = {
      {"COR sd", o.target_cor, [](const HeightResult& x) { return x.cor.sd; }},
      {"contact duration sd [%]", 100 * o.target_duration,
       [](const HeightResult& x) { return 100 * x.duration_s.sd / x.duration_s.truth; }},
      {"max deflection sd [%]", 100 * o.target_deflection,
       [](const HeightResult& x) { return 100 * x.deflection_m.sd / x.deflection_m.truth; }},
      {"stiffness sd [%]", 100 * o.target_stiffness,
       [](const HeightResult& x) { return 100 * x.stiffness.sd / std::abs(x.stiffness.truth); }},
  };
  std::vector<double> scales;
  for (const SettingResult& s : r.settings) {
    if (std::find(scales.begin(), scales.end(), s.scale_m_per_px) == scales.end()) scales.push_back(s.scale_m_per_px);
  }
  const char* colours[] = {"#c8553d", "#2d7dd2", "#588b5d", "#8d5a97", "#d2a12d", "#3d3d3d"};
  double fmin = 1e300, fmax = 0;
  for (const SettingResult& s : r.settings) {
    fmin = std::min(fmin, s.rate.fps);
    fmax = std::max(fmax, s.rate.fps);
  }
  if (fmax <= fmin) fmax = fmin * 2;
  h << "<div class=\"plots\">\n";
  const double W = 520, H = 260, L = 60, R = 130, T = 24, B = 36;
  for (const Figure& f : figures) {
    // Log axis: the uncertainties span decades.
    double ymin = f.target, ymax = f.target;
    for (const SettingResult& s : r.settings) {
      for (const HeightResult& x : s.heights) {
        const double v = f.value(x);
        if (std::isfinite(v) && v > 0) {
          ymin = std::min(ymin, v);
          ymax = std::max(ymax, v);
        }
      }
    }
    const double lo_exp = std::floor(std::log10(ymin)), hi_exp = std::max(lo_exp + 1, std::ceil(std::log10(ymax)));
    auto X = [&](double fps) { return L + (W - L - R) * std::log(fps / fmin) / std::log(fmax / fmin); };
    auto Y = [&](double v) {
      return T +
             (H - T - B) * (1 - (std::log10(std::clamp(v, std::pow(10.0, lo_exp), std::pow(10.0, hi_exp))) - lo_exp) /
                                    (hi_exp - lo_exp));
    };
    h << "<svg width=\"" << W << "\" height=\"" << H << "\" viewBox=\"0 0 " << W << " " << H
      << "\" xmlns=\"http://www.w3.org/2000/svg\" font-size=\"11\">\n";
    h << "<rect x=\"" << L << "\" y=\"" << T << "\" width=\"" << W - L - R << "\" height=\"" << H - T - B
      << "\" fill=\"#fff\" stroke=\"#999\"/>\n";
    h << "<text x=\"" << L << "\" y=\"15\" font-weight=\"600\">" << f.title
      << " (one clip) vs frame rate, log scale</text>\n";
    for (double e = lo_exp; e <= hi_exp; ++e) {
      const double v = std::pow(10.0, e);
      h << "<text x=\"" << L - 4 << "\" y=\"" << Y(v) + 4 << "\" text-anchor=\"end\">" << Fmt("%.3g", v) << "</text>\n";
    }
    std::vector<double> rates;
    for (const SettingResult& s : r.settings) {
      if (std::find(rates.begin(), rates.end(), s.rate.fps) == rates.end()) rates.push_back(s.rate.fps);
    }
    for (double fps : rates) {
      h << "<text x=\"" << X(fps) << "\" y=\"" << H - B + 14 << "\" text-anchor=\"middle\">" << Fmt("%g", fps)
        << "</text>\n";
    }
    h << "<text x=\"" << (L + W - R) / 2 << "\" y=\"" << H - 6 << "\" text-anchor=\"middle\">frames/s</text>\n";
    h << "<line x1=\"" << L << "\" x2=\"" << W - R << "\" y1=\"" << Y(f.target) << "\" y2=\"" << Y(f.target)
      << "\" stroke=\"#1d2b36\" stroke-dasharray=\"5,4\"/><text x=\"" << W - R + 4 << "\" y=\"" << Y(f.target) + 4
      << "\">target</text>\n";
    int series = 0;
    for (double scale : scales) {
      for (size_t hi = 0; hi < r.heights_m.size(); ++hi, ++series) {
        const char* colour = colours[series % 6];
        std::string path;
        for (const SettingResult& s : r.settings) {
          if (s.scale_m_per_px != scale) continue;
          const double v = f.value(s.heights[hi]);
          if (!std::isfinite(v)) continue;
          path += path.empty() ? "M" : " L";
          path += Fmt("%.1f", X(s.rate.fps)) + "," + Fmt("%.1f", Y(v));
          h << "<circle cx=\"" << X(s.rate.fps) << "\" cy=\"" << Y(v) << "\" r=\"3\" fill=\"" << colour << "\"/>\n";
        }
        if (!path.empty()) h << "<path d=\"" << path << "\" fill=\"none\" stroke=\"" << colour << "\"/>\n";
        h << "<text x=\"" << W - R + 4 << "\" y=\"" << T + 14 + 14 * series << "\" fill=\"" << colour << "\">"
          << Fmt("%g", r.heights_m[hi]) << " m, " << Fmt("%.3g", scale * 1e3) << " mm/px</text>\n";
      }
    }
    h << "</svg>\n";
  }
  h << "</div>\n";

  h << "<table><tr><th>setting</th><th>mm/px</th><th>exposure [&micro;s]</th><th>marker [px]</th><th>height "
       "[m]</th><th>frames per contact</th><th>blur at impact [px]</th><th>release / rebound in view</th><th>sd "
       "COR</th><th>sd t<sub>c</sub> [%]</th><th>sd &delta;<sub>max</sub> [%]</th><th>sd stiffness [%]</th><th>sd "
       "damping [%]</th><th>measured</th><th>repeats needed</th><th>sd COR, repeats</th></tr>\n";
  for (size_t i = 0; i < r.settings.size(); ++i) {
    const SettingResult& s = r.settings[i];
    for (const HeightResult& x : s.heights) {
      const int rep = s.repeats ? s.repeats : o.max_repeats;
      h << "<tr" << (r.chosen && *r.chosen == i ? " class=\"chosen\"" : "") << "><td>" << SettingLabel(s) << "</td><td>"
        << Fmt("%.3g", s.scale_m_per_px * 1e3) << "</td><td>" << Fmt("%.0f", s.exposure_s * 1e6) << "</td><td>"
        << Fmt("%.1f", s.marker_px) << "</td><td>" << Fmt("%g", x.height_m) << "</td><td>"
        << Fmt("%.1f", x.frames_per_contact) << "</td><td>" << Fmt("%.1f", x.blur_px) << "</td><td>"
        << (x.release_in_view ? "yes" : Fmt("%.2f m seen", x.visible_fall_m)) << " / "
        << (x.rebound_in_view ? "yes" : "no") << "</td><td>" << Fmt("%.4f", x.cor.sd) << "</td><td>"
        << Percent(x.duration_s) << "</td><td>" << Percent(x.deflection_m) << "</td><td>" << Percent(x.stiffness)
        << "</td><td>" << Percent(x.damping) << "</td><td>" << x.measured << "/" << o.realisations << "</td><td>"
        << (x.repeats_needed ? std::to_string(x.repeats_needed) : "&ndash;") << "</td><td>"
        << Fmt("%.4f", x.cor.sd / std::sqrt(rep)) << " (" << rep << ")</td></tr>\n";
    }
  }
  h << "</table>\n";
  bool any_missing = false;
  for (const SettingResult& s : r.settings) any_missing = any_missing || !s.missing.empty();
  if (any_missing) {
    h << "<h2>What is missing</h2><ul>\n";
    for (const SettingResult& s : r.settings) {
      for (const std::string& m : s.missing) h << "<li>" << Escape(SettingLabel(s) + ": " + m) << "</li>\n";
    }
    h << "</ul>\n";
  }
  h << "<p>Made by dropfit plan in " << Fmt("%.1f", r.seconds) << " s. Method: docs/methods.md &sect;21.</p>\n";
  h << "</body></html>\n";
  return h.str();
}

}  // namespace dropfit::plan
