#pragma once
// The folder run's joint stage for one specimen: the contact laws fitted jointly over all its
// clips and heights, with the leave-one-height-out test (analysis/joint_fit.h), the measured COR
// points and each law's predicted COR against impact speed for the report. Consumes the clips'
// measurements (pipeline/clip.h, MeasureClip); no clip is segmented again here.

#include <optional>
#include <string>
#include <vector>

#include "analysis/joint_fit.h"
#include "pipeline/clip.h"
#include "pipeline/law_curves.h"

namespace dropfit::pipeline {

struct SpecimenResult {
  std::string specimen;
  int clips_fitted = 0;                      // clips with at least one complete bounce
  std::optional<analysis::SpecimenFit> fit;  // unset when no clip could be fitted
  analysis::LawFitOptions fit_options;
  // The geometry's onset height (floor + free radius), where known: the joint fit's start.
  std::optional<double> geometry_onset_height_m;
  CorCurvePoints measured_cor;          // complete impacts of every clip with a finite COR
  std::vector<CorCurvePoints> law_cor;  // one per fit->laws, over 0.8..1.2 x the measured speeds;
                                        // none when the measured speeds span no range
  double seconds = 0.0;                 // wall time of the joint fits
};

// The joint fit's input of one clip: its fit input with the onset height left free. The joint
// fit locates the onset height itself, from the geometry's value (floor + free radius) as its
// start: over several heights the fit pins it to micrometres, while the geometry is known to tens
// of micrometres at best (the calibrated floor, a measured radius). Held fixed, such an error is
// absorbed by whichever law has spare parameters: measured with bench/run_bench, a floor 12 um
// (0.012 px) off made bilinear beat the true kelvin-voigt law by 213 BIC. The per-clip fits keep
// the geometry's value (docs/formats.md). Nothing when the clip has no complete bounce.
std::optional<analysis::FitClip> JointFitClip(const ClipMeasurement& measurement,
                                              std::optional<double>* geometry_onset_height_m);

// Fits one specimen from its clips' measurements (in clip order). The law-fit options are those
// of the first usable clip. Throws nothing for a clip that cannot be used: it is left out.
SpecimenResult FitSpecimenClips(const std::string& specimen, const std::vector<const ClipMeasurement*>& clips);

}  // namespace dropfit::pipeline
