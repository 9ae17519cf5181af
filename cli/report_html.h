#pragma once
// The run's report: one self-contained HTML page (inline CSS and SVG, no scripts, no network)
// built only from the result files, so `dropfit report OUT` can rebuild it at any time.
//
// Layout (our own): title and run facts; "needs attention" (every error and warning) near the
// top; the safety note; the per-height summary table; per specimen the joint fits, COR against
// impact speed with each law's prediction, and the leave-one-height-out table; the rig's
// quality figures; per clip its impacts, height against time with contact phases shaded and
// the best law's simulated trajectory, force against deflection, and residuals per law.

#include <string>
#include <vector>

#include "cli/results.h"

namespace dropfit::cli {

struct ClipReportData {
  ClipResult result;
  std::vector<TrackRow> track;
};

// Builds the page. `generated_note` is a line shown under the title (e.g. the time).
std::string BuildReportHtml(const Summary& summary, const std::vector<ClipReportData>& clips,
                            const std::string& generated_note);

// The colour the report uses for a law id (and a neutral grey for anything else).
std::string LawColour(const std::string& law);

}  // namespace dropfit::cli
