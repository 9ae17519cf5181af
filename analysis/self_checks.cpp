#include "analysis/self_checks.h"

#include <cmath>
#include <iomanip>
#include <limits>
#include <numbers>
#include <sstream>
#include <stdexcept>

namespace dropfit::analysis {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kRadToDeg = 180.0 / std::numbers::pi;

// "2x" when the factor is near a whole number (within 3 %), else "1.37x".
std::string FactorText(double factor) {
  std::ostringstream out;
  const double whole = std::round(factor);
  if (whole >= 2.0 && std::abs(factor / whole - 1.0) < 0.03)
    out << static_cast<int>(whole) << "x";
  else
    out << std::fixed << std::setprecision(3) << factor << "x";
  return out.str();
}

// A standard uncertainty with two significant digits.
std::string SdText(double sd) {
  std::ostringstream out;
  out << std::setprecision(2) << sd;
  return out.str();
}

}  // namespace

std::optional<std::string> ValidateSelfCheckOptions(const SelfCheckOptions& o) {
  std::ostringstream msg;
  if (!(o.gravity_mps2 > 0.0 && o.gravity_mps2 <= 100.0))
    msg << "gravity_mps2 = " << o.gravity_mps2 << " is outside (0, 100] m/s^2";
  else if (o.capture_fps && !(*o.capture_fps > 0.0 && std::isfinite(*o.capture_fps)))
    msg << "capture_fps = " << *o.capture_fps << " must be finite and > 0";
  else if (o.drop_height_m && !(*o.drop_height_m > 0.0 && std::isfinite(*o.drop_height_m)))
    msg << "drop_height_m = " << *o.drop_height_m << " must be finite and > 0";
  else if (!(o.gravity_tolerance >= 0.0 && o.gravity_tolerance <= 0.5))
    msg << "gravity_tolerance = " << o.gravity_tolerance << " is outside [0, 0.5]";
  else if (!(o.tilt_tolerance_deg >= 0.0 && o.tilt_tolerance_deg <= 45.0))
    msg << "tilt_tolerance_deg = " << o.tilt_tolerance_deg << " is outside [0, 45]";
  else if (!(o.impact_speed_tolerance >= 0.0 && o.impact_speed_tolerance <= 0.5))
    msg << "impact_speed_tolerance = " << o.impact_speed_tolerance << " is outside [0, 0.5]";
  else
    return std::nullopt;
  return msg.str();
}

SelfCheckReport RunSelfChecks(const Segmentation& seg, const std::vector<ImpactFigures>& impacts,
                              const SelfCheckOptions& options) {
  if (auto m = ValidateSelfCheckOptions(options)) throw std::invalid_argument("RunSelfChecks: " + *m);
  SelfCheckReport report;
  const double g = options.gravity_mps2;

  // 1 and 2: inverse-variance means of the flights' accelerations.
  double wy = 0.0, sy = 0.0, wx = 0.0, sx = 0.0;
  for (const FlightPhase& f : seg.flights) {
    const double var_y = 4.0 * f.y_fit.covariance(2, 2);
    const double var_x = 4.0 * f.x_fit.covariance(2, 2);
    if (!(var_y > 0.0) || !(var_x > 0.0)) continue;
    wy += 1.0 / var_y;
    sy += 2.0 * f.y_fit.coef(2) / var_y;
    wx += 1.0 / var_x;
    sx += 2.0 * f.x_fit.coef(2) / var_x;
    ++report.gravity.flights_used;
  }
  GravityCheckResult& gc = report.gravity;
  gc.expected_mps2 = g;
  gc.flight_accel_mps2 = {kNaN, kNaN};
  if (report.gravity.flights_used > 0) {
    const double ay = sy / wy, ay_sd = 1.0 / std::sqrt(wy);
    const double ax = sx / wx, ax_sd = 1.0 / std::sqrt(wx);
    gc.flight_accel_mps2 = {-ay, ay_sd};
    gc.ratio = -ay / g;
    gc.rate_factor = gc.ratio > 0.0 ? std::sqrt(1.0 / gc.ratio) : kNaN;
    gc.scale_factor = gc.ratio > 0.0 ? 1.0 / gc.ratio : kNaN;
    gc.flagged = std::abs(gc.ratio - 1.0) > std::max(options.gravity_tolerance, 3.0 * ay_sd / g);
    if (gc.flagged) {
      std::ostringstream msg;
      msg << std::fixed << std::setprecision(3) << "gravity check: the flight acceleration is " << -ay << " +- "
          << SdText(ay_sd) << " m/s^2, " << gc.ratio << " x the expected " << std::setprecision(5) << g << " m/s^2. ";
      if (gc.rate_factor > 1.0)
        msg << "The capture rate looks " << FactorText(gc.rate_factor) << " too low";
      else
        msg << "The capture rate looks " << FactorText(1.0 / gc.rate_factor) << " too high";
      if (options.capture_fps)
        msg << std::setprecision(0) << " (" << *options.capture_fps << " frames/s used; "
            << *options.capture_fps * gc.rate_factor << " would fit)";
      msg << std::setprecision(3) << "; or the scale (metres per pixel) is off by a factor " << gc.scale_factor
          << ": a wrong square size at calibration";
      const double offset = 1.0 - 1.0 / gc.ratio;  // (D_b - D_m) / D_b with r = D_b / D_m
      if (std::abs(offset) < 0.2)
        msg << std::setprecision(1) << ", or the marker " << std::abs(offset) * 100.0 << " % of the camera distance "
            << (offset > 0.0 ? "nearer to the camera than" : "further from the camera than") << " the board's plane";
      msg << ". Check --fps and the rig, or give the local gravity with --gravity";
      report.warnings.push_back(msg.str());
    }
    TiltCheckResult tilt;
    const double norm2 = ax * ax + ay * ay;
    const double angle = std::atan2(ax, -ay) * kRadToDeg;
    const double angle_sd = std::sqrt(ay * ay * ax_sd * ax_sd + ax * ax * ay_sd * ay_sd) / norm2 * kRadToDeg;
    tilt.tilt_deg = {angle, angle_sd};
    tilt.flagged = std::abs(angle) > std::max(options.tilt_tolerance_deg, 3.0 * angle_sd);
    if (tilt.flagged) {
      std::ostringstream msg;
      msg << std::fixed << std::setprecision(2) << "tilt check: gravity is " << std::abs(angle) << " +- "
          << SdText(angle_sd) << " degrees off the rig's vertical (towards " << (angle > 0.0 ? "+x" : "-x")
          << "): the camera is rolled against the board's up direction, or the board is not vertical; "
             "heights and speeds are then measured along a tilted axis (speeds low by "
          << std::setprecision(3) << (1.0 - std::cos(angle / kRadToDeg)) * 100.0 << " %)";
      report.warnings.push_back(msg.str());
    }
    report.tilt = tilt;
  }

  // 3: the first impact against the nominal height.
  if (options.drop_height_m && !impacts.empty() && std::isfinite(impacts.front().impact_speed_mps.value)) {
    DropHeightCheckResult dh;
    dh.nominal_height_m = *options.drop_height_m;
    dh.impact_speed_mps = impacts.front().impact_speed_mps;
    dh.expected_speed_mps = std::sqrt(2.0 * g * dh.nominal_height_m);
    dh.implied_height_m = dh.impact_speed_mps.value * dh.impact_speed_mps.value / (2.0 * g);
    const double rel = dh.impact_speed_mps.value / dh.expected_speed_mps - 1.0;
    dh.flagged =
        std::abs(rel) > std::max(options.impact_speed_tolerance, 3.0 * dh.impact_speed_mps.sd / dh.expected_speed_mps);
    if (dh.flagged) {
      std::ostringstream msg;
      msg << std::fixed << std::setprecision(3) << "drop-height check: the first impact speed "
          << dh.impact_speed_mps.value << " m/s is " << std::setprecision(1) << std::abs(rel) * 100.0 << " % "
          << (rel > 0 ? "above" : "below") << std::setprecision(3) << " sqrt(2 g h) = " << dh.expected_speed_mps
          << " m/s for the nominal " << dh.nominal_height_m << " m; it corresponds to a fall of " << dh.implied_height_m
          << " m. "
          << (rel > 0 ? "Check the nominal height, or a push at release"
                      : "Check the nominal height, or a release that drags (or a first contact before the clip)")
          << (gc.flagged ? "; the gravity check's rate or scale error changes this speed too" : "");
      report.warnings.push_back(msg.str());
    }
    report.drop_height = dh;
  }
  return report;
}

}  // namespace dropfit::analysis
