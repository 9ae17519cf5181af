#pragma once
// Kinds of hub marker the tracker can follow (`--marker`).

#include <string>

namespace dropfit::tracker {

enum class MarkerKind {
  kAuto,      // detect in the first frames and report what was chosen and why
  kQuadrant,  // disc of alternating black and white quarters: its saddle point
  kDot,       // plain dot, bright on dark or dark on bright: its centre
  kTemplate,  // any textured patch: normalised cross-correlation peak
};

// "auto", "quadrant", "dot", "template".
std::string ToString(MarkerKind kind);
// Throws std::invalid_argument naming the unknown string and listing the valid ones.
MarkerKind MarkerKindFromString(const std::string& text);

}  // namespace dropfit::tracker
