#include "cli/summary_build.h"

#include <algorithm>
#include <cmath>
#include <map>
#include <string>

#include "analysis/uncertainty_budget.h"

namespace dropfit::cli {

namespace {

struct Stats {
  std::vector<double> values;
  void Add(double v) {
    if (std::isfinite(v)) values.push_back(v);
  }
  double Mean() const {
    if (values.empty()) return std::nan("");
    double s = 0;
    for (double v : values) s += v;
    return s / static_cast<double>(values.size());
  }
  std::optional<double> Sd() const {
    if (values.size() < 2) return std::nullopt;
    const double m = Mean();
    double s = 0;
    for (double v : values) s += (v - m) * (v - m);
    return std::sqrt(s / static_cast<double>(values.size() - 1));
  }
};

constexpr double kHeightMatchM = 1e-9;

// The figures whose means carry an uncertainty, in summary.csv's order.
const char* const kMeanFigures[] = {"impact_speed_mps", "cor",          "contact_duration_s",
                                    "max_deflection_m", "peak_force_n", "rebound_speed_mps",
                                    "energy_lost_j"};

// One figure's values and budgets over a group's clips; `complete` false once a clip had none.
struct BudgetStats {
  std::vector<double> values;
  std::vector<analysis::FigureBudget> budgets;
  bool complete = true;
};

std::optional<analysis::FigureBudget> FigureBudgetOf(const ImpactRecord& im, const std::string& figure) {
  for (const BudgetRecord& b : im.budget)
    if (b.figure == figure) return ToFigureBudget(b);
  return std::nullopt;
}

double FigureValue(const ImpactRecord& im, const std::string& figure) {
  if (figure == "impact_speed_mps") return im.impact_speed_mps;
  if (figure == "cor") return im.cor;
  if (figure == "contact_duration_s") return im.contact_duration_s;
  if (figure == "max_deflection_m") return im.max_deflection_m;
  if (figure == "peak_force_n") return im.peak_force_n;
  if (figure == "rebound_speed_mps") return im.rebound_speed_mps;
  for (const auto& [name, value] : im.extra)
    if (name == figure) return value;
  return std::nan("");
}

}  // namespace

std::vector<SummaryGroup> BuildSummaryGroups(const std::vector<AnalysedClip>& clips) {
  struct Acc {
    std::string specimen;
    double height = 0;
    int clips = 0;
    Stats speed, cor, duration, deflection, force, rebound, energy;
    std::vector<std::string> flags;
    std::map<std::string, BudgetStats> budgets;
  };
  std::vector<std::string> specimen_order;
  std::vector<Acc> accs;
  for (const AnalysedClip& c : clips) {
    if (!c.row || !c.result) continue;
    if (std::find(specimen_order.begin(), specimen_order.end(), c.row->specimen) == specimen_order.end()) {
      specimen_order.push_back(c.row->specimen);
    }
    auto it = std::find_if(accs.begin(), accs.end(), [&](const Acc& a) {
      return a.specimen == c.row->specimen && std::abs(a.height - c.row->drop_height_m) <= kHeightMatchM;
    });
    if (it == accs.end()) {
      accs.push_back({c.row->specimen, c.row->drop_height_m, 0, {}, {}, {}, {}, {}, {}, {}, {}, {}});
      it = std::prev(accs.end());
    }
    for (const std::string& f : c.result->flags) AddFlag(it->flags, f);
    if (c.failed) {
      AddFlag(it->flags, kFlagFailed);
      continue;
    }
    auto first = std::find_if(c.result->impacts.begin(), c.result->impacts.end(),
                              [](const ImpactRecord& im) { return im.complete; });
    if (first == c.result->impacts.end()) {
      AddFlag(it->flags, kFlagIncomplete);
      continue;
    }
    if (!first->flags.empty()) {
      for (const std::string& f : first->flags) AddFlag(it->flags, f);
      continue;
    }
    ++it->clips;
    it->speed.Add(first->impact_speed_mps);
    it->cor.Add(first->cor);
    it->duration.Add(first->contact_duration_s);
    it->deflection.Add(first->max_deflection_m);
    it->force.Add(first->peak_force_n);
    it->rebound.Add(first->rebound_speed_mps);
    for (const auto& [name, value] : first->extra) {
      if (name == "energy_lost_j") it->energy.Add(value);
    }
    for (const char* figure : kMeanFigures) {
      const double v = FigureValue(*first, figure);
      if (!std::isfinite(v)) continue;
      BudgetStats& b = it->budgets[figure];
      const auto budget = FigureBudgetOf(*first, figure);
      if (!budget) {
        b.complete = false;
        continue;
      }
      b.values.push_back(v);
      b.budgets.push_back(*budget);
    }
  }
  std::stable_sort(accs.begin(), accs.end(), [&](const Acc& a, const Acc& b) {
    const auto ia = std::find(specimen_order.begin(), specimen_order.end(), a.specimen);
    const auto ib = std::find(specimen_order.begin(), specimen_order.end(), b.specimen);
    return ia != ib ? ia < ib : a.height < b.height;
  });
  std::vector<SummaryGroup> groups;
  for (const Acc& a : accs) {
    SummaryGroup g;
    g.specimen = a.specimen;
    g.drop_height_m = a.height;
    g.clips = a.clips;
    g.impact_speed_mps_mean = a.speed.Mean();
    g.impact_speed_mps_sd = a.speed.Sd();
    g.cor_mean = a.cor.Mean();
    g.cor_sd = a.cor.Sd();
    g.contact_duration_s_mean = a.duration.Mean();
    g.contact_duration_s_sd = a.duration.Sd();
    g.max_deflection_m_mean = a.deflection.Mean();
    g.max_deflection_m_sd = a.deflection.Sd();
    g.peak_force_n_mean = a.force.Mean();
    g.peak_force_n_sd = a.force.Sd();
    g.rebound_speed_mps_mean = a.rebound.Mean();
    g.rebound_speed_mps_sd = a.rebound.Sd();
    g.energy_lost_j_mean = a.energy.Mean();
    g.energy_lost_j_sd = a.energy.Sd();
    g.flags = a.flags;
    for (const char* figure : kMeanFigures) {
      const auto found = a.budgets.find(figure);
      if (found == a.budgets.end() || !found->second.complete || found->second.values.empty()) continue;
      const analysis::MeanBudget mean = analysis::MeanOf(found->second.values, found->second.budgets);
      g.mean_budget.push_back(ToBudgetRecord(figure, mean.budget));
    }
    groups.push_back(g);
  }
  return groups;
}

}  // namespace dropfit::cli
