#include "analysis/uncertainty_budget.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <stdexcept>

namespace dropfit::analysis {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

void CheckSds(const std::vector<double>& sensitivities, const std::vector<double>& sds, const char* who) {
  if (sensitivities.size() != sds.size())
    throw std::invalid_argument(std::string(who) + ": " + std::to_string(sensitivities.size()) + " sensitivities but " +
                                std::to_string(sds.size()) + " standard uncertainties");
  for (size_t i = 0; i < sds.size(); ++i) {
    if (!(sds[i] >= 0.0) || !std::isfinite(sds[i]) || !std::isfinite(sensitivities[i]))
      throw std::invalid_argument(std::string(who) + ": input " + std::to_string(i) +
                                  " has sd or sensitivity that is negative or not finite");
  }
}

const std::array<const char*, kBudgetParts> kPartNames = {"fit",          "onset_height", "rig_scale",
                                                          "marker_plane", "capture_rate", "gravity"};

}  // namespace

double CombineUncorrelated(const std::vector<double>& sensitivities, const std::vector<double>& sds) {
  CheckSds(sensitivities, sds, "CombineUncorrelated");
  double sum = 0.0;
  for (size_t i = 0; i < sds.size(); ++i) sum += (sensitivities[i] * sds[i]) * (sensitivities[i] * sds[i]);
  return std::sqrt(sum);
}

double CombineCorrelated(const std::vector<double>& sensitivities, const std::vector<double>& sds,
                         const std::vector<std::vector<double>>& correlation) {
  CheckSds(sensitivities, sds, "CombineCorrelated");
  const size_t n = sds.size();
  if (correlation.size() != n)
    throw std::invalid_argument("CombineCorrelated: the correlation matrix has " + std::to_string(correlation.size()) +
                                " rows, expected " + std::to_string(n));
  for (size_t i = 0; i < n; ++i) {
    if (correlation[i].size() != n)
      throw std::invalid_argument("CombineCorrelated: row " + std::to_string(i) + " of the correlation matrix has " +
                                  std::to_string(correlation[i].size()) + " entries, expected " + std::to_string(n));
  }
  for (size_t i = 0; i < n; ++i) {
    if (std::abs(correlation[i][i] - 1.0) > 1e-12)
      throw std::invalid_argument("CombineCorrelated: the correlation matrix's diagonal must be 1");
    for (size_t j = 0; j < n; ++j) {
      const double r = correlation[i][j];
      if (!std::isfinite(r) || std::abs(r) > 1.0 + 1e-12 || std::abs(r - correlation[j][i]) > 1e-12)
        throw std::invalid_argument("CombineCorrelated: correlation coefficients must be symmetric and within [-1, 1]");
    }
  }
  double sum = 0.0;
  for (size_t i = 0; i < n; ++i) {
    for (size_t j = 0; j < n; ++j) sum += sensitivities[i] * sds[i] * sensitivities[j] * sds[j] * correlation[i][j];
  }
  return std::sqrt(std::max(0.0, sum));
}

std::string ToString(BudgetPart part) { return kPartNames[static_cast<size_t>(part)]; }

BudgetPart BudgetPartFromString(const std::string& text) {
  std::string valid;
  for (int i = 0; i < kBudgetParts; ++i) {
    if (text == kPartNames[static_cast<size_t>(i)]) return static_cast<BudgetPart>(i);
    valid += (i ? ", " : "") + std::string(kPartNames[static_cast<size_t>(i)]);
  }
  throw std::invalid_argument("unknown uncertainty part '" + text + "'; valid: " + valid);
}

bool SharedBetweenClips(BudgetPart part) {
  return part == BudgetPart::kRigScale || part == BudgetPart::kCaptureRate || part == BudgetPart::kGravity;
}

FigureBudget MakeBudget(const std::array<double, kBudgetParts>& parts) {
  FigureBudget b;
  b.parts = parts;
  double sum = 0.0, largest = -1.0;
  for (int i = 0; i < kBudgetParts; ++i) {
    const double u = parts[static_cast<size_t>(i)];
    if (std::isnan(u)) {
      sum = kNaN;
      continue;
    }
    sum += u * u;
    if (u > largest) {
      largest = u;
      b.dominant = static_cast<BudgetPart>(i);
    }
  }
  b.sd = std::sqrt(sum);
  return b;
}

void ValidateScaleUncertainty(const ScaleUncertainty& s) {
  for (double v : {s.rig_scale_rel, s.marker_plane_rel, s.capture_rate_rel, s.gravity_rel}) {
    if (!(v >= 0.0) || !std::isfinite(v))
      throw std::invalid_argument("ScaleUncertainty: relative uncertainties must be finite and >= 0");
  }
}

FigureBudget BudgetOf(Dimension dim, double track_part, double fit_sd, double onset_sd, const ScaleUncertainty& s,
                      double gravity_part) {
  ValidateScaleUncertainty(s);
  const double v = std::abs(track_part);
  std::array<double, kBudgetParts> parts{};
  // An infinite fit sd (a parameter the data do not determine) stays infinite; NaN stays NaN.
  parts[static_cast<size_t>(BudgetPart::kFit)] = std::isnan(fit_sd) ? kNaN : std::abs(fit_sd);
  parts[static_cast<size_t>(BudgetPart::kOnsetHeight)] = std::isfinite(onset_sd) ? std::abs(onset_sd) : 0.0;
  if (s.gravity_ruler) {
    // e_L = e_g + e_plane + 2 e_rate: the rig's scale drops out.
    parts[static_cast<size_t>(BudgetPart::kRigScale)] = 0.0;
    parts[static_cast<size_t>(BudgetPart::kMarkerPlane)] = std::abs(dim.length) * v * s.marker_plane_rel;
    parts[static_cast<size_t>(BudgetPart::kCaptureRate)] =
        std::abs(2.0 * dim.length + dim.time) * v * s.capture_rate_rel;
    parts[static_cast<size_t>(BudgetPart::kGravity)] = std::abs(dim.length * track_part + gravity_part) * s.gravity_rel;
  } else {
    parts[static_cast<size_t>(BudgetPart::kRigScale)] = std::abs(dim.length) * v * s.rig_scale_rel;
    parts[static_cast<size_t>(BudgetPart::kMarkerPlane)] = std::abs(dim.length) * v * s.marker_plane_rel;
    parts[static_cast<size_t>(BudgetPart::kCaptureRate)] = std::abs(dim.time) * v * s.capture_rate_rel;
    parts[static_cast<size_t>(BudgetPart::kGravity)] = std::abs(gravity_part) * s.gravity_rel;
  }
  return MakeBudget(parts);
}

std::optional<Dimension> ParameterDimension(const std::string& name, double hertz_exponent_n, double volume_exponent) {
  if (name == "k_n_per_m" || name == "k1_n_per_m" || name == "k2_n_per_m") return Dimension{0.0, -2.0};
  if (name == "c_ns_per_m") return Dimension{0.0, -1.0};
  if (name == "k") return Dimension{1.0 - hertz_exponent_n, -2.0};
  if (name == "n") return Dimension{0.0, 0.0};
  if (name == "alpha_s_per_m" || name == "a_s_per_m") return Dimension{-1.0, 1.0};
  if (name == "knee_m") return Dimension{1.0, 0.0};
  if (name == "kv_n_per_m3") return Dimension{1.0 - volume_exponent, -2.0};
  if (name == "k3_n_per_m3") return Dimension{-2.0, -2.0};
  return std::nullopt;
}

MeanBudget MeanOf(const std::vector<double>& values, const std::vector<FigureBudget>& budgets) {
  if (values.size() != budgets.size() || values.empty())
    throw std::invalid_argument("MeanOf: " + std::to_string(values.size()) + " values and " +
                                std::to_string(budgets.size()) + " budgets (at least one of each, as many)");
  const auto n = static_cast<double>(values.size());
  std::array<double, kBudgetParts> parts{};
  for (int p = 0; p < kBudgetParts; ++p) {
    const auto part = static_cast<BudgetPart>(p);
    double sum = 0.0, sum_sq = 0.0;
    for (const FigureBudget& b : budgets) {
      const double u = b.part(part);
      sum += u;
      sum_sq += u * u;
    }
    // Shared: fully correlated between clips (eq. 13, r = 1): sum / N. Own: sqrt(sum u^2) / N.
    parts[static_cast<size_t>(p)] = SharedBetweenClips(part) ? sum / n : std::sqrt(sum_sq) / n;
  }
  MeanBudget out;
  out.spread_sd = out.repeats_sd_of_mean = kNaN;
  if (values.size() >= 2) {
    double mean = 0.0;
    for (double v : values) mean += v / n;
    double ss = 0.0;
    for (double v : values) ss += (v - mean) * (v - mean);
    out.spread_sd = std::sqrt(ss / (n - 1.0));
    out.repeats_sd_of_mean = out.spread_sd / std::sqrt(n);
    // The repeats' scatter measures the clips' own parts together; where it is larger, it
    // stands in for them (their proportions kept, so the dominant part stays named).
    double own_sq = 0.0;
    for (int p = 0; p < kBudgetParts; ++p) {
      if (!SharedBetweenClips(static_cast<BudgetPart>(p)))
        own_sq += parts[static_cast<size_t>(p)] * parts[static_cast<size_t>(p)];
    }
    const double own = std::sqrt(own_sq);
    if (std::isfinite(own) && out.repeats_sd_of_mean > own) {
      for (int p = 0; p < kBudgetParts; ++p) {
        if (SharedBetweenClips(static_cast<BudgetPart>(p))) continue;
        double& u = parts[static_cast<size_t>(p)];
        u = own > 0.0 ? u * out.repeats_sd_of_mean / own
                      : (static_cast<BudgetPart>(p) == BudgetPart::kFit ? out.repeats_sd_of_mean : 0.0);
      }
    }
  }
  out.budget = MakeBudget(parts);
  return out;
}

}  // namespace dropfit::analysis
