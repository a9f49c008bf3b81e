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

/// A two-stage chain of self-biased common-source stages (square law: is = 0, lambda = 0)
/// on one supply behind `rsup` (0: none), AC-coupled through a volume pot at half rotation:
/// no DC passes between the stages, so each biases as a single stage on the shared rail.
inline std::string two_stage_text(double vdd, double rsup, double idss1, double vp1, double rs1, double rd1, double idss2,
                                  double vp2, double rs2, double rd2) {
  auto stage = [](double idss, double vp, double rs, double rd, const std::string& between) {
    return "[[stage]]\n" + between + "[stage.jfet]\nidss = " + num(idss) + "\nvp = " + num(vp) +
           "\nis = 0\n[stage.gate]\ncoupling_cap = \"100n\"\nresistor = \"1M\"\n[stage.drain]\nresistor = " + num(rd) +
           "\n[stage.source]\nresistor = " + num(rs) + "\n[stage.output]\ncoupling_cap = \"1u\"\n";
  };
  return "name = \"two stages\"\n[supply]\nvolts = " + num(vdd) + (rsup > 0 ? "\nresistance = " + num(rsup) : std::string()) +
         "\n[output]\nload = \"100k\"\n" + stage(idss1, vp1, rs1, rd1, "") +
         stage(idss2, vp2, rs2, rd2, "between = [ { pot = \"100k\", position = 0.5 } ]\n");
}

inline model::stage stage_from(const std::string& text) { return model::parse_stage(text, "test.toml"); }

}  // namespace pinchoff::test
