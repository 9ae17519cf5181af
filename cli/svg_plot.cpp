#include "cli/svg_plot.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>
#include <sstream>

namespace dropfit::cli {

namespace {

std::string Fmt(double v, int digits = 2) {
  char buf[32];
  std::snprintf(buf, sizeof(buf), "%.*f", digits, v);
  return buf;
}

std::string TickLabel(double v, double step) {
  if (v == 0.0) return "0";
  const double a = std::abs(v);
  char buf[32];
  if (a >= 1e5 || a < 1e-3) {
    std::snprintf(buf, sizeof(buf), "%.3g", v);
  } else {
    const int decimals = std::max(0, static_cast<int>(std::ceil(-std::log10(step) - 1e-9)));
    std::snprintf(buf, sizeof(buf), "%.*f", decimals, v);
  }
  return buf;
}

}  // namespace

std::string EscapeHtml(const std::string& text) {
  std::string out;
  out.reserve(text.size());
  for (char c : text) {
    switch (c) {
      case '&':
        out += "&amp;";
        break;
      case '<':
        out += "&lt;";
        break;
      case '>':
        out += "&gt;";
        break;
      case '"':
        out += "&quot;";
        break;
      case '\'':
        out += "&#39;";
        break;
      default:
        out += c;
    }
  }
  return out;
}

std::vector<double> NiceTicks(double lo, double hi, int target) {
  std::vector<double> ticks;
  if (!(std::isfinite(lo) && std::isfinite(hi)) || hi <= lo || target < 1) return ticks;
  const double raw = (hi - lo) / target;
  const double mag = std::pow(10.0, std::floor(std::log10(raw)));
  // Heckbert's rounding of the raw step to 1, 2, 5 or 10 x 10^k.
  const double f = raw / mag;
  const double step = (f < 1.5 ? 1.0 : f < 3.0 ? 2.0 : f < 7.0 ? 5.0 : 10.0) * mag;
  const double first = std::ceil(lo / step - 1e-9) * step;
  for (double v = first; v <= hi + step * 1e-9; v += step) ticks.push_back(std::abs(v) < step * 1e-9 ? 0.0 : v);
  return ticks;
}

int CountDataPoints(const Plot& plot) {
  int n = 0;
  for (const PlotSeries& s : plot.series) {
    for (size_t i = 0; i < std::min(s.x.size(), s.y.size()); ++i) {
      if (std::isfinite(s.x[i]) && std::isfinite(s.y[i])) ++n;
    }
  }
  return n;
}

std::string RenderSvg(const Plot& plot) {
  // The legend stands in a column of its own right of the frame, never over the data.
  bool labelled = false;
  for (const PlotSeries& s : plot.series) labelled |= !s.label.empty();
  const double legend_w = labelled ? kLegendWidthPx : 0.0;
  const double w = plot.width_px + legend_w, h = plot.height_px;
  const double left = 70, right = 14, top = 30, bottom = 46;
  double x_lo = std::numeric_limits<double>::infinity(), x_hi = -x_lo, y_lo = x_lo, y_hi = -x_lo;
  for (const PlotSeries& s : plot.series) {
    for (size_t i = 0; i < std::min(s.x.size(), s.y.size()); ++i) {
      if (!std::isfinite(s.x[i]) || !std::isfinite(s.y[i])) continue;
      x_lo = std::min(x_lo, s.x[i]);
      x_hi = std::max(x_hi, s.x[i]);
      y_lo = std::min(y_lo, s.y[i]);
      y_hi = std::max(y_hi, s.y[i]);
    }
  }
  std::ostringstream svg;
  svg << "<svg xmlns=\"http://www.w3.org/2000/svg\" class=\"chart\" width=\"" << w << "\" height=\"" << h
      << "\" viewBox=\"0 0 " << w << ' ' << h << "\" role=\"img\" aria-label=\"" << EscapeHtml(plot.title) << "\">";
  svg << "<rect x=\"0\" y=\"0\" width=\"" << w << "\" height=\"" << h << "\" fill=\"#fcfbf7\"/>";
  svg << "<text x=\"" << left << "\" y=\"18\" class=\"ct\">" << EscapeHtml(plot.title) << "</text>";
  if (!std::isfinite(x_lo)) {
    svg << "<text x=\"" << w / 2 << "\" y=\"" << h / 2 << "\" text-anchor=\"middle\" class=\"cl\">no data</text></svg>";
    return svg.str();
  }
  if (x_hi - x_lo < 1e-12 * std::max(1.0, std::abs(x_lo))) {
    x_lo -= 0.5;
    x_hi += 0.5;
  }
  if (y_hi - y_lo < 1e-12 * std::max(1.0, std::abs(y_lo))) {
    y_lo -= 0.5;
    y_hi += 0.5;
  }
  const double y_pad = 0.05 * (y_hi - y_lo);
  y_lo -= y_pad;
  y_hi += y_pad;
  const double pw = w - legend_w - left - right, ph = h - top - bottom;
  auto px = [&](double x) { return left + (x - x_lo) / (x_hi - x_lo) * pw; };
  auto py = [&](double y) { return top + (1.0 - (y - y_lo) / (y_hi - y_lo)) * ph; };

  for (const PlotSpan& span : plot.spans) {
    const double a = std::clamp(px(span.x0), left, left + pw), b = std::clamp(px(span.x1), left, left + pw);
    if (b > a) {
      svg << "<rect x=\"" << Fmt(a) << "\" y=\"" << top << "\" width=\"" << Fmt(b - a) << "\" height=\"" << ph
          << "\" fill=\"" << span.colour << "\"/>";
    }
  }
  // Grid and ticks.
  for (double t : NiceTicks(x_lo, x_hi, 6)) {
    svg << "<line x1=\"" << Fmt(px(t)) << "\" y1=\"" << top << "\" x2=\"" << Fmt(px(t)) << "\" y2=\"" << top + ph
        << "\" class=\"cg\"/><text x=\"" << Fmt(px(t)) << "\" y=\"" << top + ph + 16
        << "\" text-anchor=\"middle\" class=\"cl\">" << TickLabel(t, (x_hi - x_lo) / 6) << "</text>";
  }
  for (double t : NiceTicks(y_lo, y_hi, 5)) {
    svg << "<line x1=\"" << left << "\" y1=\"" << Fmt(py(t)) << "\" x2=\"" << left + pw << "\" y2=\"" << Fmt(py(t))
        << "\" class=\"cg\"/><text x=\"" << left - 6 << "\" y=\"" << Fmt(py(t) + 4)
        << "\" text-anchor=\"end\" class=\"cl\">" << TickLabel(t, (y_hi - y_lo) / 5) << "</text>";
  }
  svg << "<rect x=\"" << left << "\" y=\"" << top << "\" width=\"" << pw << "\" height=\"" << ph
      << "\" fill=\"none\" stroke=\"#555\" stroke-width=\"1\"/>";
  svg << "<text x=\"" << left + pw / 2 << "\" y=\"" << h - 8 << "\" text-anchor=\"middle\" class=\"cl\">"
      << EscapeHtml(plot.x_label) << "</text>";
  svg << "<text transform=\"translate(14," << top + ph / 2 << ") rotate(-90)\" text-anchor=\"middle\" class=\"cl\">"
      << EscapeHtml(plot.y_label) << "</text>";

  // Data, clipped to the plot area.
  svg << "<g>";
  for (const PlotSeries& s : plot.series) {
    const size_t n = std::min(s.x.size(), s.y.size());
    if (s.style == SeriesStyle::kPoints) {
      svg << "<g fill=\"" << s.colour << "\">";
      for (size_t i = 0; i < n; ++i) {
        if (!std::isfinite(s.x[i]) || !std::isfinite(s.y[i])) continue;
        svg << "<circle cx=\"" << Fmt(px(s.x[i])) << "\" cy=\"" << Fmt(py(s.y[i])) << "\" r=\"2.2\"/>";
      }
      svg << "</g>";
      continue;
    }
    std::string d;
    bool pen_down = false;
    for (size_t i = 0; i < n; ++i) {
      if (!std::isfinite(s.x[i]) || !std::isfinite(s.y[i])) {
        pen_down = false;
        continue;
      }
      d += pen_down ? 'L' : 'M';
      d += Fmt(px(s.x[i]));
      d += ',';
      d += Fmt(py(s.y[i]));
      pen_down = true;
    }
    svg << "<path d=\"" << d << "\" fill=\"none\" stroke=\"" << s.colour << "\" stroke-width=\"1.6\""
        << (s.style == SeriesStyle::kDashed ? " stroke-dasharray=\"5,3\"" : "") << "/>";
  }
  svg << "</g>";
  // Legend, right of the frame.
  double ly = top + 14;
  for (const PlotSeries& s : plot.series) {
    if (s.label.empty()) continue;
    const double lx = left + pw + right;
    if (s.style == SeriesStyle::kPoints) {
      svg << "<circle cx=\"" << lx + 9 << "\" cy=\"" << ly - 4 << "\" r=\"3\" fill=\"" << s.colour << "\"/>";
    } else {
      svg << "<line x1=\"" << lx << "\" y1=\"" << ly - 4 << "\" x2=\"" << lx + 18 << "\" y2=\"" << ly - 4
          << "\" stroke=\"" << s.colour << "\" stroke-width=\"2\""
          << (s.style == SeriesStyle::kDashed ? " stroke-dasharray=\"5,3\"" : "") << "/>";
    }
    svg << "<text x=\"" << lx + 24 << "\" y=\"" << ly << "\" class=\"cl\">" << EscapeHtml(s.label) << "</text>";
    ly += 15;
  }
  svg << "</svg>";
  return svg.str();
}

}  // namespace dropfit::cli
