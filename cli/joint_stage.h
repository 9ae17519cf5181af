#pragma once
// The folder run's last stage: per specimen, the joint contact-law fits over all its clips
// and heights with the leave-one-height-out test (analysis/joint_fit.h), as summary.json's
// `specimens`, with the COR-against-speed curves for the report.

#include <functional>
#include <string>
#include <vector>

#include "calib/rig.h"
#include "cli/manifest.h"
#include "cli/results.h"

namespace dropfit::cli {

struct JointClip {
  const ManifestRow* row = nullptr;
  const ClipResult* result = nullptr;  // capture rate, measured impacts
  const std::vector<TrackRow>* track = nullptr;
};

// Specimens in order of first appearance, fitted on up to `jobs` threads (the same result for
// any count). `log` receives one line per specimen, from the thread that fitted it.
std::vector<SpecimenSummary> FitSpecimens(const std::vector<JointClip>& clips, const calib::Rig& rig,
                                          const std::function<void(const std::string&)>& log, int jobs = 1);

}  // namespace dropfit::cli
