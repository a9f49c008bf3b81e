#pragma once
// Builds stage files for tests from a few numbers, so each test states its circuit.
#include <sstream>
#include <string>

#include "model/circuit/stage_file.hpp"

namespace pinchoff::test {

/// A number written so it reads back exactly.
inline std::string num(double v) {
  std::ostringstream os;
  os.precision(15);
  os << v;
  return os.str();
}

/// A TOML stage text; `extra` is appended verbatim (more sections or keys).
inline std::string self_bias_text(double vdd, double idss, double vp, double rs, double rd, const std::string& extra = "") {
  return "topology = \"common-source\"\n[supply]\nvolts = " + num(vdd) + "\n[jfet]\nidss = " +
         num(idss) + "\nvp = " + num(vp) + "\nis = 0\n[gate]\ncoupling_cap = \"100n\"\nresistor = \"1M\"\n" +
         "[drain]\nresistor = " + num(rd) + "\n[source]\nresistor = " + num(rs) + "\n" + extra;
}

inline model::stage stage_from(const std::string& text) { return model::parse_stage(text, "test.toml"); }

}  // namespace pinchoff::test
