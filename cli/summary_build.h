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
};

// Groups in order of each specimen's first row, then ascending height. Clips without a
// complete impact do not count. Heights are grouped when they agree to 1e-9 m.
std::vector<SummaryGroup> BuildSummaryGroups(const std::vector<AnalysedClip>& clips);

}  // namespace dropfit::cli
