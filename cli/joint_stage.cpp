#include "cli/joint_stage.h"

#include <algorithm>
#include <cstdio>

#include "cli/fit_records.h"
#include "cli/parallel_for.h"
#include "pipeline/joint_stage.h"
#include "pipeline/uncertainty.h"

namespace dropfit::cli {

namespace {

// The records of one specimen's joint fits; each parameter's sd is its combined standard
// uncertainty with the clips' scale inputs pooled (pipeline::PooledScaleUncertainty).
SpecimenSummary SummaryOf(const pipeline::SpecimenResult& r,
                          const std::vector<const pipeline::ClipMeasurement*>& clips) {
  SpecimenSummary summary;
  summary.specimen = r.specimen;
  if (!r.fit) return summary;
  std::vector<analysis::ScaleUncertainty> scales;
  for (const pipeline::ClipMeasurement* m : clips) scales.push_back(m->scale_uncertainty);
  const analysis::ScaleUncertainty pooled = pipeline::PooledScaleUncertainty(scales);
  summary.curves.push_back({"measured", CurveKind::kCorMeasured, r.measured_cor.impact_speed_mps, r.measured_cor.cor});
  for (size_t i = 0; i < r.fit->laws.size(); ++i) {
    const analysis::JointFitResult& law = r.fit->laws[i];
    JointFitRecord record;
    record.fit = ToFitRecord(law.fit, -1);
    if (!clips.empty()) AddParameterBudgets(law.fit, pooled, clips.front()->conditions, record.fit);
    if (r.geometry_onset_height_m) record.fit.extra.emplace_back("onset_height_geometry_m", *r.geometry_onset_height_m);
    for (const analysis::HoldoutError& h : law.holdout) {
      if (h.failure) continue;
      record.holdout.push_back({h.drop_height_m, h.cor_error, h.contact_duration_error_s, h.max_deflection_error_m});
    }
    summary.joint_fits.push_back(record);
    if (i < r.law_cor.size()) summary.curves.push_back(CorCurve(law.fit.law, r.law_cor[i]));
  }
  const analysis::LawChoice& choice = r.fit->choice;
  if (choice.best) summary.best_law = analysis::ToString(r.fit->laws[static_cast<size_t>(*choice.best)].fit.law);
  for (int i : choice.equivalent)
    summary.equivalent_laws.push_back(analysis::ToString(r.fit->laws[static_cast<size_t>(i)].fit.law));
  summary.no_law_fits = choice.no_law_fits;
  return summary;
}

// The gravity ruler pooled over the specimen's clips (analysis::PoolMarkerOffsets): the offset
// belongs to the wheel's hub on that rig.
void AddPooledGravityRuler(const std::vector<const pipeline::ClipMeasurement*>& clips, SpecimenSummary& summary) {
  std::vector<analysis::MarkerOffsetEstimate> estimates;
  for (const pipeline::ClipMeasurement* m : clips) {
    if (m->gravity_offset) estimates.push_back(*m->gravity_offset);
  }
  const analysis::MarkerOffsetEstimate pooled = analysis::PoolMarkerOffsets(estimates);
  if (pooled.failure) return;
  summary.extra.emplace_back("marker_offset_gravity_m", pooled.offset_m);
  summary.extra.emplace_back("marker_offset_gravity_sd_m", pooled.sd_m);
  summary.extra.emplace_back("marker_offset_gravity_clips", pooled.flights);
  summary.extra.emplace_back("marker_offset_gravity_birge_ratio", pooled.birge_ratio);
}

}  // namespace

std::vector<SpecimenSummary> FitSpecimens(const std::vector<JointClip>& clips,
                                          const std::function<void(const std::string&)>& log, int jobs) {
  std::vector<std::string> order;
  for (const JointClip& c : clips) {
    if (std::find(order.begin(), order.end(), c.row->specimen) == order.end()) order.push_back(c.row->specimen);
  }
  std::vector<SpecimenSummary> out(order.size());
  // Specimens are independent: fitted on up to `jobs` threads (no shared state in the fits).
  ParallelFor(order.size(), jobs, [&](size_t index) {
    std::vector<const pipeline::ClipMeasurement*> mine;
    for (const JointClip& c : clips) {
      if (c.row->specimen == order[index]) mine.push_back(c.measurement);
    }
    const pipeline::SpecimenResult r = pipeline::FitSpecimenClips(order[index], mine);
    out[index] = SummaryOf(r, mine);
    AddPooledGravityRuler(mine, out[index]);
    if (!r.fit) return;
    char line[256];
    std::snprintf(line, sizeof(line), "joint fits for specimen '%s': %d clips, best law %s, %.1f s",
                  order[index].c_str(), r.clips_fitted, out[index].best_law.value_or("none").c_str(), r.seconds);
    log(line);
  });
  return out;
}

}  // namespace dropfit::cli
