#pragma once
// Small, dependency-free SVG charts for the HTML report: line and point series on linear
// axes with "nice" ticks (steps of 1, 2 or 5 x 10^k), shaded x-spans, a legend. The SVG is
// inline, so the report stays one self-contained file readable without scripts.

#include <string>
#include <vector>

namespace dropfit::cli {

enum class SeriesStyle { kLine, kDashed, kPoints };

struct PlotSeries {
  std::string label;
  std::string colour;  // CSS colour
  SeriesStyle style = SeriesStyle::kLine;
  std::vector<double> x, y;  // non-finite points are skipped (lines break there)
};

struct PlotSpan {  // a shaded x-range (e.g. a contact phase)
  double x0 = 0.0, x1 = 0.0;
  std::string colour;
};

struct Plot {
  std::string title;
  std::string x_label;  // with unit, e.g. "time [s]"
  std::string y_label;
  std::vector<PlotSeries> series;
  std::vector<PlotSpan> spans;
  int width_px = 620;
  int height_px = 340;
};

// Width of the legend column right of the frame [px], added to width_px when a series has a label.
inline constexpr double kLegendWidthPx = 170.0;

// Renders `plot` as an <svg> element (the legend outside the plotted data, right of the frame). A plot with no finite
// point renders a frame that says so.
std::string RenderSvg(const Plot& plot);

// Counts the data marks (points and line vertices) RenderSvg draws, for tests.
int CountDataPoints(const Plot& plot);

// Escapes &, <, >, " and ' for HTML text and attributes.
std::string EscapeHtml(const std::string& text);

// Tick values covering [lo, hi] with about `target` steps of 1, 2 or 5 x 10^k.
std::vector<double> NiceTicks(double lo, double hi, int target);

}  // namespace dropfit::cli
