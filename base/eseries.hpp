#pragma once
// IEC 60063 preferred-number series E12, E24 and E96, and the nearest standard values.
#include <span>
#include <string_view>

namespace pinchoff::base {

enum class eseries { e12, e24, e96 };

/// The series' mantissas in [1, 10), ascending, as printed in IEC 60063 (not computed:
/// several E24 values differ from rounding 10^(i/24)).
std::span<const double> series_mantissas(eseries s) noexcept;

/// "E12", "E24", "E96" (case-insensitive); throws input_error otherwise.
eseries parse_series(std::string_view name);
std::string_view series_name(eseries s) noexcept;

/// Largest series value <= value_ohm, and smallest >= value_ohm (value_ohm > 0).
/// Exact matches are returned by both.
double series_at_or_below(eseries s, double value) noexcept;
double series_at_or_above(eseries s, double value) noexcept;

}  // namespace pinchoff::base
