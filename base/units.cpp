#include "base/units.hpp"

#include <algorithm>
#include <array>
#include <charconv>
#include <cmath>
#include <cstdio>
#include <cctype>

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
    case unit::kelvin: return "a temperature in kelvin (such as 300.15)";
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

std::optional<double> parse_impl(std::string_view text, unit u) noexcept {
  std::string_view s = trim(text);
  if (s.empty()) return std::nullopt;
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
    if (ec != std::errc{}) return std::nullopt;
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
      if (!(lead.empty() || lead_is_integer)) return std::nullopt;  // "4.7k7" is nonsense
      const std::string joined = std::string(lead.empty() ? "0" : lead) + "." + std::string(after.substr(0, ndig));
      auto [ptr, ec] = std::from_chars(joined.data(), joined.data() + joined.size(), number);
      if (ec != std::errc{} || ptr != joined.data() + joined.size()) return std::nullopt;
      after.remove_prefix(ndig);
    } else if (lead.empty()) {
      return std::nullopt;
    }
    multiplier = p->multiplier;
    s = after;
  } else if (lead.empty()) {
    return std::nullopt;
  }
  if (!is_unit_symbol(s, u)) return std::nullopt;
  const double value = (negative ? -number : number) * multiplier;
  if (!std::isfinite(value)) return std::nullopt;
  return value;
}

}  // namespace

std::optional<double> try_parse_value(std::string_view text, unit u) noexcept { return parse_impl(text, u); }

double parse_value(std::string_view text, unit u, std::string_view what) {
  if (auto v = parse_impl(text, u)) return *v;
  std::string msg;
  if (!what.empty()) msg = std::string(what) + ": ";
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
  int e3 = static_cast<int>(std::floor(std::log10(std::fabs(value)) / 3.0));
  if (e3 < -5) e3 = -5;
  if (e3 > 4) e3 = 4;
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

}  // namespace pinchoff::base
