#pragma once
// Joint contact-law fits per specimen, over all its clips and drop heights, and the
// leave-one-height-out test of whether a law fitted at some heights predicts another.
//
// Joint fit (contract "summary.json", joint_fits): one set of law parameters and one onset
// height for every clip of the specimen (same floor, same tyre), a window-start state per
// bounce; it is FitLaw (analysis/law_fit.h) over several clips.
//
// Leave-one-height-out (cross-validation by groups; e.g. Hastie, Tibshirani & Friedman, The
// Elements of Statistical Learning, 2nd ed. 2009, §7.10; common practice): for each nominal
// drop height H with at least one other height present,
//   1. the law is fitted to the clips of every other height (the "training" fit);
//   2. the same law is fitted to the clips at H alone (the "reference" fit: what the data at
//      H say through that law, including its force-zero separation and deflection);
//   3. each held-out bounce is predicted by the forward model with the training parameters
//      and onset height (the clip's own when the geometry fixes it), from the reference
//      fit's state at that bounce's window start (the falling flight, law-free in effect);
//   4. the errors, prediction minus reference, are averaged over the held-out bounces:
//      cor_error (COR at the onset height), contact_duration_error_s (force-zero instant
//      minus onset), max_deflection_error_m.
// A law that only fits shows small residuals but large holdout errors; a law that holds at
// heights it was not fitted to shows both small.

#include <optional>
#include <string>
#include <vector>

#include "analysis/law_choice.h"
#include "analysis/law_fit.h"

namespace dropfit::analysis {

// Settings. Ranges in brackets.
//   leave_one_height_out   run the holdout test (costs two extra fits per height).
//   height_tolerance_m     clips whose nominal drop heights differ by at most this are one
//                          height group [0, 1] m.
struct JointFitOptions {
  bool leave_one_height_out = true;
  double height_tolerance_m = 1e-3;
};
std::optional<std::string> ValidateJointFitOptions(const JointFitOptions& options);

// Prediction errors at one held-out height (prediction - reference, mean over bounces).
struct HoldoutError {
  double drop_height_m = 0.0;
  int bounces = 0;  // held-out bounces predicted
  double cor_error = 0.0;
  double contact_duration_error_s = 0.0;
  double max_deflection_error_m = 0.0;
  double cor_error_max_abs = 0.0;      // the largest |error| over the bounces
  std::optional<std::string> failure;  // why this height could not be predicted
};

struct JointFitResult {
  LawFitResult fit;                   // all clips
  std::vector<HoldoutError> holdout;  // one per height group (empty with one height)
};

// One law over the specimen's clips. Throws std::invalid_argument for invalid options.
JointFitResult FitJoint(LawId law, const std::vector<FitClip>& clips, const LawFitOptions& options,
                        const JointFitOptions& joint_options = {});

// Every law and their choice (analysis/law_choice.h; indices into `laws`).
struct SpecimenFit {
  std::vector<JointFitResult> laws;  // AllLaws() order
  LawChoice choice;
};
SpecimenFit FitSpecimen(const std::vector<FitClip>& clips, const LawFitOptions& options,
                        const JointFitOptions& joint_options = {});

}  // namespace dropfit::analysis
