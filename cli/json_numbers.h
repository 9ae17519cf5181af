#pragma once
// Numbers in the JSON files dropfit writes (docs/formats.md): finite numbers only (null for
// NaN and infinities), and a whole number as an integer ("1000", not "1000.0"; exact below
// 2^53), so that counts, rates in frames/s and pixel sizes read as what they are.
#include <nlohmann/json.hpp>

#include <cmath>
#include <cstdint>

namespace dropfit::cli {

// The largest magnitude below which every whole double is exactly an int64 (2^53).
constexpr double kLargestExactWholeDouble = 9007199254740992.0;

template <typename Json>
Json JsonNumber(double v) {
  if (!std::isfinite(v)) return Json(nullptr);
  if (v == std::trunc(v) && std::abs(v) < kLargestExactWholeDouble) return Json(static_cast<std::int64_t>(v));
  return Json(v);
}

// Every floating-point number of `j` (recursively) that is whole written as an integer.
template <typename Json>
void WholeNumbersAsIntegers(Json& j) {
  if (j.is_number_float()) {
    j = JsonNumber<Json>(j.template get<double>());
  } else if (j.is_structured()) {
    for (auto& element : j) WholeNumbersAsIntegers(element);
  }
}

}  // namespace dropfit::cli
