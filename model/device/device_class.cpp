#include "model/device/device_class.hpp"

#include <cerrno>
#include <cmath>
#include <limits>
#include <cstdint>
#include <cstring>
#include <fstream>
#include <sstream>

#include <toml++/toml.h>

#include "base/error.hpp"
#include "base/text_file.hpp"
#include "base/toml_depth.hpp"
#include "base/text.hpp"
#include "model/device/parameter_ranges.hpp"

namespace pinchoff::model {
namespace {

std::string where(const std::string& file, const toml::source_region& r) {
  return file + ":" + std::to_string(r.begin.line) + ":" + std::to_string(r.begin.column) + ": ";
}

void check_bounds(const toml::node& n, double v, const base::value_bounds& b, base::unit u, const std::string& file,
                  const std::string& key) {
  if (!std::isfinite(v)) throw input_error(where(file, n.source()) + key + ": value must be finite");
  if (const std::string m = base::bounds_refusal(key, v, b, u); !m.empty()) throw input_error(where(file, n.source()) + m);
}

double number(const toml::node& n, base::unit u, const base::value_bounds& b, const std::string& file,
              const std::string& key, bool any_sign = false) {
  double v = 0.0;
  if (n.is_integer()) {
    v = static_cast<double>(*n.value<std::int64_t>());  // exact or rounded, never missing (above 2^53)
  } else if (n.is_floating_point()) {
    v = *n.value<double>();
  } else if (n.is_string()) {
    try {
      v = base::parse_value(*n.value<std::string>(), u, key);
    } catch (const input_error& e) {
      throw input_error(where(file, n.source()) + e.what());
    }
  } else {
    throw input_error(where(file, n.source()) + key + ": expected a number or a value string");
  }
  if (v < 0 && u != base::unit::volt && !any_sign) throw input_error(where(file, n.source()) + key + " must not be negative");
  check_bounds(n, v, b, u, file, key);
  return v;
}

base::value_range range(const toml::node& n, base::unit u, const base::value_bounds& b, const std::string& file,
                        const std::string& key) {
  if (!n.is_string()) throw input_error(where(file, n.source()) + key + ": expected a range string such as \"2m..8m\"");
  base::value_range r;
  try {
    r = base::parse_range(*n.value<std::string>(), u, key, true);
  } catch (const input_error& e) {
    throw input_error(where(file, n.source()) + e.what());
  }
  // Signs are checked with the class as a whole; here each end's magnitude.
  if (!(u == base::unit::volt ? r.hi < 0 : r.lo > 0)) return r;
  check_bounds(n, r.lo, b, u, file, key);
  check_bounds(n, r.hi, b, u, file, key);
  return r;
}

}  // namespace

std::vector<device_class> read_device_classes(const std::filesystem::path& path) {
  return parse_device_classes(base::read_text_file(path, device_class_file_kind), path.string());
}

std::vector<device_class> parse_device_classes(std::string_view text, std::string_view source_name) {
  const std::string file(source_name);
  toml::table root;
  base::check_toml_depth(text, source_name);
  try {
    root = toml::parse(text, source_name);
  } catch (const toml::parse_error& e) {
    throw input_error(where(file, e.source()) + std::string(e.description()));
  }
  static const std::vector<std::string_view> keys{"summary", "idss", "vp", "typical_idss", "typical_vp", "lambda",
                                                  "is", "n", "cgs", "cgd", "vds_max", "vp_drift", "beta_exponent"};
  std::vector<device_class> out;
  for (auto&& [k, node] : root) {
    device_class c;
    c.name = std::string(k.str());
    if (!node.is_table()) throw input_error(where(file, node.source()) + "'" + c.name + "' must be a section [" + c.name + "]");
    const toml::table& t = *node.as_table();
    for (auto&& [k2, v] : t) {
      const std::string key(k2.str());
      const std::string full = c.name + "." + key;
      namespace r = ranges;
      if (key == "summary") c.summary = v.value<std::string>().value_or("");
      else if (key == "idss") c.idss_a = range(v, base::unit::ampere, r::idss, file, full);
      else if (key == "vp") c.vp_v = range(v, base::unit::volt, r::vp, file, full);
      else if (key == "typical_idss") c.typical_idss_a = number(v, base::unit::ampere, r::idss, file, full);
      else if (key == "typical_vp") c.typical_vp_v = number(v, base::unit::volt, r::vp, file, full);
      else if (key == "lambda") c.lambda_per_v = number(v, base::unit::per_volt, r::lambda, file, full);
      else if (key == "is") c.is_a = number(v, base::unit::ampere, r::is, file, full);
      else if (key == "n") c.n = number(v, base::unit::none, r::n, file, full);
      else if (key == "cgs") c.cgs_f = number(v, base::unit::farad, r::junction_cap, file, full);
      else if (key == "cgd") c.cgd_f = number(v, base::unit::farad, r::junction_cap, file, full);
      else if (key == "vds_max") c.vds_max_v = number(v, base::unit::volt, r::vds_max, file, full);
      else if (key == "vp_drift" || key == "beta_exponent") {
        // Temperature coefficients, n-channel sign: |VP| grows and beta falls as the part warms.
        const bool drift = key == "vp_drift";
        const base::value_bounds any{0.0, std::numeric_limits<double>::infinity(), false, ""};
        const double x = number(v, drift ? base::unit::volt_per_kelvin : base::unit::none, any, file, full, true);
        if (const std::string m = drift ? r::vp_drift_problem(x, r::drift_frame::n_channel_sign) : r::beta_exponent_problem(x); !m.empty())
          throw input_error(where(file, v.source()) + full + " " + m);
        (drift ? c.vp_drift_v_per_k : c.beta_exponent) = x;
      }
      else {
        std::string m = "unknown key '" + key + "' in [" + c.name + "]";
        if (const std::string near = base::nearest_name(key, keys); !near.empty()) m += "; did you mean '" + near + "'?";
        throw input_error(where(file, k2.source()) + m);
      }
    }
    if (!(c.idss_a.lo > 0) || !(c.vp_v.hi < 0) || !(c.typical_idss_a > 0) || !(c.typical_vp_v < 0))
      throw input_error(where(file, node.source()) + "[" + c.name +
                        "] needs idss and vp ranges and typical_idss and typical_vp (n-channel signs: vp negative)");
    out.push_back(c);
  }
  return out;
}

std::filesystem::path device_file_for(const std::filesystem::path& stage_file, const std::filesystem::path& fallback) {
  std::error_code ec;
  const std::filesystem::path beside = stage_file.parent_path() / "devices.toml";
  if (!stage_file.empty() && std::filesystem::is_regular_file(beside, ec)) return beside;
  if (fallback.empty())
    throw input_error("no device-class file: put a devices.toml beside the stage file, or name one with PINCHOFF_DEVICES");
  return fallback;
}

device_class find_device_class(std::string_view name, const std::filesystem::path& file) {
  const std::vector<device_class> all = read_device_classes(file);
  std::vector<std::string_view> names;
  for (const device_class& c : all) {
    if (c.name == name) return c;
    names.push_back(c.name);
  }
  std::string list;
  for (std::string_view n : names) list += (list.empty() ? "" : ", ") + std::string(n);
  std::string m = "unknown device class '" + std::string(name) + "' (classes in " + file.string() + ": " + list + ")";
  if (const std::string near = base::nearest_name(name, names); !near.empty()) m += "; did you mean '" + near + "'?";
  throw input_error(m);
}

}  // namespace pinchoff::model
