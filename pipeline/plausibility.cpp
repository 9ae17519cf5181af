#include "pipeline/plausibility.h"

#include <cmath>
#include <cstdio>
#include <stdexcept>

namespace dropfit::pipeline {

namespace {

// A rate rounded to 3 significant digits, as a user would type it.
std::string RateText(double fps) {
  char buf[48];
  const double digits = std::floor(std::log10(std::abs(fps)));
  const double unit = std::pow(10.0, digits - 2.0);
  std::snprintf(buf, sizeof buf, "%.0f", std::round(fps / unit) * unit);
  return buf;
}

std::string Fixed(double value, int decimals) {
  char buf[48];
  std::snprintf(buf, sizeof buf, "%.*f", decimals, value);
  return buf;
}

// Where the rate came from, in the words of its setting.
std::string SourceText(CaptureRateSource source) {
  switch (source) {
    case CaptureRateSource::kOption:
      return "given with --fps";
    case CaptureRateSource::kManifest:
      return "the manifest's capture_fps";
    case CaptureRateSource::kRig:
      return "the rig's capture_fps (dropfit calibrate --fps)";
    case CaptureRateSource::kContainer:
      return "the clip's container, none given";
  }
  return "unknown";
}

}  // namespace

std::optional<std::string> ValidatePlausibilityOptions(const PlausibilityOptions& o) {
  if (!(o.tolerance > 0.0 && o.tolerance < 1.0)) return "tolerance = " + Fixed(o.tolerance, 6) + " is outside (0, 1)";
  if (!(o.sigmas >= 0.0 && o.sigmas <= 100.0)) return "sigmas = " + Fixed(o.sigmas, 3) + " is outside [0, 100]";
  return std::nullopt;
}

std::optional<std::string> GravityGateProblem(const analysis::GravityCheckResult& gravity, const CaptureRate& rate,
                                              const PlausibilityOptions& options) {
  if (auto problem = ValidatePlausibilityOptions(options))
    throw std::invalid_argument("GravityGateProblem: " + *problem);
  const double a = gravity.flight_accel_mps2.value, a_sd = gravity.flight_accel_mps2.sd;
  const double g = gravity.expected_mps2;
  if (gravity.flights_used == 0 || !std::isfinite(a) || !(g > 0.0)) return std::nullopt;
  const double off = std::abs(a / g - 1.0);
  const double sd = std::isfinite(a_sd) ? a_sd / g : 0.0;
  if (!(off > options.tolerance && off > options.sigmas * sd)) return std::nullopt;

  std::string m = "the free flights fall at " + Fixed(a, 2) + " m/s^2, " + Fixed(a / g, 3) + " x the expected " +
                  Fixed(g, 5) + " m/s^2 (more than " + Fixed(100.0 * options.tolerance, 0) +
                  " % off, after the gravity ruler's correction): ";
  if (!(a > 0.0)) {
    m += "the flights do not fall: the rig's vertical is upside down or the track is not a drop; check the rig "
         "(dropfit calibrate) and the clip";
  } else {
    const double rate_factor = std::sqrt(g / a);  // true rate / rate used, if the rate is the cause
    const std::string fit = RateText(rate.fps * rate_factor);
    const double shown = rate_factor >= 1.0 ? rate_factor : 1.0 / rate_factor;
    m += "the capture rate looks " + Fixed(shown, 2) + "x too " + (rate_factor >= 1.0 ? "low" : "high") + ": " +
         RateText(rate.fps) + " frames/s was used (" + SourceText(rate.source) + "), " + fit +
         " frames/s would fit; give the camera's true rate: --fps " + fit + ", or capture_fps " + fit +
         " in the manifest. If the rate is right, lengths are read at " + Fixed(a / g, 3) +
         " x their true size: check the rig's square size (dropfit calibrate --square, in metres) and the marker's "
         "plane "
         "(--marker-offset)";
  }
  m += ". The contact laws were not fitted; the clip is left out of the means and the joint fits";
  return m;
}

}  // namespace dropfit::pipeline
