#include "pipeline/uncertainty.h"

#include <algorithm>
#include <array>
#include <cmath>
#include <optional>

#include "analysis/geometry.h"
#include "calib/rig_uncertainty.h"

namespace dropfit::pipeline {

namespace {

using analysis::BudgetOf;
using analysis::Dimension;
using analysis::Estimate;

constexpr Dimension kSpeed{1.0, -1.0};
constexpr Dimension kRatio{0.0, 0.0};
constexpr Dimension kLength{1.0, 0.0};
constexpr Dimension kDuration{0.0, 1.0};
constexpr Dimension kForce{1.0, -2.0};
constexpr Dimension kEnergy{2.0, -2.0};

// A figure read from the flights: its fit part is what the onset height's share leaves.
void AddFlightFigure(std::vector<NamedBudget>& out, const char* name, const Estimate& e, Dimension dim,
                     const analysis::ScaleUncertainty& scale) {
  if (!std::isfinite(e.value)) return;
  const double onset = std::isfinite(e.onset_sd) ? std::min(e.onset_sd, e.sd) : 0.0;
  const double fit = std::sqrt(std::max(0.0, e.sd * e.sd - onset * onset));
  out.push_back({name, BudgetOf(dim, e.value, std::isfinite(e.sd) ? fit : e.sd, onset, scale)});
}

// A force m (a + g): the scales act on m a, gravity on both.
void AddForce(std::vector<NamedBudget>& out, const char* name, double value, double sd, double mg,
              const analysis::ScaleUncertainty& scale) {
  if (!std::isfinite(value)) return;
  out.push_back({name, BudgetOf(kForce, value - mg, sd, 0.0, scale, mg)});
}

// The rig mapping's part of the COR from the apex heights (ImpactBudgets); nothing when the bounce
// lacks a flight or the rig cannot say.
std::optional<double> ApexRatioMappingSd(const calib::Rig& rig, const analysis::Segmentation& seg, int bounce) {
  const analysis::Bounce& b = seg.bounces.at(static_cast<size_t>(bounce));
  if (!b.flight_before || !b.flight_after || !std::isfinite(seg.onset_height_m)) return std::nullopt;
  const analysis::FlightPhase& fall = seg.flights[static_cast<size_t>(*b.flight_before)];
  const analysis::FlightPhase& rise = seg.flights[static_cast<size_t>(*b.flight_after)];
  const auto apex_d = analysis::ParabolaApex(fall.y_fit), apex_r = analysis::ParabolaApex(rise.y_fit);
  if (!apex_d || !apex_r) return std::nullopt;
  try {
    const cv::Point2d pd = calib::ImageFromPlane(rig, {fall.x_fit.Value(apex_d->t_s), apex_d->height_m});
    const cv::Point2d pr = calib::ImageFromPlane(rig, {rise.x_fit.Value(apex_r->t_s), apex_r->height_m});
    const cv::Point2d po = calib::ImageFromPlane(rig, {fall.x_fit.Value(b.t_contact_s), seg.onset_height_m});
    const double sd = calib::MappedSd(rig, [&](const calib::Rig& r) {
      const double o = calib::PlaneFromImage(r, po).y;
      return std::sqrt((calib::PlaneFromImage(r, pr).y - o) / (calib::PlaneFromImage(r, pd).y - o));
    });
    if (std::isfinite(sd)) return sd;
  } catch (const std::exception&) {
  }
  return std::nullopt;
}

}  // namespace

ClipScaleUncertainty ScaleUncertaintyOf(const ClipRequest& request, const calib::Rig& rig, const ClipMeasurement& m) {
  ClipScaleUncertainty out;
  analysis::ScaleUncertainty& s = out.scale;
  // The rig's scale where the hub meets the floor (its onset height, in the middle of its path).
  if (rig.uncertainty) {
    try {
      double x = 0.0;
      int n = 0;
      for (size_t i = 0; i < m.series.valid.size(); ++i) {
        if (!m.series.valid[i]) continue;
        x += m.series.x_m[i];
        ++n;
      }
      const double h = m.kinematics.segmentation.onset_height_m;
      if (n > 0 && std::isfinite(h)) {
        const cv::Point2d px = calib::ImageFromPlane(rig, cv::Point2d(x / n, h));
        s.rig_scale_rel = calib::ScaleRelSdAt(rig, px);
      } else {
        s.rig_scale_rel = rig.uncertainty->scale_rel_sd_centre;
      }
      if (!std::isfinite(s.rig_scale_rel)) s.rig_scale_rel = rig.uncertainty->scale_rel_sd_centre;
    } catch (const std::exception&) {
      s.rig_scale_rel = rig.uncertainty->scale_rel_sd_centre;
    }
    if (!std::isfinite(s.rig_scale_rel) || s.rig_scale_rel < 0.0) s.rig_scale_rel = 0.0;
  } else {
    out.notes.push_back(
        "the rig file holds no uncertainty (a rig written by `dropfit render`, or one calibrated by an older "
        "version): the rig's scale is left out of the figures' uncertainties; calibrate again to include it");
  }
  // The marker's plane, from the gravity ruler's estimate.
  const bool ruler_applied = m.marker_offset.source == MarkerOffsetSource::kGravity;
  if (m.gravity_offset && !m.gravity_offset->failure && m.camera_distance_m &&
      *m.camera_distance_m > m.marker_offset.offset_m) {
    const double lever = *m.camera_distance_m - m.marker_offset.offset_m;
    const analysis::MarkerOffsetEstimate& e = *m.gravity_offset;
    const double apart = ruler_applied ? 0.0 : e.offset_m - m.marker_offset.offset_m;
    s.marker_plane_rel = std::hypot(apart, e.sd_m) / lever;
    s.gravity_ruler = ruler_applied;
  } else {
    out.notes.push_back(
        "the gravity ruler made no estimate of the marker's plane: its offset is not in the figures' uncertainties");
  }
  if (!std::isfinite(s.marker_plane_rel)) s.marker_plane_rel = 0.0;
  // The frame clock (a rectangular half-width, GUM 4.3.7) and the local gravity.
  s.capture_rate_rel = std::max(0.0, request.capture_fps_tolerance_ppm) * 1e-6 / std::sqrt(3.0);
  const double g = m.conditions.gravity_mps2;
  const double g_sd =
      request.gravity_sd_mps2.value_or(request.gravity_mps2 ? kGivenGravitySdMps2 : kStandardGravitySdMps2);
  s.gravity_rel = g > 0.0 && std::isfinite(g_sd) ? std::abs(g_sd) / g : 0.0;
  return out;
}

std::vector<std::vector<NamedBudget>> ImpactBudgets(const ClipMeasurement& m, const analysis::ScaleUncertainty& scale,
                                                    const calib::Rig* rig) {
  std::vector<std::vector<NamedBudget>> out;
  const double mg = m.conditions.mass_kg * m.conditions.gravity_mps2;
  const analysis::LawFitResult* best = nullptr;
  if (m.laws && m.laws->choice.best && !m.laws->choice.no_law_fits)
    best = &m.laws->fits[static_cast<size_t>(*m.laws->choice.best)];
  for (const analysis::ImpactFigures& f : m.kinematics.impacts) {
    std::vector<NamedBudget> b;
    AddFlightFigure(b, "impact_speed_mps", f.impact_speed_mps, kSpeed, scale);
    AddFlightFigure(b, "rebound_speed_mps", f.rebound_speed_mps, kSpeed, scale);
    AddFlightFigure(b, "cor", f.cor, kRatio, scale);
    AddFlightFigure(b, "cor_from_apex", f.cor_from_apex, kRatio, scale);
    if (rig && rig->uncertainty && !b.empty() && b.back().figure == "cor_from_apex") {
      if (auto u = ApexRatioMappingSd(*rig, m.kinematics.segmentation, f.bounce_index)) {
        std::array<double, analysis::kBudgetParts> parts = b.back().budget.parts;
        parts[static_cast<size_t>(analysis::BudgetPart::kRigScale)] = *u;
        b.back().budget = analysis::MakeBudget(parts);
      }
    }
    AddFlightFigure(b, "energy_lost_j", f.energy_lost_j, kEnergy, scale);
    AddFlightFigure(b, "max_deflection_m", f.max_deflection_m, kLength, scale);
    AddFlightFigure(b, "drop_height_above_onset_m", f.drop_height_above_onset_m, kLength, scale);
    AddFlightFigure(b, "rebound_height_above_onset_m", f.rebound_height_above_onset_m, kLength, scale);
    AddFlightFigure(b, "contact_duration_track_s", f.contact_duration_track_s, kDuration, scale);
    AddForce(b, "peak_force_track_n", f.peak_force_track_n.value, f.peak_force_track_n.sd, mg, scale);
    const analysis::BounceFitFigures* law = nullptr;
    if (best) {
      for (const analysis::BounceFitFigures& lf : best->figures)
        if (lf.clip_index == 0 && lf.bounce_index == f.bounce_index) law = &lf;
    }
    if (law) {
      if (std::isfinite(law->contact_duration_s))
        b.push_back({"contact_duration_s",
                     BudgetOf(kDuration, law->contact_duration_s, law->contact_duration_sd_s, 0.0, scale)});
      AddForce(b, "peak_force_n", law->peak_force_n, law->peak_force_sd_n, mg, scale);
    } else {
      AddFlightFigure(b, "contact_duration_s", f.contact_duration_track_s, kDuration, scale);
      AddForce(b, "peak_force_n", f.peak_force_track_n.value, f.peak_force_track_n.sd, mg, scale);
    }
    out.push_back(std::move(b));
  }
  return out;
}

std::vector<NamedBudget> ParameterBudgets(const analysis::LawFitResult& fit, const analysis::ScaleUncertainty& scale,
                                          const analysis::DropConditions& conditions) {
  std::vector<NamedBudget> out;
  if (fit.failure) return out;
  double n_exp = 1.0;
  for (size_t i = 0; i < fit.param_names.size() && i < fit.params.size(); ++i)
    if (fit.param_names[i] == "n") n_exp = fit.params[i];
  // The volume's local exponent p = d ln V / d ln delta at the largest fitted deflection.
  double volume_exponent = 2.0;
  if (fit.law == analysis::LawId::kVolumetric) {
    double delta = 0.0;
    for (const analysis::BounceFitFigures& f : fit.figures) delta = std::max(delta, f.max_deflection_m);
    if (delta > 0.0) {
      const double v1 = analysis::InterpenetrationVolume(conditions.tread, 0.99 * delta);
      const double v2 = analysis::InterpenetrationVolume(conditions.tread, 1.01 * delta);
      if (v1 > 0.0 && v2 > v1) volume_exponent = std::log(v2 / v1) / std::log(1.01 / 0.99);
    }
  }
  for (size_t i = 0; i < fit.param_names.size() && i < fit.params.size(); ++i) {
    const auto dim = analysis::ParameterDimension(fit.param_names[i], n_exp, volume_exponent);
    if (!dim) continue;
    const double sd = i < fit.param_sd.size() ? fit.param_sd[i] : std::nan("");
    out.push_back({fit.param_names[i], BudgetOf(*dim, fit.params[i], sd, 0.0, scale)});
  }
  return out;
}

analysis::ScaleUncertainty PooledScaleUncertainty(const std::vector<analysis::ScaleUncertainty>& clips) {
  analysis::ScaleUncertainty out;
  if (clips.empty()) return out;
  const double n = static_cast<double>(clips.size());
  double plane_sq = 0.0;
  out.gravity_ruler = true;
  for (const analysis::ScaleUncertainty& c : clips) {
    out.rig_scale_rel += c.rig_scale_rel / n;
    out.capture_rate_rel += c.capture_rate_rel / n;
    out.gravity_rel += c.gravity_rel / n;
    plane_sq += c.marker_plane_rel * c.marker_plane_rel;
    out.gravity_ruler = out.gravity_ruler && c.gravity_ruler;
  }
  out.marker_plane_rel = std::sqrt(plane_sq / n) / std::sqrt(n);
  return out;
}

}  // namespace dropfit::pipeline
