#pragma once
// Savitzky-Golay smoothing and differentiation of evenly sampled data that may have gaps.
//
// A Savitzky-Golay filter fits, around each sample, a polynomial of `order` by least squares
// to the `window` samples centred on it and reads the value or a derivative of that
// polynomial at the centre (A. Savitzky, M. J. E. Golay, "Smoothing and differentiation of
// data by simplified least squares procedures", Anal. Chem. 36 (1964) 1627-1639; the
// convolution tables there; docs/methods.md §6). On a full window this is a fixed
// convolution; e.g. the 5-point quadratic smoother is (-3, 12, 17, 12, -3)/35 and the 5-point
// quadratic first derivative (-2, -1, 0, 1, 2)/10 per sample spacing.
//
// Gaps: where some samples of a window are missing (valid = false), the same local
// polynomial is fitted to the samples present (the least-squares definition, not the table),
// so no value is invented for the fit: a result exists at sample i when the window holds at
// least order + 2 valid samples, at least one of them at or before i and one at or after i
// (no extrapolation). Near the ends of the series the window is not shifted: the result
// there needs the same support rule.

#include <optional>
#include <string>
#include <vector>

namespace dropfit::analysis {

struct SavgolOptions {
  int window = 7;  // samples in the window; odd, >= order + 2, <= 201
  int order = 2;   // polynomial order, 1..6
};
// Returns a message naming the offending field and its valid range, or nothing.
std::optional<std::string> ValidateSavgolOptions(const SavgolOptions& options);

// The convolution weights w[j], j = 0..window-1 (sample offset j - window/2), that give the
// `derivative`-th derivative at the window centre for unit sample spacing:
// result = sum_j w[j] y[i + j - window/2] (divide by spacing^derivative for other spacings).
// Throws std::invalid_argument for invalid options or derivative outside [0, order].
std::vector<double> SavgolCoefficients(const SavgolOptions& options, int derivative);

struct SmoothedSeries {
  std::vector<double> value;  // smoothed value [unit of the input]
  std::vector<double> rate;   // first derivative [unit / s]
  std::vector<double> accel;  // second derivative [unit / s^2]; 0 when order < 2
  std::vector<bool> valid;    // false where the support rule above fails
  // Standard deviation of `accel` for white input noise of sd 1 [1 / s^2]: constant on full
  // windows, larger near the ends and gaps (fewer samples); 0 when order < 2.
  std::vector<double> accel_noise_gain;
};

// Filters `values` sampled every `spacing_s` seconds. Throws std::invalid_argument for
// invalid options, spacing_s <= 0 or sizes that differ.
SmoothedSeries SavgolFilter(const std::vector<double>& values, const std::vector<bool>& valid, double spacing_s,
                            const SavgolOptions& options);

// Standard deviation of the filtered `derivative` for white noise of sd 1 on a full window,
// for unit spacing: the norm of the weights (sum of w^2)^(1/2).
double SavgolNoiseGain(const SavgolOptions& options, int derivative);

}  // namespace dropfit::analysis
