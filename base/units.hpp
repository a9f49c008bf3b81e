#pragma once
// Parsing and formatting of values, levels and frequencies, and the level constants.
//
// Values: a plain number in SI base units ("4700", "1e-7"), a number with an SI prefix
// ("4.7k", "100n", "22u", "22µ", "1M" = mega, "2.2m" = milli), or the IEC 60062
// letter-and-digit code where the prefix letter stands for the decimal point ("4k7",
// "2n2", "R47", "4R7", "2m2"). An optional unit symbol may follow ("4.7kΩ", "100nF").
// Levels: "100mVpk", "300mVrms", "2Vpp", "-10dBu", "-20dBV"; a bare number is volts peak.
#include <optional>
#include <string>
#include <string_view>

namespace pinchoff::base {

/// The unit a value is read in; its symbols are accepted as an optional suffix.
enum class unit { none, ohm, farad, volt, ampere, hertz, watt, per_volt, kelvin, volt_per_pascal, henry, volt_per_kelvin };

/// Parses a value as described above. Throws input_error naming the text and what was
/// expected. `what` names the thing for the message ("drain.resistor").
double parse_value(std::string_view text, unit u = unit::none, std::string_view what = {});

/// Like parse_value but returns nullopt instead of throwing.
std::optional<double> try_parse_value(std::string_view text, unit u = unit::none) noexcept;

/// Reads a drive or output level and returns volts peak (sine). A bare number is volts
/// peak. When `require_unit` is set a bare number is refused.
double parse_level_vpk(std::string_view text, bool require_unit = false);

/// A sound pressure level written "94dBSPL" (or "94 dB SPL", any case): its value in dB SPL,
/// or nullopt when the text is not written as one. Throws input_error when it is written as
/// one but its number cannot be read or is out of 0 to 194 dB SPL.
std::optional<double> parse_spl_db(std::string_view text);

/// Reads a frequency ("1k", "1000", "1kHz") in hertz; must be > 0.
double parse_frequency_hz(std::string_view text);

/// A closed range "LO..HI" of values ("2m..8m", "7..9.6"); a single value is the range
/// [v, v]. With `any_order` the ends may come in either order (pinch-off voltages are
/// written from small to large magnitude: "-0.8..-3"); otherwise LO > HI is an error.
struct value_range {
  double lo{}, hi{};
};
value_range parse_range(std::string_view text, unit u = unit::none, std::string_view what = {}, bool any_order = false);

/// The physical range of a value a user gives: within [lo, hi], or exactly 0 where
/// `zero_means_none` (a part left out). `why` says where the bounds come from, for the
/// message. Signed values (voltages) are checked by magnitude.
struct value_bounds {
  double lo{}, hi{};
  bool zero_means_none{false};
  std::string_view why{};
};

/// Empty when `value` (by magnitude) lies within `b`; else the message
/// "WHAT = VALUE lies outside LO to HI (0: none): WHY", with the bounds in SI notation of `u`.
std::string bounds_refusal(std::string_view what, double value, const value_bounds& b, unit u);

/// The unit's symbol for messages ("Ω", "F", "V", "A", "Hz", "W", "/V", "K", "V/Pa", "H"; none: "").
std::string_view unit_symbol(unit u) noexcept;

/// A bound for messages: format_si with trailing zeros dropped ("1 mΩ", "100 GΩ", "4.7 kΩ").
std::string format_bound(double value, unit u);

/// "5%", "0.05" or "1%": a fraction (0.05). Must be in [0, 1).
double parse_fraction(std::string_view text, std::string_view what = {});

// Level constants and conversions (sine waves: Vrms = Vpk / sqrt 2).
inline constexpr double dbu_reference_vrms = 0.7745966692414834;  // sqrt(0.6) V, 0 dBu
inline constexpr double dbv_reference_vrms = 1.0;                 // 0 dBV
inline constexpr double sqrt2 = 1.4142135623730951;
// 0 dB SPL = 20 µPa rms (IEC 60268-4, ISO 1683); 94 dB SPL is then 1.002 Pa, the usual 1 Pa.
inline constexpr double spl_reference_pa = 20e-6;

double db_from_ratio(double ratio) noexcept;       // 20 log10(ratio)
double ratio_from_db(double gain_db) noexcept;     // 10^(db/20)
double dbu_from_vpk(double vpk) noexcept;
double vpk_from_dbu(double level_dbu) noexcept;
double dbv_from_vpk(double vpk) noexcept;
double vpk_from_dbv(double level_dbv) noexcept;
double pa_rms_from_db_spl(double level_db_spl) noexcept;  // 20 µPa x 10^(L/20)
double db_spl_from_pa_rms(double pa_rms) noexcept;        // 20 log10(p / 20 µPa)

/// Formats a value with an SI prefix and unit symbol, `digits` significant digits:
/// format_si(4700, "Ω") == "4.70 kΩ"; format_si(-0.00259, "A") == "-2.59 mA".
std::string format_si(double value, std::string_view unit_symbol, int digits = 3);

/// Formats a plain number with `digits` significant digits ("12.3", "-0.0456").
std::string format_number(double value, int digits = 3);

}  // namespace pinchoff::base
