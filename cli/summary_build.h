#pragma once
// The per-height summary of a folder run (docs/formats.md, "summary.csv"): one group per
// (specimen, nominal drop height), from the first complete impact of each clip; mean and
// sample standard deviation (n - 1), the sd left empty for a single clip.

#include <vector>

#include "cli/manifest.h"
#include "cli/results.h"

namespace dropfit::cli {

struct AnalysedClip {
  const ManifestRow* row = nullptr;  // specimen, nominal height
  const ClipResult* result = nullptr;
  bool failed = false;  // the clip failed (result.errors): it only flags its group
};

// Groups in order of each specimen's first row, then ascending height. Heights are grouped
// when they agree to 1e-9 m. A clip counts with its first complete impact when that impact
// carries no flag; otherwise it only flags its group (docs/formats.md, "Flags"): "failed" (and
// the clip's own flags, e.g. "rate_or_scale") for a failed clip, "incomplete" for one without a
// complete impact, the impact's flag (e.g. "cor_above_1") for a flagged one. A group whose clips
// all were left out is still listed, with 0 clips, no numbers and its flags.
std::vector<SummaryGroup> BuildSummaryGroups(const std::vector<AnalysedClip>& clips);

}  // namespace dropfit::cli
