// CSV halves of cli/results.h (the JSON halves are in results_json.cpp).
#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <sstream>
#include <stdexcept>

#include "cli/atomic_write.h"
#include "cli/results.h"

namespace dropfit::cli {

namespace {

std::string Optional(const std::optional<double>& v) { return v ? FormatNumber(*v) : std::string(); }

std::optional<double> ParseOptional(const std::string& text, const std::string& where) {
  if (text.empty()) return std::nullopt;
  double value = 0;
  auto [ptr, ec] = std::from_chars(text.data(), text.data() + text.size(), value);
  if (ec != std::errc() || ptr != text.data() + text.size()) {
    throw std::runtime_error(where + ": '" + text + "' is not a number");
  }
  return value;
}

std::vector<std::string> SplitComma(const std::string& line) {
  std::vector<std::string> out;
  std::string field;
  std::istringstream ss(line);
  while (std::getline(ss, field, ',')) out.push_back(field);
  if (!line.empty() && line.back() == ',') out.emplace_back();
  return out;
}

constexpr const char* kTrackHeader = "frame,t_s,u_px,v_px,x_m,y_m,quality";
constexpr const char* kSummaryHeader =
    "specimen,drop_height_m,clips,impact_speed_mps_mean,impact_speed_mps_sd,impact_speed_mps_mean_u,cor_mean,cor_"
    "sd,cor_mean_u,contact_duration_s_mean,contact_duration_s_sd,contact_duration_s_mean_u,max_deflection_m_mean,"
    "max_deflection_m_sd,max_deflection_m_mean_u,peak_force_n_mean,peak_force_n_sd,peak_force_n_mean_u,rebound_"
    "speed_mps_mean,rebound_speed_mps_sd,rebound_speed_mps_mean_u,energy_lost_j_mean,energy_lost_j_sd,energy_lost_"
    "j_mean_u,flags";

// A mean and its sd, both to the sd's second significant digit (docs/formats.md, "summary.csv");
// without an sd (one clip) or with sd 0 the mean as FormatNumber writes it.
std::string Rounded(double value, const std::optional<double>& sd) {
  if (!std::isfinite(value)) return {};
  if (!sd || !std::isfinite(*sd) || !(*sd > 0.0)) return FormatNumber(value);
  const int decimals = 1 - static_cast<int>(std::floor(std::log10(*sd)));
  if (decimals <= 0) {
    const double unit = std::pow(10.0, -decimals);
    return FormatNumber(std::round(value / unit) * unit);
  }
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.*f", std::min(decimals, 17), value);
  return buf;
}
std::string MeanAndSd(double mean, const std::optional<double>& sd) {
  return Rounded(mean, sd) + "," + (sd ? Rounded(*sd, sd) : std::string());
}
// The mean, the spread over repeats and the mean's standard uncertainty (empty when unknown).
std::string MeanSdU(double mean, const std::optional<double>& sd, const std::optional<double>& u) {
  return MeanAndSd(mean, sd) + "," + (u && std::isfinite(*u) ? Rounded(*u, u) : std::string());
}

// Quotes a free-text CSV field when it needs it ("Common Format and MIME Type for Comma-Separated
// Values (CSV) Files", RFC 4180).
std::string CsvText(const std::string& s) {
  if (s.find_first_of(",\"\n\r") == std::string::npos) return s;
  std::string out = "\"";
  for (char c : s) {
    if (c == '"') out += '"';
    out += c;
  }
  return out + "\"";
}

}  // namespace

std::string ToString(CurveKind kind) {
  switch (kind) {
    case CurveKind::kTrajectory:
      return "trajectory";
    case CurveKind::kResidual:
      return "residual";
    case CurveKind::kForceDeflection:
      return "force_deflection";
    case CurveKind::kForceDeflectionTrack:
      return "force_deflection_track";
    case CurveKind::kCorVsSpeed:
      return "cor_vs_speed";
    case CurveKind::kCorMeasured:
      return "cor_measured";
  }
  return "trajectory";
}

CurveKind CurveKindFromString(const std::string& text) {
  std::string valid;
  for (CurveKind k : {CurveKind::kTrajectory, CurveKind::kResidual, CurveKind::kForceDeflection,
                      CurveKind::kForceDeflectionTrack, CurveKind::kCorVsSpeed, CurveKind::kCorMeasured}) {
    if (ToString(k) == text) return k;
    valid += (valid.empty() ? "" : ", ") + ToString(k);
  }
  throw std::invalid_argument("unknown curve kind \"" + text + "\"; valid: " + valid);
}

std::string InfoValue(const ClipResult& r, const std::string& key) {
  for (const auto& [k, v] : r.info) {
    if (k == key) return v;
  }
  return {};
}

double ExtraValue(const ClipResult& r, const std::string& key) {
  for (const auto& [k, v] : r.extra) {
    if (k == key) return v;
  }
  return std::nan("");
}

void AddFlag(std::vector<std::string>& flags, const std::string& flag) {
  if (std::find(flags.begin(), flags.end(), flag) == flags.end()) flags.push_back(flag);
}

std::string FormatNumber(double value) {
  if (!std::isfinite(value)) return {};
  char buf[64];
  auto [ptr, ec] = std::to_chars(buf, buf + sizeof(buf), value);
  return ec == std::errc() ? std::string(buf, ptr) : std::string();
}

void WriteTrackCsv(const std::filesystem::path& path, const std::vector<TrackRow>& rows) {
  WriteFileAtomically(path, [&](std::ostream& out) {
    out << kTrackHeader << '\n';
    for (const TrackRow& r : rows) {
      out << r.frame << ',' << FormatNumber(r.t_s) << ',' << Optional(r.u_px) << ',' << Optional(r.v_px) << ','
          << Optional(r.x_m) << ',' << Optional(r.y_m) << ',' << FormatNumber(r.quality) << '\n';
    }
  });
}

std::vector<TrackRow> ReadTrackCsv(const std::filesystem::path& path) {
  std::ifstream in(path);
  if (!in) throw std::runtime_error(path.string() + ": cannot be read");
  std::string line;
  if (!std::getline(in, line) || line != kTrackHeader) {
    throw std::runtime_error(path.string() + ":1: header is not '" + std::string(kTrackHeader) + "'");
  }
  std::vector<TrackRow> rows;
  int line_no = 1;
  while (std::getline(in, line)) {
    ++line_no;
    if (line.empty()) continue;
    const std::string where = path.string() + ":" + std::to_string(line_no);
    const auto f = SplitComma(line);
    if (f.size() != 7) throw std::runtime_error(where + ": expected 7 fields, found " + std::to_string(f.size()));
    TrackRow r;
    const auto frame = ParseOptional(f[0], where);
    const auto t = ParseOptional(f[1], where);
    if (!frame || !t) throw std::runtime_error(where + ": frame and t_s are required");
    r.frame = static_cast<int>(*frame);
    r.t_s = *t;
    r.u_px = ParseOptional(f[2], where);
    r.v_px = ParseOptional(f[3], where);
    r.x_m = ParseOptional(f[4], where);
    r.y_m = ParseOptional(f[5], where);
    r.quality = ParseOptional(f[6], where).value_or(0.0);
    rows.push_back(r);
  }
  return rows;
}

BudgetRecord ToBudgetRecord(const std::string& figure, const analysis::FigureBudget& budget) {
  BudgetRecord r;
  r.figure = figure;
  r.sd = budget.sd;
  r.dominant = analysis::ToString(budget.dominant);
  for (int p = 0; p < analysis::kBudgetParts; ++p) {
    const auto part = static_cast<analysis::BudgetPart>(p);
    r.parts.emplace_back(analysis::ToString(part), budget.part(part));
  }
  return r;
}

std::optional<analysis::FigureBudget> ToFigureBudget(const BudgetRecord& record) {
  std::array<double, analysis::kBudgetParts> parts{};
  try {
    for (const auto& [name, value] : record.parts)
      parts[static_cast<size_t>(analysis::BudgetPartFromString(name))] = value;
  } catch (const std::invalid_argument&) {
    return std::nullopt;
  }
  return analysis::MakeBudget(parts);
}

void WriteSummaryCsv(const std::filesystem::path& path, const std::vector<SummaryGroup>& groups) {
  WriteFileAtomically(path, [&](std::ostream& out) {
    out << kSummaryHeader << '\n';
    for (const SummaryGroup& g : groups) {
      std::string flags;
      for (const std::string& f : g.flags) flags += (flags.empty() ? "" : ";") + f;
      out << CsvText(g.specimen) << ',' << FormatNumber(g.drop_height_m) << ',' << g.clips << ','
          << MeanSdU(g.impact_speed_mps_mean, g.impact_speed_mps_sd, g.MeanU("impact_speed_mps")) << ','
          << MeanSdU(g.cor_mean, g.cor_sd, g.MeanU("cor")) << ','
          << MeanSdU(g.contact_duration_s_mean, g.contact_duration_s_sd, g.MeanU("contact_duration_s")) << ','
          << MeanSdU(g.max_deflection_m_mean, g.max_deflection_m_sd, g.MeanU("max_deflection_m")) << ','
          << MeanSdU(g.peak_force_n_mean, g.peak_force_n_sd, g.MeanU("peak_force_n")) << ','
          << MeanSdU(g.rebound_speed_mps_mean, g.rebound_speed_mps_sd, g.MeanU("rebound_speed_mps")) << ','
          << MeanSdU(g.energy_lost_j_mean, g.energy_lost_j_sd, g.MeanU("energy_lost_j")) << ',' << CsvText(flags)
          << '\n';
    }
  });
}

void WriteLawsCsv(const std::filesystem::path& path, const std::vector<SpecimenSummary>& specimens) {
  WriteFileAtomically(path, [&](std::ostream& out) {
    out << "specimen,law,parameter,value,sd,bic,delta_bic,best,holdout_cor_error_max,holdout_duration_error_max_s\n";
    for (const SpecimenSummary& sp : specimens) {
      double best_bic = std::nan("");
      for (const JointFitRecord& jf : sp.joint_fits) {
        if (sp.best_law && jf.fit.law == *sp.best_law) best_bic = jf.fit.bic;
      }
      for (const JointFitRecord& jf : sp.joint_fits) {
        // The largest |error| over the held-out heights; NaN when none is known.
        const auto largest = [&jf](double HoldoutRecord::*error) {
          double m = std::nan("");
          for (const HoldoutRecord& h : jf.holdout) {
            if (std::isfinite(h.*error)) m = std::isnan(m) ? std::abs(h.*error) : std::max(m, std::abs(h.*error));
          }
          return m;
        };
        const double cor_max = largest(&HoldoutRecord::cor_error);
        const double duration_max = largest(&HoldoutRecord::contact_duration_error_s);
        const bool best = sp.best_law && jf.fit.law == *sp.best_law;
        for (size_t i = 0; i < jf.fit.params.size(); ++i) {
          const auto& [name, value] = jf.fit.params[i];
          const double sd = i < jf.fit.param_sd.size() ? jf.fit.param_sd[i].second : std::nan("");
          out << CsvText(sp.specimen) << ',' << jf.fit.law << ',' << name << ',' << Rounded(value, sd) << ','
              << Rounded(sd, sd) << ',' << FormatNumber(jf.fit.bic) << ',' << FormatNumber(jf.fit.bic - best_bic) << ','
              << (best ? 1 : 0) << ',' << FormatNumber(cor_max) << ',' << FormatNumber(duration_max) << '\n';
        }
      }
    }
  });
}

}  // namespace dropfit::cli
