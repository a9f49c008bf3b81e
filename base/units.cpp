#include "base/units.hpp"

#include <algorithm>
#include <array>
#include <charconv>
#include <cmath>
#include <cstdio>
#include <cctype>
#include <limits>

#include "base/error.hpp"

namespace pinchoff::base {
namespace {

std::string_view trim(std::string_view s) noexcept {
  while (!s.empty() && std::isspace(static_cast<unsigned char>(s.front()))) s.remove_prefix(1);
  while (!s.empty() && std::isspace(static_cast<unsigned char>(s.back()))) s.remove_suffix(1);
  return s;
}

bool iequals(std::string_view a, std::string_view b) noexcept {
  if (a.size() != b.size()) return false;
  for (std::size_t i = 0; i < a.size(); ++i)
    if (std::tolower(static_cast<unsigned char>(a[i])) != std::tolower(static_cast<unsigned char>(b[i])))
      return false;
  return true;
}

// A prefix letter at the start of `s`: its multiplier and its length in bytes.
struct prefix_match {
  double multiplier;
  std::size_t length;
};

std::optional<prefix_match> match_prefix(std::string_view s, unit u) noexcept {
  if (s.empty()) return std::nullopt;
  if (s.starts_with("\xC2\xB5") || s.starts_with("\xCE\xBC")) return prefix_match{1e-6, 2};  // µ, μ
  switch (s.front()) {
    case 'f': return prefix_match{1e-15, 1};
    case 'p': return prefix_match{1e-12, 1};
    case 'n': return prefix_match{1e-9, 1};
    case 'u': return prefix_match{1e-6, 1};
    case 'm': return prefix_match{1e-3, 1};
    case 'k':
    case 'K': return prefix_match{1e3, 1};
    case 'M': return prefix_match{1e6, 1};
    case 'G': return prefix_match{1e9, 1};
    case 'R':
    case 'r':
      // IEC 60062 uses R as the decimal point of resistances ("4R7", "R47", "47R").
      if (u == unit::ohm || u == unit::none) return prefix_match{1.0, 1};
      return std::nullopt;
    default: return std::nullopt;
  }
}

bool is_unit_symbol(std::string_view s, unit u) noexcept {
  if (s.empty()) return true;
  switch (u) {
    case unit::ohm:
      return s == "\xCE\xA9" || s == "\xE2\x84\xA6" || iequals(s, "ohm") || iequals(s, "ohms");
    case unit::farad: return s == "F";
    case unit::volt: return s == "V";
    case unit::ampere: return s == "A";
    case unit::hertz: return iequals(s, "Hz");
    case unit::watt: return s == "W";
    case unit::per_volt: return s == "/V";
    case unit::volt_per_pascal: return s == "V/Pa";
    case unit::volt_per_kelvin: return s == "V/K" || s == "V/\xC2\xB0" "C";  // a kelvin and a degree Celsius are one step
    case unit::henry: return s == "H";
    case unit::kelvin:
    case unit::none: return false;
  }
  return false;
}

const char* unit_noun(unit u) noexcept {
  switch (u) {
    case unit::ohm: return "a resistance (such as 4.7k, 4k7, 470R or 4700)";
    case unit::farad: return "a capacitance (such as 100n, 2n2, 22u or 1e-7)";
    case unit::volt: return "a voltage (such as 9, -1.8 or 300m)";
    case unit::ampere: return "a current (such as 5m, 2.5mA or 0.005)";
    case unit::hertz: return "a frequency (such as 1k, 1kHz or 1000)";
    case unit::watt: return "a power (such as 300m or 0.3)";
    case unit::per_volt: return "a value in 1/V (such as 0.004)";
    case unit::volt_per_pascal: return "a sensitivity in V/Pa (such as 12m or 12mV/Pa)";
    case unit::volt_per_kelvin: return "a drift in V/K (such as -2.2m or -2.2mV/K)";
    case unit::kelvin: return "a temperature in kelvin (such as 300.15)";
    case unit::henry: return "an inductance (such as 2.5, 2.5H or 800m)";
    case unit::none: return "a number (such as 4.7k or 0.5)";
  }
  return "a number";
}

bool all_digits(std::string_view s) noexcept {
  if (s.empty()) return false;
  for (char c : s)
    if (!std::isdigit(static_cast<unsigned char>(c))) return false;
  return true;
}

// Why a text was not read: not a value of the unit, or a number a double cannot hold
// (beyond 1.8e308, or so small it would be denormal or zero: below 2.2e-308).
enum class misread { none, not_a_value, out_of_range };

std::optional<double> parse_impl(std::string_view text, unit u, misread* why = nullptr) noexcept {
  auto fail = [why](misread m) -> std::optional<double> {
    if (why != nullptr) *why = m;
    return std::nullopt;
  };
  std::string_view s = trim(text);
  if (s.empty()) return fail(misread::not_a_value);
  bool negative = false;
  if (s.front() == '+' || s.front() == '-') {
    negative = s.front() == '-';
    s.remove_prefix(1);
  }
  double number = 0.0;
  std::string_view lead = s;
  std::size_t lead_len = 0;
  if (!s.empty() && (std::isdigit(static_cast<unsigned char>(s.front())) || s.front() == '.')) {
    auto [ptr, ec] = std::from_chars(s.data(), s.data() + s.size(), number);
    if (ec == std::errc::result_out_of_range) return fail(misread::out_of_range);
    if (ec != std::errc{}) return fail(misread::not_a_value);
    lead_len = static_cast<std::size_t>(ptr - s.data());
  }
  lead = s.substr(0, lead_len);
  s.remove_prefix(lead_len);
  const bool lead_is_integer = all_digits(lead);

  double multiplier = 1.0;
  if (auto p = match_prefix(s, u)) {
    std::string_view after = s.substr(p->length);
    // Letter-and-digit code: the letter stands for the decimal point ("4k7", "R47").
    std::size_t ndig = 0;
    while (ndig < after.size() && std::isdigit(static_cast<unsigned char>(after[ndig]))) ++ndig;
    if (ndig > 0) {
      if (!(lead.empty() || lead_is_integer)) return fail(misread::not_a_value);  // "4.7k7" is nonsense
      const std::string joined = std::string(lead.empty() ? "0" : lead) + "." + std::string(after.substr(0, ndig));
      auto [ptr, ec] = std::from_chars(joined.data(), joined.data() + joined.size(), number);
      if (ec == std::errc::result_out_of_range) return fail(misread::out_of_range);
      if (ec != std::errc{} || ptr != joined.data() + joined.size()) return fail(misread::not_a_value);
      after.remove_prefix(ndig);
    } else if (lead.empty()) {
      return fail(misread::not_a_value);
    }
    multiplier = p->multiplier;
    s = after;
  } else if (lead.empty()) {
    return fail(misread::not_a_value);
  }
  if (!is_unit_symbol(s, u)) return fail(misread::not_a_value);
  const double value = (negative ? -number : number) * multiplier;
  // "1e308k" overflows once scaled; "1e-320" is denormal: neither is a value of a real part,
  // and a denormal loses its digits (and turns to 0 or infinity in the arithmetic after).
  if (!std::isfinite(value) || (value != 0.0 && std::fabs(value) < std::numeric_limits<double>::min()))
    return fail(misread::out_of_range);
  return value;
}

}  // namespace

std::optional<double> try_parse_value(std::string_view text, unit u) noexcept { return parse_impl(text, u); }

double parse_value(std::string_view text, unit u, std::string_view what) {
  misread why = misread::none;
  if (auto v = parse_impl(text, u, &why)) return *v;
  std::string msg;
  if (!what.empty()) msg = std::string(what) + ": ";
  if (why == misread::out_of_range)
    msg.append("'").append(text).append("' is beyond the numbers this tool reads (magnitudes from 2.2e-308 to 1.8e308, or 0)");
  else
    msg += "cannot read '" + std::string(text) + "' as " + unit_noun(u);
  throw input_error(msg);
}

double parse_level_vpk(std::string_view text, bool require_unit) {
  const std::string_view s = trim(text);
  struct suffix {
    std::string_view text;
    int kind;  // 0 peak, 1 rms, 2 peak-to-peak, 3 dBu, 4 dBV
  };
  static constexpr std::array<suffix, 7> suffixes{{{"dBu", 3}, {"dBV", 4}, {"Vrms", 1}, {"Vpp", 2},
                                                    {"Vpk", 0}, {"Vp", 0}, {"V", 0}}};
  for (const suffix& sf : suffixes) {
    if (s.size() <= sf.text.size()) continue;
    const std::string_view tail = s.substr(s.size() - sf.text.size());
    if (!iequals(tail, sf.text)) continue;
    if (sf.kind < 3 && tail.front() != 'V' && tail.front() != 'v') continue;
    const std::string_view head = s.substr(0, s.size() - sf.text.size());
    std::optional<double> v = parse_impl(head, unit::none);
    if (!v) break;
    double vpk = 0.0;
    switch (sf.kind) {
      case 0: vpk = *v; break;
      case 1: vpk = *v * sqrt2; break;
      case 2: vpk = *v / 2.0; break;
      case 3: vpk = vpk_from_dbu(*v); break;
      default: vpk = vpk_from_dbv(*v); break;
    }
    if (sf.kind < 3 && *v < 0) break;
    // "1e5dBu" or "1.3e308Vrms" read as numbers but overflow once converted to volts.
    if (!std::isfinite(vpk))
      throw input_error("level '" + std::string(text) + "' is too large: it overflows when converted to volts");
    return vpk;
  }
  if (!require_unit) {
    if (auto v = parse_impl(s, unit::none); v && *v >= 0) return *v;
  }
  throw input_error("cannot read '" + std::string(text) + "' as a level (expected for example 100mVpk, 300mVrms, 2Vpp, -10dBu or -20dBV" +
                    (require_unit ? std::string(")") : std::string("; a bare number is volts peak)")));
}

std::optional<double> parse_spl_db(std::string_view text) {
  std::string compact;  // "94 dB SPL" reads as "94dBSPL"
  for (char c : trim(text))
    if (c != ' ') compact += c;
  static constexpr std::string_view suffix = "dBSPL";
  if (compact.size() < suffix.size() || !iequals(std::string_view(compact).substr(compact.size() - suffix.size()), suffix))
    return std::nullopt;
  const std::optional<double> v = parse_impl(std::string_view(compact).substr(0, compact.size() - suffix.size()), unit::none);
  if (!v || !std::isfinite(*v))
    throw input_error("cannot read '" + std::string(text) + "' as a sound pressure level (expected for example 94dBSPL)");
  // 0 dB SPL is about the threshold of hearing; 194 dB SPL is a pressure swing of one
  // atmosphere, beyond which a sine wave of pressure cannot exist in air (common practice).
  if (*v < 0.0 || *v > 194.0)
    throw input_error("sound pressure level '" + std::string(text) +
                      "' lies outside 0 to 194 dB SPL (from the threshold of hearing to a swing of one atmosphere)");
  return *v;
}

double pa_rms_from_db_spl(double level_db_spl) noexcept { return spl_reference_pa * std::pow(10.0, level_db_spl / 20.0); }
double db_spl_from_pa_rms(double pa_rms) noexcept { return db_from_ratio(pa_rms / spl_reference_pa); }

double parse_frequency_hz(std::string_view text) {
  const double f = parse_value(text, unit::hertz);
  if (!(f > 0.0)) throw input_error("frequency '" + std::string(text) + "' must be above 0 Hz");
  return f;
}

value_range parse_range(std::string_view text, unit u, std::string_view what, bool any_order) {
  const std::string prefix = what.empty() ? std::string() : std::string(what) + ": ";
  const auto dots = text.find("..");
  if (dots == std::string_view::npos) {
    const double v = parse_value(text, u, what);
    return {v, v};
  }
  const std::string_view a = text.substr(0, dots), b = text.substr(dots + 2);
  if (trim(a).empty() || trim(b).empty())
    throw input_error(prefix + "range '" + std::string(text) + "' needs both ends, for example 2m..8m");
  double lo = parse_value(a, u, what), hi = parse_value(b, u, what);
  if (lo > hi) {
    if (!any_order)
      throw input_error(prefix + "range '" + std::string(text) + "' has its minimum above its maximum (write LO..HI)");
    std::swap(lo, hi);
  }
  return {lo, hi};
}

double parse_fraction(std::string_view text, std::string_view what) {
  const std::string prefix = what.empty() ? std::string() : std::string(what) + ": ";
  std::string_view s = trim(text);
  double scale = 1.0;
  if (!s.empty() && s.back() == '%') {
    s.remove_suffix(1);
    scale = 0.01;
  }
  const auto v = try_parse_value(s, unit::none);
  if (!v) throw input_error(prefix + "cannot read '" + std::string(text) + "' as a fraction (expected for example 5% or 0.05)");
  if (*v * scale < 0 || *v * scale >= 1)
    throw input_error(prefix + "'" + std::string(text) + "' lies outside 0 to 100 % (a fraction from 0 up to, not including, 1)");
  return *v * scale;
}

double db_from_ratio(double ratio) noexcept { return 20.0 * std::log10(ratio); }
double ratio_from_db(double gain_db) noexcept { return std::pow(10.0, gain_db / 20.0); }
double dbu_from_vpk(double vpk) noexcept { return db_from_ratio(vpk / sqrt2 / dbu_reference_vrms); }
double vpk_from_dbu(double level_dbu) noexcept { return ratio_from_db(level_dbu) * dbu_reference_vrms * sqrt2; }
double dbv_from_vpk(double vpk) noexcept { return db_from_ratio(vpk / sqrt2 / dbv_reference_vrms); }
double vpk_from_dbv(double level_dbv) noexcept { return ratio_from_db(level_dbv) * dbv_reference_vrms * sqrt2; }

std::string format_number(double value, int digits) {
  if (!std::isfinite(value)) return std::isnan(value) ? "nan" : (value > 0 ? "inf" : "-inf");
  if (value == 0.0) return "0";
  const int mag = static_cast<int>(std::floor(std::log10(std::fabs(value))));
  char buf[64];
  // Fixed notation would print hundreds of digits for 1e300 (or zeros for 1e-300).
  if (mag >= 15 || mag < -15) {
    std::snprintf(buf, sizeof buf, "%.*e", std::max(digits - 1, 0), value);
    return buf;
  }
  int decimals = digits - 1 - mag;
  if (decimals < 0) decimals = 0;
  if (decimals > 15) decimals = 15;
  std::snprintf(buf, sizeof buf, "%.*f", decimals, value);
  return buf;
}

std::string format_si(double value, std::string_view unit_symbol, int digits) {
  if (!std::isfinite(value)) return format_number(value, digits) + " " + std::string(unit_symbol);
  static constexpr std::array<const char*, 10> prefixes{"f", "p", "n", "µ", "m", "", "k", "M", "G", "T"};
  if (value == 0.0) return "0 " + std::string(unit_symbol);
  const int e3_raw = static_cast<int>(std::floor(std::log10(std::fabs(value)) / 3.0));
  // Beyond the prefixes (below 1 f, from 1000 T) the number is written in scientific
  // notation: scaling a denormal by 1e15 and rounding it gave "nan fV".
  if (e3_raw < -5 || e3_raw > 4) return format_number(value, digits) + " " + std::string(unit_symbol);
  int e3 = e3_raw;
  const double mant = value / std::pow(10.0, 3 * e3);
  // Rounding to `digits` may carry into the next prefix (999.7 -> 1000 -> 1.00 k).
  const int mag = static_cast<int>(std::floor(std::log10(std::fabs(mant))));
  const double scale = std::pow(10.0, digits - 1 - mag);
  double rounded = std::round(mant * scale) / scale;
  if (std::fabs(rounded) >= 1000.0 && e3 < 4) {
    ++e3;
    rounded /= 1000.0;
  }
  return format_number(rounded, digits) + " " + prefixes[static_cast<std::size_t>(e3 + 5)] + std::string(unit_symbol);
}

std::string_view unit_symbol(unit u) noexcept {
  switch (u) {
    case unit::ohm: return "\xCE\xA9";
    case unit::farad: return "F";
    case unit::volt: return "V";
    case unit::ampere: return "A";
    case unit::hertz: return "Hz";
    case unit::watt: return "W";
    case unit::per_volt: return "/V";
    case unit::kelvin: return "K";
    case unit::volt_per_pascal: return "V/Pa";
    case unit::volt_per_kelvin: return "V/K";
    case unit::henry: return "H";
    case unit::none: return "";
  }
  return "";
}

std::string format_bound(double value, unit u) {
  // Drops the zeros rounding adds: "1.00" -> "1", "4.70" -> "4.7", "1.00e-20" -> "1e-20".
  auto trim_zeros = [](const std::string& num) {
    const std::size_t e = num.find('e');
    std::string mant = num.substr(0, e), exp = e == std::string::npos ? std::string() : num.substr(e);
    if (mant.find('.') != std::string::npos) {
      while (mant.back() == '0') mant.pop_back();
      if (mant.back() == '.') mant.pop_back();
    }
    // "e-09" -> "e-9", "e+03" -> "e3"
    if (!exp.empty()) {
      std::string digits = exp.substr(1);
      const bool minus = !digits.empty() && digits[0] == '-';
      if (!digits.empty() && (digits[0] == '-' || digits[0] == '+')) digits.erase(0, 1);
      while (digits.size() > 1 && digits[0] == '0') digits.erase(0, 1);
      exp = std::string("e") + (minus ? "-" : "") + digits;
    }
    return mant + exp;
  };
  if (u == unit::per_volt || u == unit::kelvin || u == unit::none) {
    const double mag = value == 0.0 ? 0.0 : std::floor(std::log10(std::fabs(value)));
    char buf[64];
    if (mag < -3 || mag >= 6) std::snprintf(buf, sizeof buf, "%.2e", value);
    else std::snprintf(buf, sizeof buf, "%.*f", static_cast<int>(std::max(0.0, 2 - mag)), value);
    std::string t = trim_zeros(buf);
    const std::string_view sym = unit_symbol(u);
    if (!sym.empty()) t.append(" ").append(sym);
    return t;
  }
  const std::string t = format_si(value, unit_symbol(u), 3);  // "1.00 mΩ", "1.00e-20 A"
  const std::size_t space = t.find(' ');
  return trim_zeros(t.substr(0, space)) + t.substr(space);
}

std::string bounds_refusal(std::string_view what, double value, const value_bounds& b, unit u) {
  const double m = std::fabs(value);
  if (b.zero_means_none && value == 0.0) return {};
  // A bound written with a prefix ("100u") may read a rounding below or above it.
  if (m >= b.lo * (1 - 1e-12) && m <= b.hi * (1 + 1e-12)) return {};
  std::string msg = std::string(what) + " = " + format_number(value, 3) + " lies outside " + format_bound(b.lo, u) + " to " +
                    format_bound(b.hi, u) + (value < 0 ? " in magnitude" : "");
  if (b.zero_means_none) msg += " (or 0 for none)";
  if (!b.why.empty()) msg += ": " + std::string(b.why);
  return msg;
}

}  // namespace pinchoff::base
