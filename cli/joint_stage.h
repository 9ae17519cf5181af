#pragma once
// The folder run's last stage: per specimen, the joint contact-law fits over all its clips and
// heights (pipeline/joint_stage.h) as summary.json's `specimens`, with the COR-against-speed
// curves for the report. The specimens are fitted on a few threads.

#include <functional>
#include <string>
#include <vector>

#include "cli/manifest.h"
#include "cli/results.h"
#include "pipeline/clip.h"

namespace dropfit::cli {

struct JointClip {
  const ManifestRow* row = nullptr;
  const pipeline::ClipMeasurement* measurement = nullptr;
};

// Specimens in order of first appearance, fitted on up to `jobs` threads (the same result for
// any count). `log` receives one line per specimen, from the thread that fitted it.
std::vector<SpecimenSummary> FitSpecimens(const std::vector<JointClip>& clips,
                                          const std::function<void(const std::string&)>& log, int jobs = 1);

}  // namespace dropfit::cli
