#pragma once
// The entry functions of the fuzz targets, shared by the libFuzzer programs (fuzz_*.cpp)
// and by the regression test that replays every saved input on each `make test`
// (tests/fuzz/test_fuzz_regressions.cpp).
//
// Each function feeds arbitrary bytes to one parser. Refusing the input with input_error
// (or io_error, which derives from it) is an expected outcome. Anything else is a bug: an
// other exception escaping, a crash, a hang, a sanitizer report, or an accepted result that
// breaks the parser's stated contract; the last throws `broken_contract`.
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <limits>
#include <span>
#include <stdexcept>
#include <string>
#include <string_view>
#include <vector>

#include "base/csv.hpp"
#include "base/error.hpp"
#include "dsp/io/sound_file.hpp"
#include "dsp/exp_sweep.hpp"
#include "dsp/level_steps.hpp"
#include "base/units.hpp"
#include "cli/option_text.hpp"
#include "model/device/device_class.hpp"
#include "model/device/fit.hpp"
#include "model/analysis/spread.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/stage.hpp"
#include "model/circuit/stage_file.hpp"

namespace pinchoff::fuzz {

/// An accepted result that breaks what the parser promises.
class broken_contract : public std::logic_error {
 public:
  using std::logic_error::logic_error;
};

enum class outcome { accepted, refused };

namespace detail {

inline void require(bool ok, const std::string& what) {
  if (!ok) throw broken_contract(what);
}

inline bool starts_with(std::string_view text, std::string_view head) { return text.substr(0, head.size()) == head; }

}  // namespace detail

// ---------------------------------------------------------------------------------------
// Stage file: the first line is one --set override (none when it is empty), read as the
// command line reads it, the rest the TOML text. An accepted stage has finite values and
// passes validate(); a refusal names where it is: the source name, "--set" for an override
// the command line cannot read, or the override's key for a value the reader refuses.
inline outcome stage_file_entry(std::string_view data) {
  const std::size_t nl = data.find('\n');
  const std::string_view first = data.substr(0, nl);
  const std::string_view rest = nl == std::string_view::npos ? std::string_view() : data.substr(nl + 1);
  std::vector<model::stage_override> overrides;
  try {
    if (!first.empty()) overrides.push_back(cli::parse_set(first));
    const model::stage st = model::parse_stage(rest, "fuzz.toml", overrides, std::filesystem::path(PINCHOFF_PRESETS_DIR) / "devices.toml");
    auto in_range = [](double v) {
      detail::require(std::isfinite(v) && (v == 0.0 || std::fabs(v) >= 1e-21) && std::fabs(v) <= 1e11,
                      "parse_stage accepted a value outside every physical range");
    };
    for (double v : {st.temperature_k, st.supply.volts_v, st.supply.resistance_ohm, st.supply.capacitance_f,
                     st.signal_impedance_ohm})
      in_range(v);
    // Every stage of a chain (the first is the stage itself), with its rail and between.
    detail::require(st.stage_count() >= 1 && st.stage_count() <= model::max_chain_stages,
                    "parse_stage accepted a chain of more than six stages");
    for (int k = 0; k < st.stage_count(); ++k) {
      const model::stage_parts& p = st.part(k);
      for (double v : {p.jfet.idss_a, p.jfet.vp_v, p.jfet.lambda_per_v, p.jfet.is_a, p.jfet.n, p.jfet.cgs_f,
                       p.jfet.cgd_f, p.gate.coupling_cap_f, p.gate.resistor_ohm, p.gate.bias_top_ohm,
                       p.gate.bias_bottom_ohm, p.drain_resistor_ohm, p.drain_shunt_cap_f, p.source.unbypassed_ohm,
                       p.source.resistor_ohm, p.source.bypass_cap_f, p.output.coupling_cap_f, p.output.load_ohm,
                       p.rail.resistance_ohm, p.rail.capacitance_f})
        in_range(v);
      // A part's own temperature coefficients: |VP| grows and beta falls as it warms.
      const double sign = st.pol == model::polarity::p ? -1.0 : 1.0;
      if (p.tempco.vp_drift_v_per_k)
        detail::require(sign * *p.tempco.vp_drift_v_per_k <= 0.0 && sign * *p.tempco.vp_drift_v_per_k >= -10e-3,
                        "parse_stage accepted a pinch-off drift of the wrong sign or beyond 10 mV/K");
      if (p.tempco.beta_exponent)
        detail::require(*p.tempco.beta_exponent <= 0.0 && *p.tempco.beta_exponent >= -3.0,
                        "parse_stage accepted a beta exponent outside -3 to 0");
      detail::require(k > 0 || p.between.empty(), "parse_stage accepted a 'between' on the first stage");
      for (const model::between_part& b : p.between) {
        in_range(b.value);
        detail::require(b.value > 0 && b.position >= 0 && b.position <= 1, "parse_stage accepted a between part out of range");
      }
    }
    model::validate(st);  // throws input_error, which is reported below as a broken contract
    // What the reader accepts builds into a network (the chain's floating-node check ran on it).
    (void)model::build_network(st);
    return outcome::accepted;
  } catch (const broken_contract&) {
    throw;
  } catch (const setting_error& e) {
    detail::require(!overrides.empty() && !e.field().empty() && e.what()[0] != '\0',
                    "an override's refusal does not name its key: " + e.field() + ": " + e.what());
    return outcome::refused;
  } catch (const input_error& e) {
    const std::string_view msg = e.what();
    detail::require(detail::starts_with(msg, "fuzz.toml") || detail::starts_with(msg, "--set"),
                    "stage-file message does not say where: " + std::string(msg));
    return outcome::refused;
  }
}

// ---------------------------------------------------------------------------------------
// Device-class file (presets/devices.toml and its like): accepted classes have the ranges
// and typical values the reader promises, and a refusal names the file.
inline outcome device_classes_entry(std::string_view text) {
  try {
    const std::vector<model::device_class> all = model::parse_device_classes(text, "fuzz-devices.toml");
    for (const model::device_class& c : all) {
      for (double v : {c.idss_a.lo, c.idss_a.hi, c.vp_v.lo, c.vp_v.hi, c.typical_idss_a, c.typical_vp_v, c.lambda_per_v,
                       c.is_a, c.n, c.cgs_f, c.cgd_f})
        detail::require(std::isfinite(v), "a device class with a non-finite value was accepted");
      detail::require(c.idss_a.lo > 0 && c.idss_a.lo <= c.idss_a.hi && c.vp_v.lo <= c.vp_v.hi && c.vp_v.hi < 0 &&
                          c.typical_idss_a > 0 && c.typical_vp_v < 0,
                      "a device class with impossible ranges was accepted");
      detail::require(!c.vp_drift_v_per_k || (*c.vp_drift_v_per_k <= 0.0 && *c.vp_drift_v_per_k >= -10e-3),
                      "a device class with a pinch-off drift of the wrong sign or beyond 10 mV/K was accepted");
      detail::require(!c.beta_exponent || (*c.beta_exponent <= 0.0 && *c.beta_exponent >= -3.0),
                      "a device class with a beta exponent outside -3 to 0 was accepted");
    }
    return outcome::accepted;
  } catch (const input_error& e) {
    detail::require(detail::starts_with(e.what(), "fuzz-devices.toml"),
                    std::string("device-class message does not say where: ") + e.what());
    return outcome::refused;
  }
}

// ---------------------------------------------------------------------------------------
// Values, levels, frequencies, ranges and fractions: the whole input is one text given to
// every parser in base/units.hpp, and to the spread's --require parser. Accepted results are finite and inside the stated ranges,
// and try_parse_value agrees with parse_value.
inline outcome units_entry(std::string_view text) {
  using base::unit;
  bool any = false;
  auto attempt = [&](auto&& f) {
    try {
      f();
      any = true;
    } catch (const broken_contract&) {
      throw;
    } catch (const input_error& e) {
      detail::require(std::string_view(e.what()).size() > 0, "empty message");
    }
  };
  for (unit u : {unit::none, unit::ohm, unit::farad, unit::volt, unit::ampere, unit::hertz, unit::watt, unit::per_volt,
                 unit::kelvin, unit::volt_per_pascal, unit::henry}) {
    const std::optional<double> quiet = base::try_parse_value(text, u);
    bool thrown = false;
    try {
      const double v = base::parse_value(text, u, "key");
      detail::require(std::isfinite(v), "parse_value returned a non-finite value");
      detail::require(quiet && *quiet == v, "try_parse_value disagrees with parse_value");
      detail::require(v == 0.0 || std::fabs(v) >= std::numeric_limits<double>::min(), "parse_value accepted a denormal");
      detail::require(base::format_si(v, "V").find("nan") == std::string::npos, "format_si wrote nan for a finite value");
      any = true;
    } catch (const input_error&) {
      thrown = true;
    }
    detail::require(thrown == !quiet, "try_parse_value and parse_value disagree on acceptance");
    for (bool any_order : {false, true})
      attempt([&] {
        const base::value_range r = base::parse_range(text, u, "key", any_order);
        detail::require(std::isfinite(r.lo) && std::isfinite(r.hi) && r.lo <= r.hi, "parse_range returned a bad range");
      });
  }
  for (bool require_unit : {false, true})
    attempt([&] {
      const double vpk = base::parse_level_vpk(text, require_unit);
      detail::require(std::isfinite(vpk) && vpk >= 0.0, "parse_level_vpk returned a non-finite or negative level");
      (void)base::format_si(vpk, "V");
      (void)base::dbu_from_vpk(vpk);
    });
  attempt([&] {
    // A sound pressure level: nothing, or 0 to 194 dB SPL with a finite pressure.
    if (const std::optional<double> spl = base::parse_spl_db(text)) {
      detail::require(*spl >= 0.0 && *spl <= 194.0, "parse_spl_db returned a level outside 0 to 194 dB SPL");
      detail::require(std::isfinite(base::pa_rms_from_db_spl(*spl)), "a sound pressure level gave a non-finite pressure");
    }
  });
  attempt([&] {
    const double f = base::parse_frequency_hz(text);
    detail::require(std::isfinite(f) && f > 0.0, "parse_frequency_hz returned a frequency not above 0");
  });
  attempt([&] {
    // compare's --set N:KEY=VALUE for three designs: a design number 0 to 3, never an escape.
    const cli::design_set d = cli::parse_design_set(text, 3);
    detail::require(d.design <= 3, "parse_design_set returned a design beyond the count");
  });
  attempt([&] {
    // match's --by and --tolerance: a current above 0, tolerances above 0 and finite.
    const cli::match_by by = cli::parse_match_by(text);
    detail::require(by.basis == model::match_basis::idss_and_vp || (std::isfinite(by.current_a) && by.current_a > 0),
                    "parse_match_by returned a current not above 0");
  });
  for (model::match_basis basis : {model::match_basis::idss_and_vp, model::match_basis::vgs_at_current})
    attempt([&] {
      model::match_settings ms;
      cli::parse_match_tolerance(text, basis, ms);
      for (const std::optional<double>& tol : {ms.idss_tolerance_ratio, ms.vp_tolerance_v, ms.vgs_tolerance_v})
        detail::require(!tol || (std::isfinite(*tol) && *tol > 0), "parse_match_tolerance returned a tolerance not above 0");
    });
  attempt([&] {
    const model::requirement r = cli::parse_requirement(text);
    detail::require(!std::isnan(r.lo) && !std::isnan(r.hi) && r.lo <= r.hi, "parse_requirement returned a bad range");
  });
  attempt([&] {
    // tone --steps and measure --drive: a staircase of finite levels.
    const cli::staircase_text st = cli::parse_staircase(text, "--steps");
    detail::require(std::isfinite(st.from_dbfs) && std::isfinite(st.to_dbfs) && std::isfinite(st.step_db),
                    "parse_staircase returned a level that is not finite");
  });
  attempt([&] {
    const double x = base::parse_fraction(text, "key");
    detail::require(std::isfinite(x) && x >= 0.0 && x < 1.0, "parse_fraction returned a value outside [0, 1)");
  });
  return any ? outcome::accepted : outcome::refused;
}

// ---------------------------------------------------------------------------------------
// Bench CSV, then the square-law fit on what it read when the columns are those `pinchoff
// fit` takes: the fit either refuses the readings or returns finite figures.
inline outcome one_fit(model::reading_kind kind, const std::vector<model::bench_reading>& readings);
inline outcome csv_fit_entry(std::string_view text) {
  base::csv_table t;
  try {
    t = base::parse_csv(text, "fuzz.csv", model::bench_layout());
  } catch (const input_error& e) {
    detail::require(detail::starts_with(e.what(), "fuzz.csv"), std::string("CSV message does not say where: ") + e.what());
    return outcome::refused;
  }
  detail::require(t.rows.size() == t.line_of_row.size(), "rows and their line numbers differ in count");
  for (std::size_t k = 0; k < t.rows.size(); ++k) {
    detail::require(t.rows[k].size() == t.columns.size(), "a row with the wrong number of cells was accepted");
    detail::require(t.text_rows[k].size() == t.columns.size(), "a row's text cells differ in count from its columns");
    for (std::size_t c = 0; c < t.columns.size(); ++c) {
      const bool text_column = std::isnan(t.rows[k][c]);
      detail::require(text_column || std::isfinite(t.rows[k][c]), "a non-finite cell was accepted");
      detail::require(text_column || t.text_rows[k][c].empty(), "a numeric cell kept text");
    }
    detail::require(t.line_of_row[k] >= 1 && (k == 0 || t.line_of_row[k] > t.line_of_row[k - 1]), "line numbers out of order");
  }
  // A parts table: every part read has a name, finite figures and a JFET's signs.
  if (model::is_parts_table(t)) {
    try {
      for (const model::part_figures& p : model::read_parts(t))
        detail::require(!p.name.empty() && p.idss_a > 0 && std::isfinite(p.idss_a) && (p.p_channel ? p.vp_v > 0 : p.vp_v < 0) &&
                            std::isfinite(p.model_idss_a()) && p.model_idss_a() > 0,
                        "read_parts accepted a part that is not a JFET's");
    } catch (const input_error& e) {
      detail::require(detail::starts_with(e.what(), "fuzz.csv"), std::string("parts-table message does not say where: ") + e.what());
    }
    return outcome::accepted;
  }
  std::vector<model::part_readings> parts;
  try {
    parts = model::parts_from_table(t);
  } catch (const input_error& e) {
    detail::require(detail::starts_with(e.what(), "fuzz.csv"), std::string("column message does not say where: ") + e.what());
    return outcome::accepted;  // a well-formed table that is not a set of bench readings
  }
  std::size_t rows = 0;
  for (const model::part_readings& p : parts) rows += p.table.readings.size();
  detail::require(rows == t.rows.size(), "the parts' readings do not add up to the table's rows");
  // Each part is fitted as `fit` fits it; the first refusal ends the run, as it does there.
  for (const model::part_readings& p : parts) {
    detail::require(parts.size() == 1 || !p.name.empty(), "a part without a name in a parts file");
    const model::reading_kind kind = p.table.kind;
    const std::vector<model::bench_reading>& readings = p.table.readings;
    if (one_fit(kind, readings) == outcome::refused) return outcome::refused;
  }
  return outcome::accepted;
}

// One part's fit: refused, or finite figures of a JFET's signs.
inline outcome one_fit(model::reading_kind kind, const std::vector<model::bench_reading>& readings) {
  try {
    const model::fit_result f = model::fit_square_law(kind, readings);
    const std::string figures = "idss " + std::to_string(f.idss_a) + " +- " + std::to_string(f.idss_se_a) + ", vp " +
                                std::to_string(f.vp_v) + " +- " + std::to_string(f.vp_se_v) + ", lambda " +
                                std::to_string(f.lambda_per_v) + " +- " + std::to_string(f.lambda_se_per_v) + ", rms " +
                                std::to_string(f.rms_residual_ratio);
    for (double v : {f.idss_a, f.vp_v, f.lambda_per_v, f.rms_residual_ratio, f.idss_vds_v, f.idss_at_vds_a})
      detail::require(std::isfinite(v), "fit_square_law returned a non-finite figure: " + figures);
    // Errors are NaN by contract only when the readings determine the part exactly (as
    // many readings as parameters); otherwise they must be finite.
    const std::size_t parameters = f.lambda_fitted ? 3 : 2;
    for (double v : {f.idss_se_a, f.vp_se_v, f.lambda_se_per_v})
      detail::require(std::isfinite(v) || (readings.size() == parameters && std::isnan(v)),
                      "fit_square_law returned a non-finite error with spare readings: " + figures);
    detail::require(f.idss_a > 0.0 && (f.p_channel ? f.vp_v > 0.0 : f.vp_v < 0.0), "fit returned a sign that is not a JFET's: " + figures);
    detail::require(f.rows.size() == readings.size(), "fit returned a different number of rows");
    for (const model::fit_row& r : f.rows)
      detail::require(std::isfinite(r.vgs_v) && std::isfinite(r.id_model_a) && std::isfinite(r.residual_ratio),
                      "fit returned a non-finite row");
    (void)model::jfet_block(f);
    return outcome::accepted;
  } catch (const input_error&) {
    return outcome::refused;
  }
}

// ---------------------------------------------------------------------------------------
// Audio: the bytes as an in-memory file through libsndfile's virtual I/O; every frame is
// read in blocks, then channel 1 again from the start as `pinchoff measure` reads it.
inline outcome sound_entry(std::span<const std::byte> bytes) {
  try {
    dsp::sound_reader rd = dsp::sound_reader::open_memory(bytes, "fuzz.wav");
    const dsp::sound_info info = rd.info();
    detail::require(info.channels >= 1 && info.rate_hz >= 1 && info.frames >= 0, "opened a file with an impossible header");
    std::vector<double> block(static_cast<std::size_t>(info.channels) * 1024);
    std::int64_t total = 0;
    for (;;) {
      const std::size_t got = rd.read(block);
      if (got == 0) break;
      detail::require(got <= 1024, "read returned more frames than asked for");
      total += static_cast<std::int64_t>(got);
      if (info.is_float)
        for (std::size_t i = 0; i < got * static_cast<std::size_t>(info.channels); ++i)
          detail::require(std::isfinite(block[i]), "a non-finite sample was read");
    }
    detail::require(total == info.frames && rd.position() == total, "read a different number of frames than the header gives");
    rd.seek(0);
    const std::vector<double> x = dsp::read_channel(rd, 0);
    detail::require(static_cast<std::int64_t>(x.size()) == info.frames, "read_channel returned a different number of frames");
    // measure --steps: the steps found lie in order inside the record, each at least three
    // blocks long; the level spread measure checks is finite and not negative.
    const std::vector<dsp::sample_range> steps = dsp::find_level_steps(x, info.rate_hz);
    std::size_t last_end = 0;
    for (const dsp::sample_range& st : steps) {
      detail::require(st.begin >= last_end && st.begin < st.end && st.end <= x.size(), "find_level_steps returned a step out of order or outside the record");
      last_end = st.end;
    }
    const double spread = dsp::level_spread_db(x, info.rate_hz);
    detail::require(std::isfinite(spread) && spread >= 0.0, "level_spread_db returned a spread that is not a finite, non-negative dB figure");
    // measure --response: the file deconvolved by itself as the played sweep (a band of two
    // octaves below a quarter of its rate), when it is long enough to be one and short
    // enough to keep the run quick; refused or an impulse response of finite samples.
    if (info.rate_hz >= 64.0 && static_cast<double>(x.size()) >= 0.5 * info.rate_hz && x.size() <= (std::size_t{1} << 15)) {
      dsp::exp_sweep_plan plan;
      plan.rate_hz = info.rate_hz;
      plan.start_hz = std::max(1.0, info.rate_hz / 64.0);
      plan.end_hz = info.rate_hz / 4.0;
      plan.seconds = static_cast<double>(x.size()) / info.rate_hz;
      plan.level_dbfs = 0.0;
      plan.fade_seconds = 0.0;
      try {
        const dsp::sweep_deconvolution d = dsp::deconvolve_sweep(x, x, plan);
        for (double v : d.h) detail::require(std::isfinite(v), "deconvolve_sweep returned a sample that is not finite");
      } catch (const setting_error&) {
      } catch (const input_error&) {
      }
    }
    return outcome::accepted;
  } catch (const input_error& e) {
    detail::require(std::string_view(e.what()).find("fuzz.wav") != std::string_view::npos,
                    std::string("audio message does not name the file: ") + e.what());
    return outcome::refused;
  }
}

}  // namespace pinchoff::fuzz
