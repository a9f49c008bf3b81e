// The catalogue of bad input: every wrong thing a user can give each command, run in-process
// through the command line. Each row says what is given, the exit status (2: bad input or
// usage) and the words the message must hold: file, line and column for stage files, line
// and column for CSV, the sample position for audio, the option for option values. Every
// row also checks that nothing reached standard output and that no file (finished or
// temporary) was left in the working folder. Adding an error to a command means adding a
// row here.
#include <doctest/doctest.h>

#include <sys/stat.h>
#include <unistd.h>

#include <array>
#include <cstdint>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <set>
#include <sstream>
#include <string>
#include <vector>

#include "cli/app.hpp"
#include "base/error.hpp"
#include "base/units.hpp"
#include "cli/option_text.hpp"
#include "support/cli_runner.hpp"
#include "support/patch_float.hpp"
#include "support/scratch_dir.hpp"

namespace test_bad_input {

namespace fs = std::filesystem;
using pinchoff::testing::scratch_dir;

namespace {

using outcome = pinchoff::testing::cli_result;
using pinchoff::testing::run_cli;

void write(const fs::path& p, std::string_view bytes) {
  std::ofstream f(p, std::ios::binary);
  f.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
}

std::set<std::string> listing(const fs::path& dir) {
  std::set<std::string> names;
  for (const auto& e : fs::recursive_directory_iterator(dir)) names.insert(e.path().lexically_relative(dir).string());
  return names;
}

// A valid stage of our own (common practice values for a 9 V common-source booster); the
// line numbers of its keys are what the rows below expect.
constexpr std::string_view good_stage =
    "name = \"catalogue stage\"\n"  // 1
    "[supply]\n"                   // 2
    "volts = 9\n"                  // 3
    "[jfet]\n"                     // 4
    "idss = \"5m\"\n"              // 5
    "vp = -1.8\n"                  // 6
    "[gate]\n"                     // 7
    "coupling_cap = \"100n\"\n"    // 8
    "resistor = \"1M\"\n"          // 9
    "[drain]\n"                    // 10
    "resistor = \"3.3k\"\n"        // 11
    "[source]\n"                   // 12
    "resistor = \"680\"\n";        // 13

// sources: a capsule stage of our own (common practice values for a capsule's impedance
// converter); the line numbers are what the rows below expect.
constexpr std::string_view capsule_stage =
    "name = \"catalogue capsule\"\n"     // 1
    "topology = \"source-follower\"\n"   // 2
    "[supply]\n"                         // 3
    "volts = 24\n"                       // 4
    "[jfet]\n"                           // 5
    "idss = \"6m\"\n"                    // 6
    "vp = -1.5\n"                        // 7
    "[signal]\n"                         // 8
    "kind = \"capsule\"\n"               // 9
    "capacitance = \"50p\"\n"            // 10
    "sensitivity = \"12m\"\n"            // 11
    "[gate]\n"                           // 12
    "resistor = \"1G\"\n"                // 13
    "[source]\n"                         // 14
    "resistor = \"2.2k\"\n";             // 15

// pickup source: a single-coil-like pickup with 3 m of cable into a buffer (common practice
// values: 2.5 H, 6 kΩ, 100 pF a metre); the line numbers are what the rows below expect.
constexpr std::string_view pickup_stage =
    "name = \"catalogue pickup\"\n"      // 1
    "topology = \"source-follower\"\n"   // 2
    "[supply]\n"                         // 3
    "volts = 9\n"                        // 4
    "[jfet]\n"                           // 5
    "idss = \"6m\"\n"                    // 6
    "vp = -2\n"                          // 7
    "[signal]\n"                         // 8
    "kind = \"pickup\"\n"                // 9
    "resistance = \"6k\"\n"              // 10
    "inductance = 2.5\n"                 // 11
    "capacitance = \"200p\"\n"           // 12
    "cable = 3\n"                        // 13
    "[gate]\n"                           // 14
    "coupling_cap = \"22n\"\n"           // 15
    "resistor = \"1M\"\n"                // 16
    "[source]\n"                         // 17
    "resistor = \"3.3k\"\n";             // 18

// A valid two-stage chain of our own (common practice values: two 9 V common-source stages
// with a volume pot between them); the line numbers are what the chain rows expect.
constexpr std::string_view good_chain =
    "name = \"catalogue chain\"\n"                            // 1
    "[supply]\n"                                               // 2
    "volts = 9\n"                                              // 3
    "[output]\n"                                               // 4
    "load = \"100k\"\n"                                        // 5
    "[[stage]]\n"                                              // 6
    "[stage.jfet]\n"                                           // 7
    "idss = \"5m\"\n"                                          // 8
    "vp = -1.8\n"                                              // 9
    "[stage.gate]\n"                                           // 10
    "coupling_cap = \"100n\"\n"                                // 11
    "resistor = \"1M\"\n"                                      // 12
    "[stage.drain]\n"                                          // 13
    "resistor = \"3.3k\"\n"                                    // 14
    "[stage.source]\n"                                         // 15
    "resistor = \"680\"\n"                                     // 16
    "[stage.output]\n"                                         // 17
    "coupling_cap = \"100n\"\n"                                // 18
    "[[stage]]\n"                                              // 19
    "between = [ { pot = \"100k\", position = 0.5 } ]\n"       // 20
    "[stage.jfet]\n"                                           // 21
    "idss = \"5m\"\n"                                          // 22
    "vp = -1.8\n"                                              // 23
    "[stage.gate]\n"                                           // 24
    "coupling_cap = \"100n\"\n"                                // 25
    "resistor = \"1M\"\n"                                      // 26
    "[stage.drain]\n"                                          // 27
    "resistor = \"3.3k\"\n"                                    // 28
    "[stage.source]\n"                                         // 29
    "resistor = \"680\"\n"                                     // 30
    "[stage.output]\n"                                         // 31
    "coupling_cap = \"1u\"\n";                                 // 32

std::string with_line(std::string_view stage, int line, std::string_view replacement) {
  std::istringstream in{std::string(stage)};
  std::string out, l;
  for (int n = 1; std::getline(in, l); ++n) out += (n == line ? std::string(replacement) : l) + "\n";
  return out;
}

// Binary garbage: NUL, bytes that are not UTF-8, and a stray quote.
constexpr char garbage_bytes[] = {'\x7f', 'E', 'L', 'F', '\0', '\xff', '\xfe', '"', '\x80', '\n', '\x01', '\0'};

struct fixtures {
  scratch_dir dir;
  std::string f(const std::string& name) const { return dir.file(name); }
  fixtures() {
    write(f("stage.toml"), good_stage);
    write(f("empty.toml"), "");
    write(f("blank.toml"), "  \n\t\n");
    write(f("garbage.bin"), std::string_view(garbage_bytes, sizeof garbage_bytes));
    fs::create_directory(f("folder"));
    write(f("unreadable.toml"), good_stage);
    fs::permissions(f("unreadable.toml"), fs::perms::none);
    write(f("typo.toml"), with_line(good_stage, 13, "resistr = \"680\""));
    write(f("badvalue.toml"), with_line(good_stage, 11, "resistor = \"3.3q\""));
    write(f("negative.toml"), with_line(good_stage, 11, "resistor = -3300"));
    write(f("wrongtype.toml"), with_line(good_stage, 3, "volts = true"));
    write(f("syntax.toml"), with_line(good_stage, 6, "vp = = -1.8"));
    write(f("topology.toml"), with_line(good_stage, 1, "topology = \"common-drain\""));
    write(f("polarity.toml"), with_line(good_stage, 5, "polarity = \"q\""));
    write(f("supplysign.toml"), with_line(good_stage, 3, "volts = -9"));
    write(f("vpsign.toml"), with_line(good_stage, 6, "vp = 1.8"));
    write(f("nojfet.toml"), "[supply]\nvolts = 9\n[drain]\nresistor = \"3k3\"\n");
    write(f("nodcpath.toml"), with_line(good_stage, 9, "# no gate resistor"));
    write(f("noclass.toml"), with_line(with_line(good_stage, 5, "class = \"no-such-class\""), 6, ""));
    write(f("bothforms.toml"), with_line(good_stage, 6, "vp = -1.8\nbeta = \"1m\""));
    // Nested 40,000 levels deep: the TOML parser recursed once a level and overflowed the
    // stack (a crash) before the depth was bounded ahead of it.
    {
      std::string header = "[a", key = "a", array = "x = ";
      for (int i = 0; i < 40000; ++i) header += ".a", key += ".b";
      array += std::string(40000, '[') + std::string(40000, ']');
      write(f("deep-header.toml"), header + "]\n");
      write(f("deep-key.toml"), key + " = 1\n");
      write(f("deep-array.toml"), "name = \"x\"\n" + array + "\n");
      fs::create_directory(f("deepclass"));
      write(f("deepclass/devices.toml"), "[general]\nidss = \"1m..2m\"\n" + key + " = 1\n");
      write(f("deepclass/stage.toml"), with_line(with_line(good_stage, 5, "class = \"general\""), 6, ""));
    }

    // ---- sources
    write(f("capsule.toml"), capsule_stage);
    write(f("capsule-coupled.toml"), with_line(capsule_stage, 13, "resistor = \"1G\"\ncoupling_cap = \"50p\""));
    write(f("capsule-nosens.toml"), with_line(capsule_stage, 11, ""));
    write(f("capsule-kind.toml"), with_line(capsule_stage, 9, "kind = \"ribbon\""));
    write(f("capsule-nokind.toml"), with_line(capsule_stage, 9, ""));
    write(f("capsule-impedance.toml"), with_line(capsule_stage, 11, "sensitivity = \"12m\"\nimpedance = \"10k\""));
    write(f("capsule-nogate.toml"), with_line(capsule_stage, 13, ""));
    write(f("capsule-sens.toml"), with_line(capsule_stage, 11, "sensitivity = 12"));
    write(f("capsule-big.toml"), with_line(capsule_stage, 10, "capacitance = \"10n\""));
    // ---- pickup source
    write(f("pickup.toml"), pickup_stage);
    write(f("pickup-noind.toml"), with_line(pickup_stage, 11, ""));
    write(f("pickup-nores.toml"), with_line(pickup_stage, 10, ""));
    write(f("pickup-negind.toml"), with_line(pickup_stage, 11, "inductance = -2.5"));
    write(f("pickup-bigind.toml"), with_line(pickup_stage, 11, "inductance = 1000"));
    write(f("pickup-cable-mm.toml"), with_line(pickup_stage, 13, "cable = \"3m\""));
    write(f("pickup-bigcap.toml"), with_line(pickup_stage, 12, "capacitance = \"10u\""));
    write(f("pickup-impedance.toml"), with_line(pickup_stage, 13, "cable = 3\nimpedance = \"10k\""));
    write(f("pickup-sens.toml"), with_line(pickup_stage, 13, "cable = 3\nsensitivity = \"12m\""));
    write(f("pickup-nokind.toml"), with_line(pickup_stage, 9, ""));
    write(f("pickup-per-metre.toml"), with_line(pickup_stage, 13, "cable_capacitance = \"80p\""));
    write(f("pickup-nocap.toml"), with_line(with_line(pickup_stage, 12, ""), 13, ""));
    write(f("capsule-coil.toml"), with_line(capsule_stage, 11, "sensitivity = \"12m\"\ninductance = 2.5"));
    write(f("capsule-hot.toml"), with_line(capsule_stage, 11, "sensitivity = \"30m\""));
    // ---- a gate's bootstrap and feedback resistor
    write(f("boot-cs.toml"), with_line(good_stage, 9, "resistor = \"1M\"\nbias_bottom = \"100k\"\nbootstrap = \"10u\""));
    write(f("boot-nofoot.toml"), with_line(capsule_stage, 13, "resistor = \"1G\"\nbootstrap = \"1u\""));
    write(f("boot-norg.toml"), with_line(capsule_stage, 13, "bias_top = \"1G\"\nbias_bottom = \"1G\"\nbootstrap = \"1u\""));
    write(f("boot-neg.toml"), with_line(capsule_stage, 13, "resistor = \"1G\"\nbias_bottom = \"1G\"\nbootstrap = -1"));
    write(f("fb-follower.toml"), with_line(capsule_stage, 13, "resistor = \"1G\"\nfeedback = \"10M\""));
    write(f("fb-huge.toml"), with_line(good_stage, 9, "resistor = \"1M\"\nfeedback = \"200G\""));
    write(f("phantom-name.toml"), with_line(capsule_stage, 4, "phantom = \"P36\""));
    write(f("phantom-p.toml"), with_line(with_line(good_stage, 3, "phantom = \"P48\""), 6, "vp = 1.8\npolarity = \"p\""));
    write(f("phantom-volts.toml"), with_line(capsule_stage, 4, "phantom = \"P48\"\nvolts = 48"));

    write(f("empty.csv"), "");
    write(f("header.csv"), "vgs_v,id_a\n");
    write(f("badcell.csv"), "vgs_v,id_a\n0,5m\n-0.5,two\n-1,1m\n");
    write(f("short.csv"), "vgs_v,id_a\n0,5m\n-0.5\n-1,1m\n");
    write(f("dup.csv"), "vgs_v,vgs_v\n0,1\n");
    write(f("emptycol.csv"), "vgs_v,,id_a\n");
    write(f("quote.csv"), "vgs_v,id_a\n\"0,5m\n");
    write(f("noid.csv"), "vgs_v,i\n0,1m\n");
    write(f("both.csv"), "vgs_v,rs_ohm,id_a\n0,1,1m\n");
    write(f("unknowncol.csv"), "vgs_v,id_a,temp_c\n0,5m,25\n");
    write(f("two.csv"), "vgs_v,id_a\n0,5m\n");
    write(f("mixed.csv"), "vgs_v,id_a\n0,5m\n-1,-1m\n-2,1m\n");
    write(f("zero.csv"), "vgs_v,id_a\n0,5m\n-1,1m\n-2,0\n");
    write(f("rising.csv"), "vgs_v,id_a\n0,1m\n-1,2m\n-2,3m\n");
    write(f("negrs.csv"), "rs_ohm,id_a\n-100,1m\n1k,0.5m\n10k,0.1m\n");
    // Current that hardly falls: the best square law has VP at infinity (found by fuzzing).
    write(f("flat.csv"), "rs_ohm,id_a\n100,3.6m\n1k,1.02m\n10k,1.46m\n");
    // ---- parts: a bag of parts in one CSV, the parts table, match
    write(f("bag.csv"), "part,vgs_v,id_a\nA,0,5m\nA,-0.5,2.8125m\nA,-1,1.25m\nB,0,4m\nB,-0.5,2.25m\nB,-1,1m\n");
    write(f("bag-emptyname.csv"), "part,vgs_v,id_a\nA,0,5m\n,-0.5,2.8m\n");
    write(f("bag-short.csv"), "part,vgs_v,id_a\nA,0,5m\nA,-0.5,2.8125m\nA,-1,1.25m\nB,0,4m\n");
    write(f("bag-allshort.csv"), "part,vgs_v,id_a\nA,0,5m\nB,0,4m\n");
    write(f("bag-vs-both.csv"), "part,rs_ohm,vs_v,id_a\nA,100,0.3,3m\n");
    write(f("bag-vs-nors.csv"), "part,vgs_v,vs_v\nA,0,0.3\n");
    write(f("bag-vs-zero.csv"), "part,rs_ohm,vs_v\nA,0,0.3\nA,1k,1\n");
    write(f("parts-twice.csv"), "part,idss_a,vp_v\nA,5m,-2\nA,4m,-1.5\n");
    write(f("parts-sign.csv"), "part,idss_a,vp_v\nA,5m,2\n");
    write(f("parts-range.csv"), "part,idss_a,vp_v\nA,5,-2\n");
    write(f("parts-nopart.csv"), "idss_a,vp_v\n5m,-2\n");
    write(f("parts-unknown.csv"), "part,idss_a,vp_v,colour\nA,5m,-2,3\n");
    write(f("parts-mixed.csv"), "part,idss_a,vp_v\nA,5m,-2\nB,-5m,2\n");
    write(f("parts-pch.csv"), "part,idss_a,vp_v\nA,-5m,2\n");
    write(f("idssvds-beta.toml"), with_line(with_line(good_stage, 6, "vto = -1.8"), 5, "beta = 0.001\nidss_vds = 10"));

    // ---- Sizes, special files and the ranges of values (the readers' bounds)
    write(f("huge.toml"), std::string(good_stage) + "# " + std::string(std::size_t{1} << 20, 'x') + "\n");
    write(f("huge.csv"), "vgs_v,id_a\n" + std::string(std::size_t{16} << 20, '#') + "\n");
    ::mkfifo(f("nowriter.toml").c_str(), 0600);  // a FIFO no program writes to
    fs::create_directory(f("hugeclass"));
    write(f("hugeclass/devices.toml"), "[general]\nidss = \"1m..2m\"\n# " + std::string(std::size_t{1} << 20, 'x') + "\n");
    write(f("hugeclass/stage.toml"), with_line(with_line(good_stage, 5, "class = \"general\""), 6, ""));
    fs::create_directory(f("wildclass"));
    write(f("wildclass/devices.toml"),
          "[general]\nidss = \"1m..8m\"\nvp = \"-0.5..-3\"\ntypical_idss = 1e300\ntypical_vp = -1.5\n");
    write(f("wildclass/stage.toml"), with_line(with_line(good_stage, 5, "class = \"general\""), 6, ""));
    write(f("emptyclass.toml"), with_line(with_line(good_stage, 5, "class = \"\""), 6, ""));
    write(f("bigint.toml"), with_line(good_stage, 11, "resistor = 9007199254740993"));  // above 2^53: once read as 0
    write(f("denormal.toml"), with_line(good_stage, 11, "resistor = 1e-320"));
    write(f("coldstage.toml"), with_line(good_stage, 1, "temperature = 1e-300"));
    // temperature: a part's own coefficients out of range or of the wrong sign
    write(f("tc-drift-big.toml"), with_line(good_stage, 6, "vp = -1.8\nvp_drift = \"-20m\""));
    write(f("tc-drift-sign.toml"), with_line(good_stage, 6, "vp = -1.8\nvp_drift = \"2.2mV/K\""));
    write(f("tc-drift-unit.toml"), with_line(good_stage, 6, "vp = -1.8\nvp_drift = \"-2.2mV/Pa\""));
    write(f("tc-exp-sign.toml"), with_line(good_stage, 6, "vp = -1.8\nbeta_exponent = 1.5"));
    write(f("tc-exp-big.toml"), with_line(good_stage, 6, "vp = -1.8\nbeta_exponent = -4"));
    write(f("tc-chain.toml"), with_line(good_chain, 23, "vp = -1.8\nvp_drift = \"5m\""));
    fs::create_directory(f("tcclass"));
    write(f("tcclass/devices.toml"),
          "[general]\nidss = \"1m..8m\"\nvp = \"-0.5..-3\"\ntypical_idss = \"4m\"\ntypical_vp = -1.5\nvp_drift = \"3m\"\n");
    write(f("tcclass/stage.toml"), with_line(with_line(good_stage, 5, "class = \"general\""), 6, ""));
    write(f("hugebeta.toml"), with_line(with_line(good_stage, 5, "beta = 1e300"), 6, "vto = -1.8"));
    write(f("tinysupply.toml"), with_line(good_stage, 3, "volts = \"4.9e-324\""));
    write(f("hugestring.toml"), with_line(good_stage, 11, "resistor = \"1e400\""));

    // Recordings, written by the project's own tone writer.
    REQUIRE(run_cli({"tone", "--rate", "8000", "--seconds", "0.5", f("rec.wav")}).status == 0);
    REQUIRE(run_cli({"tone", "--rate", "8000", "--seconds", "0.5", "--format", "float", f("float.wav")}).status == 0);
    REQUIRE(run_cli({"tone", "--rate", "8000", "--seconds", "0.5", "--level", "-200", "--no-dither", "--format", "wav16",
                     f("silent.wav")})
                .status == 0);
    REQUIRE(run_cli({"tone", "--rate", "48000", "--seconds", "0.2", f("rec48.wav")}).status == 0);
    REQUIRE(run_cli({"tone", "--rate", "48000", "--seconds", "1", f("rec1s.wav")}).status == 0);
    REQUIRE(run_cli({"tone", "--rate", "48000", "--seconds", "0.2", "--format", "float", f("float48.wav")}).status == 0);
    REQUIRE(run_cli({"tone", "--rate", "8000", "--steps", "-30..0:10", "--step-seconds", "0.5", f("stair.wav")}).status == 0);
    REQUIRE(run_cli({"tone", "--rate", "8000", "--sweep", "20..2k", "--seconds", "1", f("sweep8k.wav")}).status == 0);
    REQUIRE(run_cli({"tone", "--rate", "8000", "--seconds", "0.3", f("short8k.wav")}).status == 0);
    REQUIRE(run_cli({"tone", "--rate", "8000", "--seconds", "1.5", "--level", "-200", "--no-dither", "--format", "wav16",
                     f("silent15.wav")})
                .status == 0);
    REQUIRE(run_cli({"tone", "--rate", "8000", "--seconds", "263", "--format", "wav16", f("long8k.wav")}).status == 0);
    write(f("empty.wav"), "");
    {
      // A WAV header (PCM, mono, 48 kHz, 16-bit) whose data chunk holds no frames.
      std::string h = "RIFF";
      auto le = [&h](std::uint32_t v, int bytes) {
        for (int k = 0; k < bytes; ++k) h.push_back(static_cast<char>((v >> (8 * k)) & 0xffu));
      };
      le(36, 4);
      h += "WAVEfmt ";
      le(16, 4), le(1, 2), le(1, 2), le(48000, 4), le(96000, 4), le(2, 2), le(16, 2);
      h += "data";
      le(0, 4);
      write(f("noframes.wav"), h);
    }
    {
      std::ifstream in(f("rec.wav"), std::ios::binary);
      std::string bytes(std::istreambuf_iterator<char>(in), {});
      write(f("truncated.wav"), std::string_view(bytes).substr(0, bytes.size() / 2));
    }
    // A NaN at frame 1000 of the float recording; an infinity at frame 4800 (0.1 s) of the
    // 48 kHz one.
    pinchoff::testing::copy_with_float_sample(f("float.wav"), f("nan.wav"), 1000, 0x7fc00000u);
    pinchoff::testing::copy_with_float_sample(f("float48.wav"), f("inf48.wav"), 4800, 0x7f800000u);
    fs::create_directory(f("made"));
    write(f("made/taken.wav"), "x");
    write(f("made/dry.wav"), "x");
    // A second stage file whose name matches the first: both would render to stage.wav.
    fs::create_directory(f("other"));
    write(f("other/stage.toml"), good_stage);
    write(f("second.toml"), good_stage);
    write(f("h-vd.svg"), good_stage);  // a stage file that a histogram name would match
    // Outputs against inputs: a stage that reads the class file beside it, a link and a
    // hard link to the stage file, and a stage named as render's dry output is.
    fs::create_directory(f("cls"));
    write(f("cls/devices.toml"),
          "[general]\nidss = \"2m..8m\"\nvp = \"-1..-3\"\ntypical_idss = \"5m\"\ntypical_vp = -1.8\n");
    write(f("cls/stage.toml"), with_line(with_line(good_stage, 5, "class = \"general\""), 6, ""));
    fs::create_symlink(f("stage.toml"), f("link-to-stage.svg"));
    fs::create_hard_link(f("stage.toml"), f("hard-stage.svg"));
    write(f("dry.toml"), good_stage);

    // ---- chains: the [[stage]] reader's refusals
    write(f("chain.toml"), good_chain);
    write(f("chain-jfet-top.toml"), with_line(good_chain, 5, "load = \"100k\"\n[jfet]\nidss = \"5m\""));  // [jfet] at 6
    write(f("chain-topology-top.toml"), with_line(good_chain, 1, "topology = \"common-source\""));
    write(f("chain-between-first.toml"), with_line(good_chain, 6, "[[stage]]\nbetween = [ { series = \"1k\" } ]"));  // 7
    {
      std::string seven(good_chain);
      const std::string second(good_chain.substr(good_chain.find("[[stage]]\nbetween")));
      for (int k = 0; k < 5; ++k) seven += second;  // stage 7 begins at line 19 + 5 * 14 = 89
      write(f("chain-seven.toml"), seven);
    }
    write(f("chain-one.toml"), good_chain.substr(0, good_chain.find("[[stage]]\nbetween")));
    write(f("chain-not-tables.toml"), "name = \"x\"\nstage = [ 1, 2 ]\n[supply]\nvolts = 9\n");
    write(f("chain-nogate-dc.toml"), with_line(good_chain, 26, "# no gate resistor"));
    write(f("chain-floating.toml"), with_line(good_chain, 20, "between = [ { series_cap = \"100n\" } ]"));
    write(f("chain-two-kinds.toml"), with_line(good_chain, 20, "between = [ { series = \"1k\", shunt = \"1k\" } ]"));
    write(f("chain-no-kind.toml"), with_line(good_chain, 20, "between = [ { taper = \"log\" } ]"));
    write(f("chain-pot-no-position.toml"), with_line(good_chain, 20, "between = [ { pot = \"100k\" } ]"));
    write(f("chain-position-range.toml"), with_line(good_chain, 20, "between = [ { pot = \"100k\", position = 1.5 } ]"));
    write(f("chain-bad-taper.toml"), with_line(good_chain, 20, "between = [ { pot = \"100k\", position = 0.5, taper = \"steep\" } ]"));
    write(f("chain-position-series.toml"), with_line(good_chain, 20, "between = [ { series = \"1k\", position = 0.5 } ]"));
    write(f("chain-between-unknown.toml"), with_line(good_chain, 20, "between = [ { serie = \"1k\" } ]"));
    write(f("chain-between-string.toml"), with_line(good_chain, 20, "between = \"1k\""));
    write(f("chain-between-number.toml"), with_line(good_chain, 20, "between = [ 1000 ]"));
    write(f("chain-between-single.toml"), with_line(good_stage, 1, "between = [ { series = \"1k\" } ]"));
    write(f("chain-rail-single.toml"), std::string(good_stage) + "[rail]\nresistance = \"100\"\n");
    write(f("chain-stage-load.toml"), with_line(good_chain, 32, "coupling_cap = \"1u\"\nload = \"10k\""));  // load at 33
    write(f("chain-top-coupling.toml"), with_line(good_chain, 5, "load = \"100k\"\ncoupling_cap = \"1u\""));  // at 6
    write(f("chain-no-load.toml"), with_line(good_chain, 5, ""));
    write(f("chain-stage-supply.toml"), with_line(good_chain, 31, "[stage.supply]\nvolts = 9\n[stage.output]"));  // 31
    write(f("chain-stage-temperature.toml"), with_line(good_chain, 20, "temperature = 300"));
    write(f("chain-stage-unknown.toml"), with_line(good_chain, 27, "[stage.drian]"));
    write(f("chain-no-jfet.toml"), with_line(with_line(with_line(good_chain, 21, "# no jfet"), 22, ""), 23, ""));
    write(f("chain-mixed-polarity.toml"), with_line(good_chain, 23, "vp = 1.8\npolarity = \"p\""));
    write(f("chain-rail-cap.toml"), with_line(good_chain, 20, "between = [ { pot = \"100k\", position = 0.5 } ]\n[stage.rail]\ncapacitance = \"47u\""));

    // ---- audio inputs that lie or cannot be read twice (render, measure)
    {
      // 16-bit PCM WAV headers of our own: a rate, a channel count and frames of one code.
      auto wav = [](std::uint32_t rate, std::uint16_t channels, std::uint32_t frames, std::int16_t code) {
        std::string h = "RIFF";
        auto le = [&h](std::uint32_t v, int bytes) {
          for (int k = 0; k < bytes; ++k) h.push_back(static_cast<char>((v >> (8 * k)) & 0xffu));
        };
        const std::uint32_t data = frames * channels * 2u;
        le(36 + data, 4);
        h += "WAVEfmt ";
        le(16, 4), le(1, 2), le(channels, 2), le(rate, 4), le(rate * channels * 2u, 4), le(channels * 2u, 2), le(16, 2);
        h += "data";
        le(data, 4);
        for (std::uint32_t i = 0; i < frames * channels; ++i) le(static_cast<std::uint16_t>(code), 2);
        return h;
      };
      write(f("lying-rate.wav"), wav(2000000000u, 1, 48000, 0));  // 2 GHz over 48,000 frames
      write(f("channels65.wav"), wav(48000, 65, 480, 0));
      write(f("dc-only.wav"), wav(48000, 1, 48000, 22937));       // 0.7 of full scale, no tone
      REQUIRE(::mkfifo(f("pipe.wav").c_str(), 0600) == 0);
    }
  }
};

// A row is constant data (no strings built): the table compiles to a block of pointers.
// As a vector of vectors of strings, its hundreds of initialisers in one function took the
// clang sanitizer build 200 CPU-seconds and more to compile.
struct row {
  const char* given;                     // what is wrong, in words
  std::array<const char*, 14> args;      // "@name" stands for the fixture file `name`; unused ones null
  std::array<const char*, 8> words;      // the message must contain each ("@name" as above)
  int status{2};
  bool needs_permissions{false};   // meaningless where permission bits do not stop reads (root)
  bool no_data_files{false};       // run as a program that found no class file beside itself
};

std::string expand(const fixtures& fx, const std::string& s) {
  if (s.size() > 1 && s[0] == '@') return fx.f(s.substr(1));
  return s;
}

}  // namespace

TEST_CASE("every bad input gets exit status 2, a message that says what and where, no output and no file") {
  fixtures fx;
  static constexpr row rows[] = {
      // ---- bias: the stage file
      {"empty stage file", {"bias", "@empty.toml"}, {"@empty.toml", "the file is empty"}},
      {"stage file of blank lines", {"bias", "@blank.toml"}, {"@blank.toml", "the file is empty"}},
      {"binary garbage as a stage file", {"bias", "@garbage.bin"}, {"@garbage.bin:1:"}},
      {"a folder where the stage file goes", {"bias", "@folder"}, {"@folder", "is a directory"}},
      {"stage file that does not exist", {"bias", "@missing.toml"}, {"@missing.toml", "No such file"}},
      {"stage file without read permission", {"bias", "@unreadable.toml"}, {"@unreadable.toml", "Permission denied"}, 2, true},
      {"table header nested 40,000 levels", {"bias", "@deep-header.toml"}, {"@deep-header.toml:1:", "nested more than 64 levels"}},
      {"dotted key nested 40,000 levels", {"bias", "@deep-key.toml"}, {"@deep-key.toml:1:", "nested more than 64 levels"}},
      {"arrays nested 40,000 levels", {"bias", "@deep-array.toml"}, {"@deep-array.toml:2:", "nested more than 64 levels"}},
      {"class file nested 40,000 levels", {"bias", "@deepclass/stage.toml"}, {"@deepclass/stage.toml:5:", "devices.toml:3:", "nested more than 64 levels"}},
      {"misspelt key", {"bias", "@typo.toml"}, {"@typo.toml:13:1:", "unknown key 'resistr' in [source]", "did you mean 'resistor'"}},
      {"value that is not a number", {"bias", "@badvalue.toml"}, {"@badvalue.toml:11:12:", "drain.resistor", "'3.3q'", "resistance"}},
      {"negative resistance", {"bias", "@negative.toml"}, {"@negative.toml:11:12:", "drain.resistor must not be negative"}},
      {"boolean where a number goes", {"bias", "@wrongtype.toml"}, {"@wrongtype.toml:3:9:", "supply.volts", "a boolean"}},
      {"TOML syntax error", {"bias", "@syntax.toml"}, {"@syntax.toml:6:"}},
      {"unknown topology", {"bias", "@topology.toml"}, {"@topology.toml:1:", "common-source", "source-follower"}},
      {"unknown polarity", {"bias", "@polarity.toml"}, {"@polarity.toml:5:", "jfet.polarity", "\"n\" or \"p\""}},
      {"negative supply for an n-channel stage", {"bias", "@supplysign.toml"}, {"@supplysign.toml:3:9:", "supply.volts must be positive"}},
      {"positive pinch-off for an n-channel part", {"bias", "@vpsign.toml"}, {"@vpsign.toml:6:6:", "jfet.vp must be negative"}},
      {"no [jfet] section", {"bias", "@nojfet.toml"}, {"@nojfet.toml", "[jfet]"}},
      {"capacitor-coupled gate with no DC path", {"bias", "@nodcpath.toml"}, {"@nodcpath.toml", "no DC path"}},
      {"unknown device class", {"bias", "@noclass.toml"}, {"@noclass.toml:5:", "unknown device class 'no-such-class'"}},
      {"a class named where no class file is found",
       {"bias", "@noclass.toml"},
       {"@noclass.toml:5:", "no device-class file", "PINCHOFF_DEVICES"},
       2,
       false,
       true},
      {"both device forms", {"bias", "@bothforms.toml"}, {"@bothforms.toml:4:", "either idss and vp, or beta and vto"}},
      // ---- bias: --set and options
      {"--set without =", {"bias", "@stage.toml", "--set", "drain.resistor"}, {"--set 'drain.resistor'", "KEY=VALUE"}},
      {"--set of an unknown key", {"bias", "@stage.toml", "--set", "drain.resistr=1k"}, {"--set drain.resistr", "did you mean 'resistor'"}},
      {"--set of a negative value", {"bias", "@stage.toml", "--set", "drain.resistor=-1"}, {"--set drain.resistor", "must not be negative"}},
      {"--set into a value, not a section", {"bias", "@stage.toml", "--set", "name.x=1"}, {"--set name.x", "'name' is not a section"}},
      {"--set with a unit symbol that does not fit", {"bias", "@stage.toml", "--set", "gate.coupling_cap=100nH"}, {"--set gate.coupling_cap", "'100nH'", "capacitance"}},
      {"--at that is not a frequency", {"bias", "@stage.toml", "--at", "10dBu"}, {"--at", "'10dBu'", "frequency"}},
      {"--at of 0 Hz", {"bias", "@stage.toml", "--at", "0"}, {"--at", "above 0 Hz"}},
      {"--at above what the analysis covers", {"bias", "@stage.toml", "--at", "1e30"}, {"--at 1e30", "1.00 GHz"}},
      {"unknown option", {"bias", "@stage.toml", "--frequency", "1k"}, {"--frequency"}},
      {"unknown command", {"bais", "@stage.toml"}, {"unknown command 'bais'", "bias"}},
      // ---- tune
      {"--target without a value", {"tune", "@stage.toml", "--target", "vd"}, {"--target 'vd'", "give a value"}},
      {"--target of an unknown quantity", {"tune", "@stage.toml", "--target", "vq=3"}, {"--target 'vq=3'", "vd=VOLTS"}},
      {"--target value that is not a voltage", {"tune", "@stage.toml", "--target", "vd=abc"}, {"--target vd", "'abc'", "voltage"}},
      {"--target out of reach", {"tune", "@stage.toml", "--target", "vd=12"}, {"out of reach", "source.resistor from"}},
      {"--adjust of a key that is not a resistor", {"tune", "@stage.toml", "--target", "vd=4.5", "--adjust", "jfet.idss"}, {"--adjust: 'jfet.idss' is not an adjustable resistor", "choose one of"}},
      {"--adjust of a divider the stage lacks", {"tune", "@stage.toml", "--target", "vd=4.5", "--adjust", "gate.bias_top"}, {"--adjust: ", "no bias divider", "gate.bias_top"}},
      {"unknown --series", {"tune", "@stage.toml", "--target", "vd=4.5", "--series", "E7"}, {"'E7'", "E12, E24 or E96"}},
      {"tune without --target", {"tune", "@stage.toml"}, {"--target is required"}},
      {"tune on an empty stage file", {"tune", "@empty.toml", "--target", "vd=4.5"}, {"@empty.toml", "empty"}},
      // ---- response
      {"--to below --from", {"response", "@stage.toml", "--from", "1k", "--to", "10"}, {"--to must be above --from"}},
      {"--to above what the analysis covers", {"response", "@stage.toml", "--to", "2G"}, {"--to 2G", "1.00 mHz to 1.00 GHz"}},
      {"--from below what the analysis covers", {"response", "@stage.toml", "--from", "1e-300"}, {"--from 1e-300", "1.00 mHz"}},
      {"--from that is not a frequency", {"response", "@stage.toml", "--from", "ten"}, {"--from", "'ten'"}},
      {"--json with --csv", {"response", "@stage.toml", "--json", "--csv"}, {"--json and --csv"}},
      {"--points below 2", {"response", "@stage.toml", "--points", "1"}, {"--points", "not in range"}},
      {"--plot into a folder that does not exist", {"response", "@stage.toml", "--plot", "@nofolder/r.svg"}, {"@nofolder/r.svg", "does not exist"}},
      {"--plot onto a folder", {"response", "@stage.toml", "--plot", "@folder"}, {"@folder", "it is a folder"}},
      {"--plot onto the stage file itself", {"response", "@stage.toml", "--plot", "@stage.toml"}, {"@stage.toml", "it is the input file"}},
      {"response on binary garbage", {"response", "@garbage.bin"}, {"@garbage.bin:1:"}},
      // ---- noise
      {"noise --band that is not a range of frequencies", {"noise", "@stage.toml", "--band", "20..loud"}, {"--band", "'loud'"}},
      {"noise --band with an open end", {"noise", "@stage.toml", "--band", "20.."}, {"--band", "needs both ends"}},
      {"noise --band reversed", {"noise", "@stage.toml", "--band", "20k..20"}, {"--band", "minimum above its maximum"}},
      {"noise --band of one frequency", {"noise", "@stage.toml", "--band", "1k"}, {"--band", "the noise band must end above where it starts"}},
      {"noise --band from 0 Hz", {"noise", "@stage.toml", "--band", "0..20k"}, {"--band", "the noise band must be positive frequencies"}},
      {"noise --band beyond the small-signal model", {"noise", "@stage.toml", "--band", "20..1e12"}, {"--band", "must lie within", "1.00 GHz"}},
      {"noise --to below --from", {"noise", "@stage.toml", "--from", "1k", "--to", "10"}, {"--to must be above --from"}},
      {"noise --json with --csv", {"noise", "@stage.toml", "--json", "--csv"}, {"--json and --csv"}},
      {"noise --points below 2", {"noise", "@stage.toml", "--points", "1"}, {"--points", "not in range"}},
      {"noise --level that is not a level", {"noise", "@stage.toml", "--level", "loud"}, {"--level", "'loud'"}},
      {"noise --level of 0 V", {"noise", "@stage.toml", "--level", "0V"}, {"--level", "above 0 V"}},
      {"noise --level as a sound pressure without a capsule", {"noise", "@stage.toml", "--level", "94dBSPL"}, {"--level", "needs a capsule source"}},
      {"noise --plot onto the stage file itself", {"noise", "@stage.toml", "--plot", "@stage.toml"}, {"@stage.toml", "it is the input file"}},
      {"a flicker exponent of 5", {"noise", "@stage.toml", "--set", "jfet.flicker_exponent=5"}, {"--set jfet.flicker_exponent", "lies outside", "flicker exponents"}},
      {"a flicker coefficient of 1", {"noise", "@stage.toml", "--set", "jfet.flicker_coefficient=1"}, {"--set jfet.flicker_coefficient", "lies outside", "flicker coefficients"}},
      {"a gate leakage of an ampere", {"noise", "@stage.toml", "--set", "jfet.gate_leakage=1"}, {"--set jfet.gate_leakage", "lies outside", "gate leakage"}},
      {"a negative gate leakage", {"bias", "@stage.toml", "--set", "jfet.gate_leakage=-1n"}, {"--set jfet.gate_leakage", "must not be negative"}},
      // ---- spread
      {"--idss range with min above max", {"spread", "@stage.toml", "--idss", "8m..2m", "--runs", "10"}, {"--idss", "'8m..2m'", "minimum above its maximum"}},
      {"--idss range with one end missing", {"spread", "@stage.toml", "--idss", "2m..", "--runs", "10"}, {"--idss", "needs both ends"}},
      {"--idss range through zero", {"spread", "@stage.toml", "--idss", "0..2m", "--runs", "10"}, {"--idss", "above 0 A"}},
      {"--idss end that is not a current", {"spread", "@stage.toml", "--idss", "2m..x", "--runs", "10"}, {"--idss", "'x'", "current"}},
      {"--vp of the wrong sign", {"spread", "@stage.toml", "--vp", "1..2", "--runs", "10"}, {"--vp", "negative for an n-channel part"}},
      {"--supply of the wrong sign", {"spread", "@stage.toml", "--supply", "-9..-7", "--runs", "10"}, {"--supply", "positive"}},
      {"--tolerance above 100 %", {"spread", "@stage.toml", "--tolerance", "120%", "--runs", "10"}, {"--tolerance", "'120%'", "outside 0 to 100 %"}},
      {"--tolerance above 50 %", {"spread", "@stage.toml", "--tolerance", "60%", "--runs", "10"}, {"--tolerance: ", "must be below 50 %", "got 60.0 %"}},
      {"--tolerance that is not a number", {"spread", "@stage.toml", "--tolerance", "five", "--runs", "10"}, {"--tolerance", "'five'"}},
      {"--correlation outside -1..1", {"spread", "@stage.toml", "--correlation", "2", "--runs", "10"}, {"--correlation: ", "-1 to 1", "got 2"}},
      {"--require range with min above max", {"spread", "@stage.toml", "--require", "vd=5..3", "--runs", "10"}, {"--require vd", "minimum above its maximum"}},
      {"--require of an unknown quantity", {"spread", "@stage.toml", "--require", "vx=1..2", "--runs", "10"}, {"--require 'vx=1..2'", "QUANTITY"}},
      {"--require without a range", {"spread", "@stage.toml", "--require", "vd=3", "--runs", "10"}, {"--require vd", "LO..HI"}},
      {"--runs of 0", {"spread", "@stage.toml", "--runs", "0"}, {"--runs: ", "1 to 100000", "got 0"}},
      {"--json with --csv", {"spread", "@stage.toml", "--json", "--csv", "--runs", "10"}, {"--json and --csv"}},
      {"unknown --distribution", {"spread", "@stage.toml", "--distribution", "cauchy", "--runs", "10"}, {"--distribution", "cauchy"}},
      {"--plot into a folder that does not exist", {"spread", "@stage.toml", "--plot", "@nofolder/s.svg", "--runs", "10"}, {"nofolder", "does not exist"}},
      // ---- fit: the bench CSV
      {"empty CSV", {"fit", "@empty.csv"}, {"@empty.csv", "empty table"}},
      {"CSV with a header and no rows", {"fit", "@header.csv"}, {"@header.csv", "no readings"}},
      {"binary garbage as CSV", {"fit", "@garbage.bin"}, {"@garbage.bin", "not a text file"}},
      {"a folder where the CSV goes", {"fit", "@folder"}, {"@folder", "is a directory"}},
      {"CSV that does not exist", {"fit", "@missing.csv"}, {"@missing.csv", "No such file"}},
      {"cell that is not a number", {"fit", "@badcell.csv"}, {"@badcell.csv:3:", "column 'id_a' (column 2)", "'two'"}},
      {"row with a cell missing", {"fit", "@short.csv"}, {"@short.csv:3:", "row has 1 cell,", "header has 2"}},
      {"column named twice", {"fit", "@dup.csv"}, {"@dup.csv:1:", "'vgs_v' appears twice"}},
      {"empty column name", {"fit", "@emptycol.csv"}, {"@emptycol.csv:1:", "empty column name"}},
      {"unterminated quote", {"fit", "@quote.csv"}, {"@quote.csv:2:", "unterminated quote"}},
      {"no id_a column", {"fit", "@noid.csv"}, {"@noid.csv", "missing column 'id_a'"}},
      {"both vgs_v and rs_ohm", {"fit", "@both.csv"}, {"@both.csv", "exactly one of the columns"}},
      {"unknown column", {"fit", "@unknowncol.csv"}, {"@unknowncol.csv", "unknown column 'temp_c'"}},
      {"too few readings", {"fit", "@two.csv"}, {"@two.csv", "too few readings", "1 given"}},
      {"currents of both signs", {"fit", "@mixed.csv"}, {"@mixed.csv", "line 3", "opposite sign"}},
      {"a zero current", {"fit", "@zero.csv"}, {"@zero.csv", "line 4", "is zero"}},
      {"current rising as the gate goes negative", {"fit", "@rising.csv"}, {"@rising.csv", "cannot come from a square-law part"}},
      {"negative source resistor", {"fit", "@negrs.csv"}, {"@negrs.csv", "line 2", "rs_ohm must not be negative"}},
      {"current that hardly falls (VP runs to infinity)", {"fit", "@flat.csv"}, {"@flat.csv", "do not determine IDSS and VP"}},
      // ---- parts: a bag of parts in one CSV, the parts table, match
      {"a part's row with no name", {"fit", "@bag-emptyname.csv"}, {"@bag-emptyname.csv:3:", "'part' cell is empty"}},
      {"a bag none of whose parts can be fitted", {"fit", "@bag-allshort.csv"}, {"@bag-allshort.csv", "no part could be fitted", "part 'A' (lines 2-2)", "part 'B' (lines 3-3)", "too few readings"}},
      {"id_a beside vs_v", {"fit", "@bag-vs-both.csv"}, {"@bag-vs-both.csv", "'id_a' or the source voltage as 'vs_v'", "not both"}},
      {"vs_v without rs_ohm", {"fit", "@bag-vs-nors.csv"}, {"@bag-vs-nors.csv", "'vs_v'", "needs 'rs_ohm'"}},
      {"vs_v over a zero source resistor", {"fit", "@bag-vs-zero.csv"}, {"@bag-vs-zero.csv:2:", "rs_ohm must be above 0 beside vs_v"}},
      {"--csv with --json", {"fit", "@bag.csv", "--csv", "--json"}, {"--csv", "excludes", "--json"}},
      {"match: a part listed twice", {"match", "@parts-twice.csv"}, {"@parts-twice.csv:3:", "part 'A' is listed twice", "line 2"}},
      {"match: idss_a and vp_v of one sign", {"match", "@parts-sign.csv"}, {"@parts-sign.csv:2:", "opposite signs"}},
      {"match: an IDSS beyond every part", {"match", "@parts-range.csv"}, {"@parts-range.csv:2:", "idss_a", "lies outside"}},
      {"match: a parts table without names", {"match", "@parts-nopart.csv"}, {"@parts-nopart.csv", "needs the columns 'part', 'idss_a' and 'vp_v'"}},
      {"match: an unknown column in a parts table", {"match", "@parts-unknown.csv"}, {"@parts-unknown.csv", "unknown column 'colour'"}},
      {"match: parts of both polarities", {"match", "@parts-mixed.csv"}, {"part 'B' is p-channel", "one polarity"}},
      {"match: a bag none of whose parts can be fitted", {"match", "@bag-allshort.csv"}, {"@bag-allshort.csv", "no part could be fitted", "too few readings"}},
      {"match: --sets of 1", {"match", "@bag.csv", "--sets", "1"}, {"--sets: ", "2 to 16", "got 1"}},
      {"match: --by of something else", {"match", "@bag.csv", "--by", "gm"}, {"--by 'gm'", "idss,vp or vgs@CURRENT"}},
      {"match: --by vgs at no current", {"match", "@bag.csv", "--by", "vgs@0"}, {"--by vgs@0", "above 0"}},
      {"match: --by vgs at a current that is not one", {"match", "@bag.csv", "--by", "vgs@1mV"}, {"--by vgs@", "'1mV'", "current"}},
      {"match: --tolerance in percent for VGS", {"match", "@bag.csv", "--by", "vgs@1m", "--tolerance", "2%"}, {"--tolerance '2%'", "a voltage of VGS"}},
      {"match: --tolerance of 0 %", {"match", "@bag.csv", "--tolerance", "0%"}, {"--tolerance '0%'", "above 0 and below 100"}},
      {"match: --tolerance of two voltages", {"match", "@bag.csv", "--tolerance", "20mV,30mV"}, {"--tolerance '20mV,30mV'", "each tolerance once"}},
      {"match: --tolerance of three pieces", {"match", "@bag.csv", "--tolerance", "2%,20mV,x"}, {"--tolerance '2%,20mV,x'", "expected a percentage"}},
      {"match: a parts file that does not exist", {"match", "@missing.csv"}, {"@missing.csv", "No such file"}},
      {"idss_vds beside beta and vto", {"bias", "@idssvds-beta.toml"}, {"@idssvds-beta.toml:6:", "jfet.idss_vds", "no meaning beside beta"}},
      {"spread: --parts beside an IDSS range", {"spread", "@stage.toml", "--parts", "@bag.csv", "--idss", "2m..8m"}, {"--parts: ", "take the place of the IDSS and VP ranges"}},
      {"spread: --parts of the other polarity", {"spread", "@stage.toml", "--parts", "@parts-pch.csv"}, {"--parts: ", "part 'A' is p-channel"}},
      {"spread: --parts that does not exist", {"spread", "@stage.toml", "--parts", "@missing.csv"}, {"@missing.csv", "No such file"}},
      {"tune: --over-spread --parts whose part does not fit", {"tune", "@stage.toml", "--target", "vd=4.5", "--over-spread", "--parts", "@bag-short.csv"}, {"@bag-short.csv", "part 'B'", "too few readings"}},
      {"tune: --target gain without a value", {"tune", "@stage.toml", "--target", "gain"}, {"--target 'gain'", "give a value"}},
      {"tune: --target gain that is not a number", {"tune", "@stage.toml", "--target", "gain=loud"}, {"--target gain", "'loud'", "gain in dB"}},
      {"tune: --target gain out of reach", {"tune", "@stage.toml", "--target", "gain=60dB"}, {"gain = 60.00 dB (mid-band) is out of reach", "drain.resistor from"}},
      {"tune: two targets and one resistor", {"tune", "@stage.toml", "--target", "gain=20dB", "--target", "vd=4.5", "--adjust", "drain.resistor"}, {"--adjust and --target come in pairs", "2 --target but 1 --adjust"}},
      // ---- tone: the output file and the levels
      {"output folder that does not exist", {"tone", "@nofolder/t.wav"}, {"@nofolder/t.wav", "does not exist"}},
      {"output onto a folder", {"tone", "@folder"}, {"@folder", "it is a folder"}},
      {"output onto an existing file without --force", {"tone", "@rec.wav"}, {"@rec.wav", "exists", "--force"}},
      {"frequency above half the sample rate", {"tone", "--freq", "30k", "@t.wav"}, {"30.0 kHz", "half the sample rate", "24.0 kHz"}},
      {"frequency that is not one", {"tone", "--freq", "abc", "@t.wav"}, {"--freq", "'abc'"}},
      {"frequency of 0", {"tone", "--freq", "0", "@t.wav"}, {"--freq", "above 0 Hz"}},
      {"level in a unit tone does not take", {"tone", "--level", "-10dBu", "@t.wav"}, {"--level '-10dBu'", "dBFS"}},
      {"level above full scale", {"tone", "--level", "3", "@t.wav"}, {"3.00 dBFS", "above full scale"}},
      {"--steps without a step", {"tone", "--steps", "-40..0", "@t.wav"}, {"--steps '-40..0'", "FROM..TO:STEP"}},
      {"--steps with a zero step", {"tone", "--steps", "-40..0:0", "@t.wav"}, {"non-zero step"}},
      {"--steps above full scale", {"tone", "--steps", "-40..10:10", "@t.wav"}, {"above 0 dBFS"}},
      {"--steps too many", {"tone", "--steps", "-100..0:0.01", "@t.wav"}, {"10001 steps", "1000 at most"}},
      {"--steps that are not levels", {"tone", "--steps", "a..b:c", "@t.wav"}, {"--steps start 'a'"}},
      {"--level with --steps", {"tone", "--level", "-6", "--steps", "-10..0:5", "@t.wav"}, {"--level excludes --steps"}},
      {"zero length", {"tone", "--seconds", "0", "@t.wav"}, {"--seconds", "positive time"}},
      {"a length that would fill the disk", {"tone", "--seconds", "1e12", "@t.wav"}, {"--seconds", "longer than a test tone may be"}},
      {"more than a WAV file holds", {"tone", "--rate", "768000", "--channels", "64", "--seconds", "3000", "--format", "float", "@t.wav"}, {"at most 4 GiB", "flac"}},
      {"steps too short for their fades", {"tone", "--seconds", "0.01", "@t.wav"}, {"--seconds", "too short for fades"}},
      {"negative fade", {"tone", "--fade-ms", "-1", "@t.wav"}, {"--fade-ms", "zero or positive", "got -1.00 ms"}},
      {"sample rate of 0", {"tone", "--rate", "0", "@t.wav"}, {"sample rate must be positive"}},
      {"sample rate that is not whole", {"tone", "--rate", "44100.5", "@t.wav"}, {"--rate", "whole number of hertz", "44100.5"}},
      {"no channels", {"tone", "--channels", "0", "@t.wav"}, {"--channels", "channel count must be 1 to 64", "@t.wav", "got 0"}},
      {"too many channels", {"tone", "--channels", "65", "@t.wav"}, {"--channels", "channel count must be 1 to 64", "@t.wav", "got 65"}},
      {"unknown format", {"tone", "--format", "mp3", "@t.wav"}, {"'mp3'", "wav16, wav24"}},
      // ---- measure: the recording
      {"empty audio file", {"measure", "@empty.wav"}, {"@empty.wav", "empty"}},
      {"binary garbage as audio", {"measure", "@garbage.bin"}, {"@garbage.bin", "not recognised"}},
      {"a folder where the recording goes", {"measure", "@folder"}, {"@folder", "it is a folder"}},
      {"recording that does not exist", {"measure", "@missing.wav"}, {"@missing.wav", "No such file"}},
      {"truncated WAV", {"measure", "@truncated.wav"}, {"@truncated.wav", "truncated"}},
      {"WAV with no frames", {"measure", "@noframes.wav"}, {"@noframes.wav", "holds no audio"}},
      {"NaN sample in a float file", {"measure", "@nan.wav"}, {"@nan.wav", "frame 1000", "0.125 s", "channel 1", "NaN"}},
      {"silent recording", {"measure", "@silent.wav"}, {"@silent.wav", "no tone found"}},
      {"channel the file does not have", {"measure", "@rec.wav", "--channel", "2"}, {"@rec.wav", "1 channel", "--channel 2"}},
      {"--freq above half the sample rate", {"measure", "@rec.wav", "--freq", "5k"}, {"--freq 5k", "half the file's sample rate", "4.00 kHz"}},
      {"--freq that is not a frequency", {"measure", "@rec.wav", "--freq", "10dBu"}, {"--freq", "'10dBu'"}},
      {"--bandwidth that is not a frequency", {"measure", "@rec.wav", "--bandwidth", "abc"}, {"--bandwidth", "'abc'"}},
      {"--start beyond the end", {"measure", "@rec.wav", "--start", "10"}, {"--start", "beyond the end", "@rec.wav"}},
      {"negative --start", {"measure", "@rec.wav", "--start", "-1"}, {"must not be negative"}},
      {"too little to analyse", {"measure", "@rec.wav", "--start", "0.1", "--duration", "0.001"}, {"@rec.wav", "8 frames", "at least 64"}},
      {"--harmonics out of range", {"measure", "@rec.wav", "--harmonics", "1"}, {"--harmonics must be 2 to 100"}},
      {"unknown --window", {"measure", "@rec.wav", "--window", "hann"}, {"'hann'", "blackman-harris or flat-top"}},
      {"--plot into a folder that does not exist", {"measure", "@rec.wav", "--plot", "@nofolder/m.svg"}, {"@nofolder/m.svg", "does not exist"}},
      {"--plot onto the recording itself", {"measure", "@rec.wav", "--plot", "@rec.wav"}, {"@rec.wav", "it is the input file"}},
      // ---- sweep
      {"sweep on an empty stage file", {"sweep", "@empty.toml"}, {"@empty.toml", "the file is empty"}},
      {"sweep on binary garbage", {"sweep", "@garbage.bin"}, {"@garbage.bin:1:"}},
      {"--drive with --from", {"sweep", "@stage.toml", "--drive", "1V", "--from", "-10dBu"}, {"--drive and --from/--to: choose one"}},
      {"--drive of 0 V", {"sweep", "@stage.toml", "--drive", "0V"}, {"--drive", "above 0 V"}},
      {"--drive that is not a level", {"sweep", "@stage.toml", "--drive", "loud"}, {"--drive: cannot read 'loud' as a level", "dBu"}},
      {"--drive list with a bad entry", {"sweep", "@stage.toml", "--drive", "1V,x"}, {"--drive: cannot read 'x'"}},
      // An empty value (often an unset shell variable) is an error, never the option left out.
      {"--drive given an empty value", {"sweep", "@stage.toml", "--drive", ""}, {"--drive: the value is empty"}},
      {"an empty stage file name", {"sweep", ""}, {"the FILE argument is empty"}},
      {"--plot given an empty value", {"sweep", "@stage.toml", "--plot", ""}, {"--plot: the value is empty"}},
      {"--set given an empty value", {"bias", "@stage.toml", "--set", ""}, {"--set: the value is empty"}},
      {"spread --drive given an empty value", {"spread", "@stage.toml", "--drive", ""}, {"--drive: the value is empty"}},
      {"render --input given an empty value", {"render", "@stage.toml", "--input", "", "--output", "@o.wav"}, {"--input: the value is empty"}},
      {"--from above --to", {"sweep", "@stage.toml", "--from", "0dBu", "--to", "-10dBu"}, {"--from", "below --to"}},
      {"--steps below 2", {"sweep", "@stage.toml", "--steps", "1"}, {"--steps", "between 2 and 1000"}},
      {"--oversample of 0", {"sweep", "@stage.toml", "--oversample", "0"}, {"--oversample: oversampling must be 1 to 64, got 0"}},
      {"--freq above the Nyquist limit of the oversampled rate", {"sweep", "@stage.toml", "--freq", "300k", "--oversample", "1"}, {"--freq: ", "300 kHz", "Nyquist", "48.0 kHz"}},
      {"--freq below 1 Hz", {"sweep", "@stage.toml", "--freq", "0.5"}, {"--freq", "at least 1 Hz"}},
      {"--freq that is not a frequency", {"sweep", "@stage.toml", "--freq", "1kV"}, {"--freq: cannot read '1kV' as a frequency"}},
      {"--harmonics of 0", {"sweep", "@stage.toml", "--harmonics", "0"}, {"--harmonics: ", "1 to 100", "got 0"}},
      {"--bandwidth above half the simulation rate", {"sweep", "@stage.toml", "--bandwidth", "1G"}, {"--bandwidth", "half the simulation rate"}},
      {"--rate below 8 kHz", {"sweep", "@stage.toml", "--rate", "4k"}, {"--rate", "8 kHz"}},
      {"--json with --csv", {"sweep", "@stage.toml", "--json", "--csv"}, {"--json and --csv"}},
      {"--plot into a folder that does not exist", {"sweep", "@stage.toml", "--plot", "@nofolder/w.svg"}, {"@nofolder/w.svg", "does not exist"}},
      {"--plot onto the stage file itself", {"sweep", "@stage.toml", "--plot", "@stage.toml"}, {"@stage.toml", "it is the input file"}},
      {"--set of an unknown key", {"sweep", "@stage.toml", "--set", "drain.resistr=1k"}, {"--set drain.resistr", "did you mean 'resistor'"}},
      // ---- imd
      {"imd on an empty stage file", {"imd", "@empty.toml"}, {"@empty.toml", "the file is empty"}},
      {"unknown --method", {"imd", "@stage.toml", "--method", "ccif"}, {"--method", "ccif"}},
      {"--level of 0 V", {"imd", "@stage.toml", "--level", "0V"}, {"--level", "above 0 V"}},
      {"--level that is not a level", {"imd", "@stage.toml", "--level", "abc"}, {"--level: cannot read 'abc' as a level"}},
      {"--oversample above 64", {"imd", "@stage.toml", "--oversample", "100"}, {"--oversample: oversampling must be 1 to 64, got 100"}},
      {"a rate too low for the tones and their products", {"imd", "@stage.toml", "--rate", "8k"}, {"--rate: ", "8.00 kHz rate cannot carry", "Nyquist"}},
      {"--rate that is not a frequency", {"imd", "@stage.toml", "--rate", "fast"}, {"--rate: cannot read 'fast'"}},
      {"--rate of 0", {"imd", "@stage.toml", "--rate", "0"}, {"--rate", "above 0 Hz"}},
      // ---- compare
      {"one design only", {"compare", "@stage.toml"}, {"at least two designs"}},
      {"a design file that does not exist", {"compare", "@stage.toml", "@missing.toml"}, {"@missing.toml", "No such file"}},
      {"a design file with a misspelt key", {"compare", "@stage.toml", "@typo.toml"}, {"@typo.toml:13:1:", "unknown key 'resistr'"}},
      {"--set for a design that is not there", {"compare", "@stage.toml", "@stage.toml", "--set", "3:drain.resistor=1k"}, {"--set 3:drain.resistor=1k", "no design 3"}},
      {"--at-output with --at-drive", {"compare", "@stage.toml", "@stage.toml", "--at-output", "1V", "--at-drive", "1V"}, {"--at-output and --at-drive: choose one"}},
      {"--at-drive above the comparison limit", {"compare", "@stage.toml", "@stage.toml", "--at-drive", "100V"}, {"--at-drive: ", "100 Vpk", "limit"}},
      {"--at-output the stages cannot reach", {"compare", "@stage.toml", "@stage.toml", "--at-output", "+40dBu"}, {"cannot compare at", "design 1", "--at-drive"}},
      {"--harmonics below 2", {"compare", "@stage.toml", "@stage.toml", "--harmonics", "1"}, {"--harmonics: ", "2 to 100", "got 1"}},
      {"--json with --csv", {"compare", "@stage.toml", "@stage.toml", "--json", "--csv"}, {"--json and --csv"}},
      {"--plot onto a design file", {"compare", "@stage.toml", "@typo.toml", "--plot", "@typo.toml"}, {"@typo.toml", "it is the input file"}},
      // ---- spread: plots
      {"--plot whose histogram would replace the stage file", {"spread", "@h-vd.svg", "--runs", "10", "--plot", "@h.svg"}, {"@h-vd.svg", "it is the input file"}},
      // ---- render
      {"render without --input", {"render", "@stage.toml", "--output", "@o.wav"}, {"--input"}},
      {"render without --output", {"render", "@stage.toml", "--input", "@rec48.wav"}, {"--output"}},
      {"input recording that does not exist", {"render", "@stage.toml", "--input", "@missing.wav", "--output", "@o.wav"}, {"@missing.wav", "No such file"}},
      {"a folder as the input recording", {"render", "@stage.toml", "--input", "@folder", "--output", "@o.wav"}, {"@folder", "it is a folder"}},
      {"empty input recording", {"render", "@stage.toml", "--input", "@empty.wav", "--output", "@o.wav"}, {"@empty.wav", "empty"}},
      {"binary garbage as the input recording", {"render", "@stage.toml", "--input", "@garbage.bin", "--output", "@o.wav"}, {"@garbage.bin", "not recognised"}},
      {"input recording with no frames", {"render", "@stage.toml", "--input", "@noframes.wav", "--output", "@o.wav"}, {"@noframes.wav", "holds no audio"}},
      {"truncated input recording", {"render", "@stage.toml", "--input", "@truncated.wav", "--output", "@o.wav"}, {"@truncated.wav", "truncated"}},
      {"infinite sample in a float input", {"render", "@stage.toml", "--input", "@inf48.wav", "--output", "@o.wav"}, {"@inf48.wav", "frame 4800", "channel 1"}},
      {"input below 44.1 kHz", {"render", "@stage.toml", "--input", "@rec.wav", "--output", "@o.wav"}, {"@rec.wav", "8000.00 Hz", "44.1 kHz or more"}},
      {"output path equal to the input", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@rec48.wav", "--force"}, {"@rec48.wav", "it is the input file"}},
      {"output that exists, without --force", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@made/taken.wav"}, {"@made/taken.wav", "exists", "--force"}},
      {"output folder that does not exist", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@nofolder/o.wav"}, {"@nofolder/o.wav", "does not exist"}},
      {"output named for another format", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@o.flac"}, {"@o.flac", "would hold WAV", "--format"}},
      {"unknown --format", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@o.wav", "--format", "mp3"}, {"'mp3'", "wav16, wav24"}},
      {"--oversample that is not a power of two", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@o.wav", "--oversample", "3"}, {"--oversample", "oversampling must be 1, 2, 4", "got 3"}},
      {"--oversample that is not a number", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@o.wav", "--oversample", "x8"}, {"--oversample 'x8'", "whole number or auto"}},
      {"--input-peak of 0 V", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@o.wav", "--input-peak", "0V"}, {"--input-peak", "above 0 V"}},
      {"--input-peak that is not a level", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@o.wav", "--input-peak", "hot"}, {"--input-peak: cannot read 'hot' as a level"}},
      {"--normalize above full scale", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@o.wav", "--normalize", "3dBFS"}, {"--normalize", "above full scale"}},
      {"--normalize below -100 dBFS", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@o.wav", "--normalize", "-200"}, {"--normalize", "-200", "below -100 dBFS"}},
      {"--normalize that is not a level", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@o.wav", "--normalize", "loud"}, {"--normalize 'loud'", "dBFS"}},
      {"--output-peak with several designs", {"render", "@stage.toml", "@second.toml", "--input", "@rec48.wav", "--output", "@cmp", "--output-peak", "1V"}, {"--output-peak", "a fixed scale is for one output", "2 designs", "loudness-matched"}},
      {"--output-peak with --dry", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@cmp", "--dry", "--output-peak", "1V"}, {"--output-peak", "one output", "1 design and the dry input"}},
      {"several stages into a file", {"render", "@stage.toml", "@other/stage.toml", "--input", "@rec48.wav", "--output", "@made/taken.wav", "--force"}, {"@made/taken.wav", "is a file", "folder"}},
      {"several stages into a folder whose parent does not exist", {"render", "@stage.toml", "@second.toml", "--input", "@rec48.wav", "--output", "@nofolder/cmp"}, {"@nofolder/cmp", "does not exist"}},
      {"two stage files of the same name", {"render", "@stage.toml", "@other/stage.toml", "--input", "@rec48.wav", "--output", "@cmp"}, {"two outputs would both be written", "stage.wav"}},
      {"a stage file with a misspelt key", {"render", "@typo.toml", "--input", "@rec48.wav", "--output", "@o.wav"}, {"@typo.toml:13:1:", "unknown key 'resistr'"}},
      // ---- records too long to hold (a low frequency at a high simulation rate)
      {"sweep: 1 Hz at 768 kHz x 64", {"sweep", "@stage.toml", "--freq", "1", "--rate", "768k", "--oversample", "64"}, {"--freq: ", "98304000 samples", "49.2 MHz", "2097152 a point may hold", "at least 46.88 Hz", "oversampling"}},
      {"sweep: 20 Hz at 768 kHz x 32", {"sweep", "@stage.toml", "--freq", "20", "--rate", "768k", "--oversample", "32"}, {"--freq: ", "2457600 samples", "2097152 a point may hold", "at least 23.44 Hz"}},
      {"compare: 2 Hz at 48 kHz x 64", {"compare", "@stage.toml", "@stage.toml", "--freq", "2", "--oversample", "64"}, {"--freq: ", "3072000 samples", "2097152 a point may hold", "at least 2.930 Hz"}},
      // ---- Sizes, special files and the ranges of values: every text input is read with a
      // bound, and every value is checked against a physical range where it is read.
      {"a stage file over 1 MiB", {"bias", "@huge.toml"}, {"@huge.toml", "holds more than 1 MiB", "the most a stage file may hold"}},
      {"an endless device as the stage file", {"bias", "/dev/zero"}, {"'/dev/zero' is a device, not a stage file"}},
      {"random bytes as the stage file", {"sweep", "/dev/urandom"}, {"'/dev/urandom' is a device, not a stage file"}},
      {"a FIFO no program writes to", {"bias", "@nowriter.toml"}, {"@nowriter.toml", "the file is empty"}},
      {"a class file over 1 MiB", {"bias", "@hugeclass/stage.toml"}, {"@hugeclass/stage.toml:5:", "hugeclass/devices.toml", "holds more than 1 MiB"}},
      {"a class value outside its range", {"bias", "@wildclass/stage.toml"}, {"wildclass/devices.toml:4:", "general.typical_idss", "1 µA to 2 A"}},
      {"an empty class name in the file", {"bias", "@emptyclass.toml"}, {"@emptyclass.toml:5:", "jfet.class is empty", "general-purpose"}},
      {"an empty class name through --set", {"bias", "@stage.toml", "--set", "jfet.class="}, {"--set jfet.class", "jfet.class is empty"}},
      {"a bench CSV over 16 MiB", {"fit", "@huge.csv"}, {"@huge.csv", "holds more than 16 MiB"}},
      {"an endless device as the bench CSV", {"fit", "/dev/zero"}, {"'/dev/zero' is a device", "CSV file of bench readings"}},
      {"--runs above the bound", {"spread", "@stage.toml", "--runs", "100001"}, {"--runs: ", "1 to 100000", "got 100001", "0.16 %"}},
      {"--threads beyond any machine", {"spread", "@stage.toml", "--runs", "10", "--threads", "100000"}, {"--threads: ", "0 (one per core) to 256", "got 100000"}},
      {"--threads below 0", {"spread", "@stage.toml", "--runs", "10", "--threads", "-1"}, {"--threads: ", "got -1"}},
      {"sweep --threads beyond any machine", {"sweep", "@stage.toml", "--threads", "100000"}, {"--threads: ", "0 (one per core) to 256", "got 100000"}},
      {"sweep --threads below 0", {"sweep", "@stage.toml", "--threads", "-1"}, {"--threads: ", "got -1"}},
      {"compare --threads beyond any machine", {"compare", "@stage.toml", "@stage.toml", "--threads", "100000"}, {"--threads: ", "0 (one per core) to 256", "got 100000"}},
      {"render --threads beyond any machine", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@o.wav", "--threads", "100000"}, {"--threads", "100000", "0 to 256"}},
      {"--runs of ten million", {"spread", "@stage.toml", "--runs", "10000000"}, {"--runs: ", "1 to 100000", "gigabytes"}},
      {"an integer above 2^53", {"bias", "@bigint.toml"}, {"@bigint.toml:11:12:", "drain.resistor = 9.01e+15", "1 mΩ to 1 GΩ"}},
      {"a denormal resistance", {"bias", "@denormal.toml"}, {"@denormal.toml:11:12:", "drain.resistor = 1.00e-320", "lies outside"}},
      {"a temperature near 0 K", {"bias", "@coldstage.toml"}, {"@coldstage.toml:1:", "temperature", "200 K to 450 K"}},
      {"a beta that gives an absurd IDSS", {"bias", "@hugebeta.toml"}, {"@hugebeta.toml:5:", "jfet.beta = 1.00e+300", "1e-9 to 1000"}},
      {"a denormal supply as a value string", {"bias", "@tinysupply.toml"}, {"@tinysupply.toml:3:", "'4.9e-324' is beyond the numbers"}},
      {"a value string beyond a double", {"bias", "@hugestring.toml"}, {"@hugestring.toml:11:", "'1e400' is beyond the numbers"}},
      {"a source resistor of 1e300 ohm", {"sweep", "@stage.toml", "--set", "source.resistor=1e300"}, {"--set source.resistor", "1 mΩ to 1 GΩ"}},
      {"a coupling capacitor of 1e6 F", {"imd", "@stage.toml", "--set", "gate.coupling_cap=1e6"}, {"--set gate.coupling_cap", "1 pF to 1 F", "or 0 for none"}},
      {"a supply resistance of 1e16 ohm", {"compare", "@stage.toml", "@second.toml", "--set", "supply.resistance=1e16"}, {"--set supply.resistance", "1 mΩ to 1 GΩ"}},
      {"a gate resistor above 100 GOhm", {"bias", "@stage.toml", "--set", "gate.resistor=1e12"}, {"--set gate.resistor", "1 mΩ to 100 GΩ", "capsule"}},
      {"a junction capacitance of 5 F", {"response", "@stage.toml", "--set", "jfet.cgs=5"}, {"--set jfet.cgs", "10 fF to 10 nF"}},
      {"a supply of a microvolt", {"bias", "@stage.toml", "--set", "supply.volts=1u"}, {"--set supply.volts", "100 mV to 1 kV"}},
      {"--set design number beyond any count", {"compare", "@stage.toml", "@second.toml", "--set", "99999999999999999999:drain.resistor=1k"}, {"--set 99999999999999999999:drain.resistor=1k", "there is no design"}},
      {"--target value beyond a double", {"tune", "@stage.toml", "--target", "vd=1e400"}, {"--target vd", "'1e400' is beyond the numbers"}},
      {"--require end beyond a double", {"spread", "@stage.toml", "--require", "vd=1e-400..", "--runs", "10"}, {"--require vd", "'1e-400' is beyond the numbers"}},

      // ---- outputs against inputs and against each other: checked once, before any work,
      // for every command that writes (cli/command_files.hpp); the message names the option
      // and both files.
      {"measure --plot onto its --against stage file", {"measure", "@rec.wav", "--against", "@stage.toml", "--drive", "100mV", "--plot", "@stage.toml"}, {"--plot", "@stage.toml", "it is the input file", "the --against stage file"}},
      {"response --plot onto the class file its stage reads", {"response", "@cls/stage.toml", "--plot", "@cls/devices.toml"}, {"--plot", "@cls/devices.toml", "it is the input file", "the device-class file", "@cls/stage.toml"}},
      {"sweep --plot onto the class file its stage reads", {"sweep", "@cls/stage.toml", "--plot", "@cls/devices.toml"}, {"--plot", "@cls/devices.toml", "device-class file"}},
      {"--plot through a symbolic link to the stage file", {"response", "@stage.toml", "--plot", "@link-to-stage.svg"}, {"--plot", "@link-to-stage.svg", "it is the input file", "@stage.toml"}},
      {"--plot onto a hard link of the stage file", {"sweep", "@stage.toml", "--plot", "@hard-stage.svg"}, {"@hard-stage.svg", "it is the input file"}},
      {"--plot onto the stage file by way of '..'", {"compare", "@stage.toml", "@second.toml", "--plot", "@other/../second.toml"}, {"--plot", "it is the input file", "a design file"}},
      {"render output through a link to the stage file", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@link-to-stage.svg", "--force"}, {"--output", "@link-to-stage.svg", "it is the input file"}},
      {"render --dry beside a stage named dry", {"render", "@dry.toml", "--input", "@rec48.wav", "--output", "@cmp", "--dry"}, {"two outputs would both be written", "dry.wav", "--output (for --dry)"}},
      {"render --dry into a folder whose dry.wav exists, without --force", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@made", "--dry"}, {"--output (for --dry)", "dry.wav", "exists", "--force"}},
      {"tone into a path under a file", {"tone", "@rec.wav/t.wav"}, {"OUT", "@rec.wav", "is not a folder"}},
      {"--plot into a path under a file", {"sweep", "@stage.toml", "--plot", "@stage.toml/w.svg"}, {"--plot", "@stage.toml", "is not a folder"}},
      {"measure --plot onto the recording through a link", {"measure", "@rec.wav", "--plot", "@folder/../rec.wav"}, {"--plot", "it is the input file", "the recording"}},
      // ---- audio inputs that lie or cannot be read twice; numbers out of every range (render, tone, measure)
      {"render input whose header claims 2 GHz", {"render", "@stage.toml", "--input", "@lying-rate.wav", "--output", "@o.wav"}, {"@lying-rate.wav", "2000000000 Hz", "44.1 to 768 kHz", "header damaged"}},
      {"render input with 65 channels", {"render", "@stage.toml", "--input", "@channels65.wav", "--output", "@o.wav"}, {"@channels65.wav", "65 channels", "1 to 64"}},
      {"render input that is a pipe", {"render", "@stage.toml", "--input", "@pipe.wav", "--output", "@o.wav"}, {"@pipe.wav", "it is a pipe", "more than once", "file first"}},
      {"render input that is a device", {"render", "@stage.toml", "--input", "/dev/zero", "--output", "@o.wav"}, {"/dev/zero", "it is a device"}},
      {"several outputs from a pipe", {"render", "@stage.toml", "--input", "@pipe.wav", "--output", "@cmp", "--dry"}, {"@pipe.wav", "it is a pipe"}},
      {"--input-peak of 1e300 V", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@o.wav", "--input-peak", "1e300V"}, {"--input-peak", "1 µV to 1 kV", "1.00e+300 V"}},
      {"--input-peak below a microvolt", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@o.wav", "--input-peak", "1nV"}, {"--input-peak", "1 µV to 1 kV", "1.00 nV"}},
      {"--output-peak of 1e-300 V", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@o.wav", "--output-peak", "1e-300V"}, {"--output-peak", "1 µV to 10 kV", "1.00e-300 V"}},
      {"--output-peak of a megavolt", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@o.wav", "--output-peak", "1MV"}, {"--output-peak", "1 µV to 10 kV", "1.00 MV"}},
      {"--oversample past an int", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@o.wav", "--oversample", "99999999999999999999"}, {"--oversample", "whole number or auto"}},
      {"tone --fade-ms of 1e300", {"tone", "--fade-ms", "1e300", "@t.wav"}, {"--fade-ms", "longer than half the longest tone", "one hour"}},
      {"tone --fade-ms of half an hour and more", {"tone", "--fade-ms", "2000000", "@t.wav"}, {"--fade-ms", "2.00 ks", "longer than half"}},
      {"tone --rate of 1e300", {"tone", "--rate", "1e300", "@t.wav"}, {"--rate", "1 Hz to 768 kHz", "1.00e+300 Hz"}},
      {"tone --rate above 768 kHz", {"tone", "--rate", "800000", "@t.wav"}, {"--rate", "1 Hz to 768 kHz", "800 kHz"}},
      {"tone --rate below 1 Hz", {"tone", "--rate", "0.5", "--freq", "0.1", "@t.wav"}, {"--rate", "1 Hz to 768 kHz", "500 mHz"}},
      {"tone --rate NaN", {"tone", "--rate", "nan", "@t.wav"}, {"--rate", "sample rate must be positive"}},
      {"tone --seconds infinite", {"tone", "--seconds", "inf", "@t.wav"}, {"--seconds", "positive time", "inf"}},
      {"tone --seconds not a number", {"tone", "--seconds", "nan", "@t.wav"}, {"--seconds", "positive time", "nan"}},
      {"tone staircase steps too short for their fades", {"tone", "--steps", "-40dBFS..0dBFS:10", "--step-seconds", "0.01", "@t.wav"}, {"--step-seconds", "too short for fades"}},
      {"tone --level of -1e300 dBFS", {"tone", "--level", "-1e300", "@t.wav"}, {"below -200 dBFS", "converter's noise"}},
      {"tone --steps down to -1e300 dBFS", {"tone", "--steps", "-1e300..-1e300:1", "@t.wav"}, {"below -200 dBFS"}},
      {"tone --freq of 1e-300 Hz", {"tone", "--freq", "1e-300", "@t.wav"}, {"1.00e-300 Hz", "below 1 Hz"}},
      {"tone --steps of 1e-300 dB", {"tone", "--steps", "-10..0:1e-300", "@t.wav"}, {"steps is too long", "1000 at most"}},
      {"tone --seconds shorter than a sample", {"tone", "--seconds", "1e-300", "--fade-ms", "0", "@t.wav"}, {"--seconds", "1.00e-300 s", "shorter than one sample", "48.0 kHz"}},
      {"tone --channels past an int", {"tone", "--channels", "99999999999", "@t.wav"}, {"--channels"}},
      {"measure --start of 1e15 s", {"measure", "@rec.wav", "--start", "1e15"}, {"--start", "beyond the end", "@rec.wav"}},
      {"measure --start infinite", {"measure", "@rec.wav", "--start", "inf"}, {"--start", "beyond the end"}},
      {"measure --start NaN", {"measure", "@rec.wav", "--start", "nan"}, {"must not be negative"}},
      {"measure --duration NaN", {"measure", "@rec.wav", "--duration", "nan"}, {"must not be negative"}},
      {"measure --harmonics past an int", {"measure", "@rec.wav", "--harmonics", "99999999999"}, {"--harmonics"}},
      {"measure --channel past an int", {"measure", "@rec.wav", "--channel", "99999999999"}, {"--channel"}},
      {"measure --channel 0", {"measure", "@rec.wav", "--channel", "0"}, {"@rec.wav", "--channel 0 does not exist"}},
      {"measure --freq below the band", {"measure", "@rec.wav", "--freq", "1e-3"}, {"--freq 1e-3", "below the measurement band", "20.0 Hz"}},
      {"measure --drive of 1e300 V", {"measure", "@rec48.wav", "--against", "@stage.toml", "--drive", "1e300V"}, {"--drive", "1 µV to 1 kV", "1.00e+300 V"}},
      {"measure --drive of a nanovolt", {"measure", "@rec48.wav", "--against", "@stage.toml", "--drive", "1nV"}, {"--drive", "1 µV to 1 kV", "1.00 nV"}},
      {"measure --bandwidth of 1e-300 Hz", {"measure", "@rec.wav", "--bandwidth", "1e-300"}, {"--bandwidth 1e-300", "above the band's low edge", "20.0 Hz"}},
      {"measure a file of DC alone", {"measure", "@dc-only.wav"}, {"@dc-only.wav", "no tone found", "DC only"}},
      {"measure a pipe", {"measure", "@pipe.wav"}, {"@pipe.wav", "it is a pipe", "twice"}},

      // ---- sources: [signal] kind, a capsule's parts, levels in dB SPL
      {"a capsule beside a gate coupling capacitor", {"bias", "@capsule-coupled.toml"}, {"@capsule-coupled.toml:9:8", "gate.coupling_cap", "connects to the gate directly"}},
      {"a capsule without its sensitivity", {"bias", "@capsule-nosens.toml"}, {"@capsule-nosens.toml:9:8", "needs signal.capacitance", "signal.sensitivity"}},
      {"a source kind we do not have", {"bias", "@capsule-kind.toml"}, {"@capsule-kind.toml:9:8", "signal.kind must be \"resistive\", \"capsule\" or \"pickup\"", "ribbon"}},
      {"a capsule's parts on a resistive source", {"bias", "@capsule-nokind.toml"}, {"@capsule-nokind.toml:10:15", "signal.capacitance belongs to a capsule or a pickup source"}},
      {"an impedance on a capsule source", {"bias", "@capsule-impedance.toml"}, {"@capsule-impedance.toml:12:13", "signal.impedance belongs to a resistive source"}},
      {"a capsule with no DC path at the gate", {"bias", "@capsule-nogate.toml"}, {"@capsule-nogate.toml:9:8", "passes no DC", "gate.resistor"}},
      {"a capsule sensitivity of 12 V/Pa", {"bias", "@capsule-sens.toml"}, {"@capsule-sens.toml:11:15", "signal.sensitivity", "V/Pa"}},
      {"a capsule of 10 nF", {"bias", "@capsule-big.toml"}, {"@capsule-big.toml:10:15", "signal.capacitance", "1 nF"}},

      // ---- a gate's bootstrap (followers) and feedback resistor (common-source stages)
      {"a bootstrap on a common-source stage", {"bias", "@boot-cs.toml"}, {"@boot-cs.toml:11:13", "gate.bootstrap", "belongs to a source follower"}},
      {"a bootstrap with no DC path for the foot", {"bias", "@boot-nofoot.toml"}, {"@boot-nofoot.toml:14:13", "needs a DC path for the gate resistor's foot", "gate.bias_bottom"}},
      {"a bootstrap without a gate resistor", {"bias", "@boot-norg.toml"}, {"@boot-norg.toml:15:13", "needs gate.resistor"}},
      {"a negative bootstrap capacitor", {"bias", "@boot-neg.toml"}, {"@boot-neg.toml:15:13", "gate.bootstrap"}},
      {"drain feedback on a follower", {"bias", "@fb-follower.toml"}, {"@fb-follower.toml:14:12", "gate.feedback", "carries no signal to feed back"}},
      {"a feedback resistor of a teraohm", {"bias", "@fb-huge.toml"}, {"@fb-huge.toml:10:12", "gate.feedback", "100 G"}},
      // ---- measure --noise: a recording of noise alone
      {"measure --noise with a drive", {"measure", "@rec1s.wav", "--noise", "--drive", "100mV"}, {"--drive goes with a tone"}},
      {"measure --noise with a tone's frequency", {"measure", "@rec1s.wav", "--noise", "--freq", "1k"}, {"--freq goes with a tone"}},
      {"measure --noise with a spectrum plot", {"measure", "@rec1s.wav", "--noise", "--plot", "@made/n.svg"}, {"--plot", "no tone to mark"}},
      {"measure --noise against a stage without calibration", {"measure", "@rec1s.wav", "--noise", "--against", "@stage.toml"}, {"--output-cal", "full-scale sine"}},
      {"measure --noise with --set but no stage", {"measure", "@rec1s.wav", "--noise", "--set", "drain.resistor=4k7"}, {"--set goes with --against"}},
      {"measure --output-cal of a kilovolt", {"measure", "@rec1s.wav", "--noise", "--output-cal", "1kV"}, {"--output-cal must be 1 mV to 100 V"}},
      {"measure --output-cal that is not a level", {"measure", "@rec1s.wav", "--noise", "--output-cal", "loud"}, {"--output-cal"}},
      {"measure --noise on a fifth of a second", {"measure", "@rec48.wav", "--noise"}, {"@rec48.wav", "at least 0.25 s"}},
      {"measure --noise with a bandwidth under 20 Hz", {"measure", "@rec1s.wav", "--noise", "--bandwidth", "10"}, {"--bandwidth", "above the band's low edge"}},
      // ---- measure --steps, a span of several levels, and the calibrations (--input-cal, --output-cal)
      {"measure a staircase as one tone", {"measure", "@stair.wav"}, {"@stair.wav", "level changes by", "several levels", "--steps"}},
      {"measure --steps on silence", {"measure", "@silent.wav", "--steps"}, {"@silent.wav", "no step found", "0.30 s"}},
      {"measure --steps on DC alone", {"measure", "@dc-only.wav", "--steps"}, {"@dc-only.wav", "no tone found in its loudest step"}},
      {"measure --steps against a stage without drives", {"measure", "@stair.wav", "--steps", "--against", "@stage.toml"}, {"--steps --against needs --drive"}},
      {"measure --steps with drives but no stage", {"measure", "@stair.wav", "--steps", "--drive", "1V"}, {"--drive and --set go with --against"}},
      {"measure --steps with a drive for each of too few steps", {"measure", "@stair.wav", "--steps", "--against", "@stage.toml", "--drive", "10mV,20mV"}, {"--drive gives 2 levels", "holds 4 steps", "one drive a step"}},
      {"measure --steps with a played staircase and no calibration", {"measure", "@stair.wav", "--steps", "--against", "@stage.toml", "--drive", "-30dBFS..0dBFS:10"}, {"--drive -30dBFS..0dBFS:10", "staircase", "--input-cal"}},
      {"measure --steps with a staircase that is not levels", {"measure", "@stair.wav", "--steps", "--against", "@stage.toml", "--drive", "a..0:10", "--input-cal", "1V"}, {"--drive start 'a'", "not a level"}},
      {"measure --steps as both JSON and CSV", {"measure", "@stair.wav", "--steps", "--json", "--csv"}, {"--json and --csv: choose one"}},
      {"measure --csv without --steps", {"measure", "@rec1s.wav", "--csv"}, {"--csv goes with --steps"}},
      {"measure --steps and --noise together", {"measure", "@rec1s.wav", "--steps", "--noise"}, {"--steps and --noise: choose one"}},
      {"measure --noise with --input-cal", {"measure", "@rec1s.wav", "--noise", "--input-cal", "1V"}, {"--input-cal goes with a tone's --drive"}},
      {"measure --noise with --csv", {"measure", "@rec1s.wav", "--noise", "--csv"}, {"--csv goes with --steps"}},
      {"measure a drive in dBFS without --input-cal", {"measure", "@rec48.wav", "--against", "@stage.toml", "--drive", "-20dBFS"}, {"--drive -20dBFS", "played file", "--input-cal"}},
      {"measure a drive above full scale", {"measure", "@rec48.wav", "--against", "@stage.toml", "--drive", "3dBFS", "--input-cal", "1V"}, {"--drive 3dBFS", "above full scale"}},
      {"measure --input-cal of a kilovolt", {"measure", "@rec48.wav", "--against", "@stage.toml", "--drive", "-20dBFS", "--input-cal", "1kV"}, {"--input-cal must be 1 mV to 100 V", "1.00 kV"}},
      {"measure --input-cal without a stage", {"measure", "@rec48.wav", "--input-cal", "1V"}, {"--input-cal goes with --against"}},
      {"measure --steps --input-cal without a stage", {"measure", "@stair.wav", "--steps", "--input-cal", "1V"}, {"--input-cal goes with --against"}},
      {"measure --output-cal of a microvolt on a tone", {"measure", "@rec48.wav", "--output-cal", "1uV"}, {"--output-cal must be 1 mV to 100 V"}},
      {"measure --steps --freq above half the rate", {"measure", "@stair.wav", "--steps", "--freq", "5k"}, {"--freq 5k", "half the file's sample rate"}},
      // ---- tone --sweep and measure --response: an exponential sweep and its deconvolution
      {"tone --sweep that is not a range", {"tone", "--sweep", "low..high", "@t.wav"}, {"--sweep", "'low"}},
      {"tone --sweep from 0 Hz", {"tone", "--sweep", "0..20k", "@t.wav"}, {"--sweep", "start at 1 Hz"}},
      {"tone --sweep past half the rate", {"tone", "--sweep", "20..30k", "@t.wav"}, {"--sweep", "below half the sample rate", "24.0 kHz"}},
      {"tone --sweep over less than two octaves", {"tone", "--sweep", "1k..2k", "@t.wav"}, {"--sweep", "two octaves"}},
      {"tone --sweep too long", {"tone", "--sweep", "20..20k", "--seconds", "100", "@t.wav"}, {"--seconds", "0.5 s to 43.69 s"}},
      {"tone --sweep with fades longer than a tenth", {"tone", "--sweep", "20..20k", "--seconds", "1", "--fade-ms", "200", "@t.wav"}, {"--fade-ms", "a tenth of the sweep"}},
      {"tone --sweep above full scale", {"tone", "--sweep", "20..20k", "--level", "3", "@t.wav"}, {"3.00 dBFS", "above full scale"}},
      {"tone --sweep with a frequency", {"tone", "--sweep", "20..20k", "--freq", "1k", "@t.wav"}, {"--freq excludes --sweep"}},
      {"tone --sweep with --steps", {"tone", "--sweep", "20..20k", "--steps", "-20..0:10", "@t.wav"}, {"--steps excludes --sweep"}},
      {"measure --response with a drive", {"measure", "@sweep8k.wav", "--response", "@sweep8k.wav", "--drive", "1V"}, {"--drive goes with a tone", "--response"}},
      {"measure --response with --steps", {"measure", "@sweep8k.wav", "--response", "@sweep8k.wav", "--steps"}, {"--response, --steps and --noise: choose one"}},
      {"measure --response with a frequency", {"measure", "@sweep8k.wav", "--response", "@sweep8k.wav", "--freq", "1k"}, {"--freq goes with a tone", "--sweep"}},
      {"measure --response as JSON and CSV", {"measure", "@sweep8k.wav", "--response", "@sweep8k.wav", "--json", "--csv"}, {"--json and --csv: choose one"}},
      {"measure --response with --set and no stage", {"measure", "@sweep8k.wav", "--response", "@sweep8k.wav", "--set", "drain.resistor=4k7"}, {"--set goes with --against"}},
      {"measure --response with one point", {"measure", "@sweep8k.wav", "--response", "@sweep8k.wav", "--points", "1"}, {"--points must be 2 to 2000"}},
      {"measure --response with one calibration", {"measure", "@sweep8k.wav", "--response", "@sweep8k.wav", "--input-cal", "1V"}, {"both calibrations", "--output-cal"}},
      {"measure --response at another rate", {"measure", "@rec48.wav", "--response", "@sweep8k.wav"}, {"@sweep8k.wav", "8000 Hz", "48000 Hz", "rate the sweep was played"}},
      {"measure --response of a recording shorter than the sweep", {"measure", "@rec.wav", "--response", "@sweep8k.wav", "--sweep", "20..2k"}, {"@rec.wav", "fewer than the sweep's", "whole sweep"}},
      {"measure --response of silence", {"measure", "@silent15.wav", "--response", "@sweep8k.wav", "--sweep", "20..2k"}, {"@silent15.wav", "no response to the sweep"}},
      {"measure --response to a played file too short for a sweep", {"measure", "@rec.wav", "--response", "@short8k.wav", "--sweep", "20..2k"}, {"@short8k.wav", "the played sweep", "0.5 s"}},
      {"measure --response to a played file longer than a sweep may be", {"measure", "@rec.wav", "--response", "@long8k.wav"}, {"@long8k.wav", "2104000 frames", "2097152"}},
      {"measure --response with a band past the file's rate", {"measure", "@sweep8k.wav", "--response", "@sweep8k.wav"}, {"--sweep 20..20k", "below half the sample rate"}},
      {"measure --response with a band of one octave", {"measure", "@sweep8k.wav", "--response", "@sweep8k.wav", "--sweep", "1k..2k"}, {"--sweep 1k..2k", "two octaves"}},
      // ---- measure --response --latency, and options a reading does not use
      {"measure --latency that is not a number", {"measure", "@sweep8k.wav", "--response", "@sweep8k.wav", "--sweep", "20..2k", "--latency", "soon"}, {"--latency 'soon'", "auto", "in seconds"}},
      {"measure --latency below 0", {"measure", "@sweep8k.wav", "--response", "@sweep8k.wav", "--sweep", "20..2k", "--latency", "-1m"}, {"--latency '-1m'", "0 or more"}},
      {"measure --latency far from the response's peak", {"measure", "@sweep8k.wav", "--response", "@sweep8k.wav", "--sweep", "20..2k", "--latency", "0.5"}, {"--latency 0.5", "peaks at 0", "not this recording's"}},
      {"measure --sweep without --response", {"measure", "@rec.wav", "--sweep", "20..2k"}, {"--sweep goes with --response PLAYED"}},
      {"measure --points without --response", {"measure", "@rec.wav", "--points", "50"}, {"--points goes with --response PLAYED"}},
      {"measure --latency without --response", {"measure", "@rec.wav", "--latency", "1m"}, {"--latency goes with --response PLAYED"}},
      {"measure --sweep with --steps", {"measure", "@stair.wav", "--steps", "--sweep", "20..2k"}, {"--sweep goes with --response PLAYED"}},
      {"measure --window with --response", {"measure", "@sweep8k.wav", "--response", "@sweep8k.wav", "--sweep", "20..2k", "--window", "flat-top"}, {"--window goes with a tone or --steps", "--response and --noise use none"}},
      {"measure --harmonics with --response", {"measure", "@sweep8k.wav", "--response", "@sweep8k.wav", "--sweep", "20..2k", "--harmonics", "5"}, {"--harmonics goes with a tone or --steps", "H2..H5"}},
      {"measure --bandwidth with --response", {"measure", "@sweep8k.wav", "--response", "@sweep8k.wav", "--sweep", "20..2k", "--bandwidth", "2k"}, {"--bandwidth goes with", "the band of --sweep"}},
      {"measure --window with --noise", {"measure", "@rec.wav", "--noise", "--window", "flat-top"}, {"--window goes with a tone or --steps"}},
      {"measure --harmonics with --noise", {"measure", "@rec.wav", "--noise", "--harmonics", "5"}, {"--harmonics goes with a tone or --steps"}},
      {"tone --step-seconds without --steps", {"tone", "--step-seconds", "2", "@t.wav"}, {"--step-seconds", "--steps"}},

      {"a bootstrap set on a common-source stage", {"bias", "@stage.toml", "--set", "gate.bootstrap=10u"}, {"gate.bootstrap", "belongs to a source follower"}},
      {"a capsule's kind set wrong from the command line", {"bias", "@capsule.toml", "--set", "signal.kind=ribbon"}, {"--set signal.kind", "\"resistive\", \"capsule\" or \"pickup\""}},
      {"sweep in dB SPL on a resistive source", {"sweep", "@stage.toml", "--drive", "94dBSPL"}, {"--drive", "'94dBSPL' is a sound pressure level", "capsule source"}},
      {"sweep --from in dB SPL on a resistive source", {"sweep", "@stage.toml", "--from", "80dBSPL", "--to", "120dBSPL"}, {"--from", "capsule source"}},
      {"imd in dB SPL on a resistive source", {"imd", "@stage.toml", "--level", "94dBSPL"}, {"--level", "capsule source"}},
      {"measure --drive in dB SPL on a resistive source", {"measure", "@rec48.wav", "--against", "@stage.toml", "--drive", "94dBSPL"}, {"--drive", "capsule source"}},
      {"compare at a sound pressure with a resistive design", {"compare", "@capsule.toml", "@stage.toml", "--at-drive", "94dBSPL"}, {"--at-drive", "94.00 dB SPL needs every design to have a capsule", "design 2"}},
      {"compare at a sound pressure beyond the drive limit", {"compare", "@capsule.toml", "@capsule-hot.toml", "--at-drive", "180dBSPL"}, {"--at-drive", "180.0 dB SPL gives design 1", "above the 20.0 Vpk limit"}},
      {"compare at a sound pressure out of range", {"compare", "@capsule.toml", "@capsule-hot.toml", "--at-drive", "200dBSPL"}, {"--at-drive", "outside 0 to 194 dB SPL"}},
      {"compare's output level as a sound pressure", {"compare", "@capsule.toml", "@capsule-hot.toml", "--at-output", "94dBSPL"}, {"--at-output", "does not take"}},
      {"render's full scale as a sound pressure on a resistive source", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@o.wav", "--input-peak", "94dBSPL"}, {"--input-peak", "capsule source"}},
      {"render's full scale as a sound pressure for capsules that differ", {"render", "@capsule.toml", "@capsule-hot.toml", "--input", "@rec48.wav", "--output", "@odir", "--input-peak", "94dBSPL"}, {"--input-peak", "capsules of different sensitivity", "in volts"}},
      {"a sound pressure level that is not a number", {"sweep", "@capsule.toml", "--drive", "loud dBSPL"}, {"--drive", "cannot read 'loud dBSPL' as a sound pressure level"}},
      {"a sound pressure level above 194 dB SPL", {"sweep", "@capsule.toml", "--drive", "200dBSPL"}, {"--drive", "outside 0 to 194 dB SPL"}},
      {"a negative sound pressure level", {"imd", "@capsule.toml", "--level", "-10dBSPL"}, {"--level", "outside 0 to 194 dB SPL"}},
      // ---- pickup source: [signal] kind = "pickup", its coil, capacitance and cable
      {"a pickup without its inductance", {"bias", "@pickup-noind.toml"}, {"@pickup-noind.toml:9:8", "a pickup source needs signal.inductance"}},
      {"a pickup without its resistance", {"bias", "@pickup-nores.toml"}, {"@pickup-nores.toml:9:8", "a pickup source needs signal.resistance"}},
      {"a negative inductance", {"bias", "@pickup-negind.toml"}, {"@pickup-negind.toml:11:14", "signal.inductance must be above 0"}},
      {"an inductance of 1000 H", {"bias", "@pickup-bigind.toml"}, {"@pickup-bigind.toml:11:14", "signal.inductance", "100 H"}},
      {"a cable length written as 3m", {"bias", "@pickup-cable-mm.toml"}, {"@pickup-cable-mm.toml:13:9", "signal.cable", "3 millimetres"}},
      {"a pickup capacitance of 10 uF", {"bias", "@pickup-bigcap.toml"}, {"@pickup-bigcap.toml:12:15", "signal.capacitance", "1 µF"}},
      {"an impedance beside a pickup", {"bias", "@pickup-impedance.toml"}, {"@pickup-impedance.toml:14:13", "signal.impedance belongs to a resistive source", "a pickup's impedance"}},
      {"a capsule's sensitivity on a pickup", {"bias", "@pickup-sens.toml"}, {"@pickup-sens.toml:14:15", "signal.sensitivity belongs to a capsule source", "a pickup source has"}},
      {"a pickup's parts on a resistive source", {"bias", "@pickup-nokind.toml"}, {"@pickup-nokind.toml:10:14", "signal.resistance belongs to a pickup source", "set signal.kind = \"pickup\""}},
      {"a pickup's inductance on a capsule", {"bias", "@capsule-coil.toml"}, {"@capsule-coil.toml:12:14", "signal.inductance belongs to a pickup source", "a capsule source has"}},
      {"a cable's capacitance per metre without its length", {"bias", "@pickup-per-metre.toml"}, {"@pickup-per-metre.toml:13:21", "signal.cable_capacitance is per metre of signal.cable"}},
      {"a pickup with no capacitance across it", {"bias", "@pickup-nocap.toml"}, {"@pickup-nocap.toml:9:8", "needs a capacitance across its output"}},
      {"a pickup's inductance set to 0 from the command line", {"response", "@pickup.toml", "--set", "signal.inductance=0"}, {"--set signal.inductance", "must be above 0"}},
      {"a phantom feed IEC 61938 does not name", {"bias", "@phantom-name.toml"}, {"@phantom-name.toml:4:11", "supply.phantom must be \"P48\", \"P24\" or \"P12\"", "P36"}},
      {"a phantom feed for a p-channel stage", {"bias", "@phantom-p.toml"}, {"@phantom-p.toml:3:11", "feeds a positive voltage", "p-channel"}},
      {"a phantom feed beside the voltage it sets", {"bias", "@phantom-volts.toml"}, {"@phantom-volts.toml:5:9", "supply.volts: supply.phantom = \"P48\" sets the voltage"}},
      // ---- chains: the [[stage]] reader, --set, tune's pairs and spread's requirements
      {"[[stage]] with a top-level [jfet]", {"bias", "@chain-jfet-top.toml"}, {"@chain-jfet-top.toml:6:", "'jfet' at the top of a chain file", "inside its [[stage]]"}},
      {"[[stage]] with a top-level topology", {"bias", "@chain-topology-top.toml"}, {"@chain-topology-top.toml:1:1:", "'topology' at the top of a chain file"}},
      {"between on the first stage", {"bias", "@chain-between-first.toml"}, {"@chain-between-first.toml:7:1:", "stage1.between", "the first stage has no 'between'"}},
      {"a chain of seven stages", {"bias", "@chain-seven.toml"}, {"@chain-seven.toml:89:", "at most 6 stages, this one 7"}},
      {"a chain of one [[stage]]", {"bias", "@chain-one.toml"}, {"@chain-one.toml:6:", "at least two [[stage]] tables"}},
      {"stage that is not a table", {"bias", "@chain-not-tables.toml"}, {"@chain-not-tables.toml:2:", "'stage' must be an array of tables", "[[stage]]"}},
      {"a chain stage's gate without a DC path", {"bias", "@chain-nogate-dc.toml"}, {"@chain-nogate-dc.toml:19:1:", "stage2: the gate has no DC path"}},
      {"a node between two coupling capacitors", {"bias", "@chain-floating.toml"}, {"@chain-floating.toml:6:1:", "stage1.output node has no DC path", "shunt in 'between'"}},
      {"two parts in one between table", {"bias", "@chain-two-kinds.toml"}, {"@chain-two-kinds.toml:20:", "stage2.between[1]", "one part per table"}},
      {"a between table with no part", {"bias", "@chain-no-kind.toml"}, {"@chain-no-kind.toml:20:", "stage2.between[1]", "give one of series, series_cap, shunt, shunt_cap or pot"}},
      {"a pot without its position", {"bias", "@chain-pot-no-position.toml"}, {"@chain-pot-no-position.toml:20:", "a pot needs position"}},
      {"a pot position beyond 1", {"bias", "@chain-position-range.toml"}, {"@chain-position-range.toml:20:40:", "stage2.between[1].position = 1.50 lies outside 0 to 1: a knob's rotation"}},
      {"a pot of an unknown taper", {"bias", "@chain-bad-taper.toml"}, {"@chain-bad-taper.toml:20:", "stage2.between[1].taper must be \"linear\" or \"log\"", "\"steep\""}},
      {"a position on a series resistor", {"bias", "@chain-position-series.toml"}, {"@chain-position-series.toml:20:", "position and taper belong to a pot"}},
      {"an unknown key in a between table", {"bias", "@chain-between-unknown.toml"}, {"@chain-between-unknown.toml:20:", "unknown key 'serie'", "did you mean 'series'"}},
      {"between that is not an array", {"bias", "@chain-between-string.toml"}, {"@chain-between-string.toml:20:", "stage2.between: expected an array of parts", "got a string"}},
      {"a between element that is not a table", {"bias", "@chain-between-number.toml"}, {"@chain-between-number.toml:20:", "stage2.between[1]: expected one part", "got an integer"}},
      {"between in a single-stage file", {"bias", "@chain-between-single.toml"}, {"@chain-between-single.toml:1:1:", "'between' belongs to a stage of a chain"}},
      {"[rail] in a single-stage file", {"bias", "@chain-rail-single.toml"}, {"@chain-rail-single.toml:14:", "'rail' belongs to a stage of a chain"}},
      {"a load in [stage.output]", {"bias", "@chain-stage-load.toml"}, {"@chain-stage-load.toml:33:1:", "stage2.output.load", "top-level [output] load"}},
      {"a coupling capacitor in the top-level [output]", {"bias", "@chain-top-coupling.toml"}, {"@chain-top-coupling.toml:6:1:", "output.coupling_cap", "holds only the chain's load"}},
      {"a coupled last stage with no load", {"bias", "@chain-no-load.toml"}, {"@chain-no-load.toml:19:1:", "stage2: output.coupling_cap needs the chain's load", "top-level [output]"}},
      {"[supply] inside a stage", {"bias", "@chain-stage-supply.toml"}, {"@chain-stage-supply.toml:31:", "stage2.supply", "shared by the whole chain"}},
      {"temperature inside a stage", {"bias", "@chain-stage-temperature.toml"}, {"@chain-stage-temperature.toml:20:1:", "stage2.temperature", "shared by the whole chain"}},
      {"a misspelt section in a stage", {"bias", "@chain-stage-unknown.toml"}, {"@chain-stage-unknown.toml:27:", "unknown key 'drian' in [[stage]] 2", "did you mean 'drain'"}},
      {"a stage without its jfet", {"bias", "@chain-no-jfet.toml"}, {"@chain-no-jfet.toml:19:1:", "stage2.jfet: each stage needs a [stage.jfet] section"}},
      {"stages of both polarities", {"bias", "@chain-mixed-polarity.toml"}, {"@chain-mixed-polarity.toml:19:1:", "stage2: every stage of a chain must have the polarity of the first"}},
      {"a rail capacitor without its resistance", {"bias", "@chain-rail-cap.toml"}, {"@chain-rail-cap.toml:19:1:", "stage2: rail.capacitance needs rail.resistance"}},
      {"--set of a stage the chain lacks", {"bias", "@chain.toml", "--set", "stage7.drain.resistor=1k"}, {"--set stage7.drain.resistor", "the chain has 2 stages, so there is no stage 7"}},
      {"--set of a stage's key without the stage", {"bias", "@chain.toml", "--set", "drain.resistor=1k"}, {"--set drain.resistor", "a chain of 2 stages", "stage1.drain.resistor"}},
      {"--set of stage 2 on a single stage", {"bias", "@stage.toml", "--set", "stage2.drain.resistor=1k"}, {"--set stage2.drain.resistor", "describes one stage, so there is no stage 2"}},
      {"--set of a stage and no key", {"bias", "@chain.toml", "--set", "stage2.=1k"}, {"--set 'stage2.=1k'", "stageN.SECTION.KEY=VALUE"}},
      {"--set of a key nested too deep", {"bias", "@chain.toml", "--set", "stage2.drain.resistor.x=1k"}, {"--set 'stage2.drain.resistor.x=1k'", "SECTION.KEY=VALUE"}},
      {"--set of a stage into a chain whose stages are not tables", {"bias", "@chain-not-tables.toml", "--set", "stage1.drain.resistor=1k"}, {"--set stage1.drain.resistor", "stage 1 is not a table"}},
      {"--set of a between element without its place", {"bias", "@chain.toml", "--set", "stage2.between.position=0.5"}, {"--set stage2.between.position", "name an element of between by its place and a key"}},
      {"--set of a between element the stage lacks", {"bias", "@chain.toml", "--set", "stage2.between.3.position=0.5"}, {"--set stage2.between.3.position", "no element 3 in this stage's between (it has 1)"}},
      {"--set into a between element that is not a table", {"bias", "@chain-between-number.toml", "--set", "stage2.between.1.position=0.5"}, {"--set stage2.between.1.position", "element 1 of between is not a table"}},
      {"tune --adjust without its stage in a chain", {"tune", "@chain.toml", "--target", "vd=4.5", "--adjust", "drain.resistor"}, {"--adjust drain.resistor", "a chain of 2 stages", "--adjust stage1.drain.resistor"}},
      {"tune's default --adjust in a chain", {"tune", "@chain.toml", "--target", "vd=4.5"}, {"--adjust source.resistor", "name the stage"}},
      {"tune --target of a stage the chain lacks", {"tune", "@chain.toml", "--target", "stage7.vd=4.5", "--adjust", "stage1.source.resistor"}, {"--target: ", "the chain has 2 stages, so there is no stage 7"}},
      {"tune --target of stage 2 on a single stage", {"tune", "@stage.toml", "--target", "stage2.vd=4.5"}, {"--target: ", "describes one stage, so there is no stage 2"}},
      {"tune on a shared resistor with no stage named", {"tune", "@chain.toml", "--target", "vd=4.5", "--adjust", "output.load"}, {"--target: ", "name the stage whose bias is the target"}},
      {"tune --adjust of a stage the chain lacks", {"tune", "@chain.toml", "--target", "vd=4.5", "--adjust", "stage3.source.resistor"}, {"--adjust: 'stage3.source.resistor' is not an adjustable resistor", "stage2.source.resistor"}},
      {"tune with more --target than --adjust", {"tune", "@chain.toml", "--target", "stage1.vd=4.5", "--target", "stage2.vd=4.5", "--adjust", "stage1.source.resistor"}, {"--adjust and --target come in pairs", "2 --target but 1 --adjust"}},
      {"tune with one resistor adjusted twice", {"tune", "@chain.toml", "--adjust", "stage1.source.resistor", "--target", "stage1.vd=4.5", "--adjust", "stage1.source.resistor", "--target", "stage1.id=1m"}, {"--adjust: ", "stage1.source.resistor is adjusted twice"}},
      {"tune with one target for two resistors", {"tune", "@chain.toml", "--adjust", "stage2.source.resistor", "--target", "stage2.vd=4.5", "--adjust", "stage2.drain.resistor", "--target", "stage2.vd=5"}, {"--target: ", "stage2.vd is the target of two resistors"}},
      {"tune with center among several pairs", {"tune", "@chain.toml", "--adjust", "stage1.source.resistor", "--target", "stage1.center", "--adjust", "stage2.source.resistor", "--target", "stage2.vd=4.5"}, {"--target: ", "center is a search of its own"}},
      {"tune --over-spread for center", {"tune", "@chain.toml", "--adjust", "stage1.source.resistor", "--target", "stage1.center", "--over-spread", "--runs", "10"}, {"--target: ", "needs a bias target"}},
      {"tune --over-spread with targets out of every part's reach", {"tune", "@chain.toml", "--adjust", "stage1.source.resistor", "--target", "stage1.vd=12", "--adjust", "stage2.source.resistor", "--target", "stage2.vd=4.5", "--over-spread", "--runs", "4"}, {"no part of the spread can reach every target together", "stage1.vd = 12.00 V by stage1.source.resistor"}},
      {"spread --require of a stage quantity without its stage", {"spread", "@chain.toml", "--require", "vd=3.5..5.5", "--runs", "10"}, {"--require: ", "a chain of 2 stages", "stage1.vd or stage2.vd", "gain, swing and thd are the chain's"}},
      {"spread --require of a stage the chain lacks", {"spread", "@chain.toml", "--require", "stage7.vd=3.5..5.5", "--runs", "10"}, {"--require: ", "the chain has 2 stages, so there is no stage 7"}},
      {"spread --require of stage 2 on a single stage", {"spread", "@stage.toml", "--require", "stage2.vd=3.5..5.5", "--runs", "10"}, {"--require: ", "describes one stage, so there is no stage 2"}},
      {"spread --require of the chain's gain by stage", {"spread", "@chain.toml", "--require", "stage2.gain=10..", "--runs", "10"}, {"--require: ", "gain is the whole design's", "without a stage"}},
      {"spread --plot with a requirement the chain refuses", {"spread", "@chain.toml", "--require", "id=1m..", "--plot", "@h.svg", "--runs", "10"}, {"--require: ", "stage1.id or stage2.id"}},
      // ---- noise of a batch, modelled hiss in a render: spread --noise, render --noise --seed
      {"spread --require on the noise without --noise", {"spread", "@stage.toml", "--require", "ein_a=..-120", "--runs", "10"}, {"--require ein_a=...", "needs --noise"}},
      {"spread --require on the noise of one stage of a chain", {"spread", "@chain.toml", "--noise", "--require", "stage2.noise_a=..1u", "--runs", "10"}, {"--require: ", "noise_a is the whole design's", "without a stage"}},
      {"render --seed that is not a number", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@o.wav", "--noise", "--seed", "x"}, {"--seed", "a whole number", "'x'"}},
      {"render --seed below 0", {"render", "@stage.toml", "--input", "@rec48.wav", "--output", "@o.wav", "--noise", "--seed", "-1"}, {"--seed", "a whole number from 0", "'-1'"}},
      // ---- headroom as distortion: bias and tune --thd-levels
      {"tune --thd-levels with --over-spread", {"tune", "@stage.toml", "--target", "vd=4.5", "--over-spread", "--runs", "4", "--thd-levels"}, {"--thd-levels goes with the rows", "--over-spread sizes a trimmer", "a sweep of their own"}},
      // ---- temperature: bias --temperature and the part's own laws
      {"bias --temperature beyond the rated range", {"bias", "@stage.toml", "--temperature", "0..200"}, {"--temperature 0..200", "-55 to 150"}},
      {"bias --temperature that is not a range", {"bias", "@stage.toml", "--temperature", "warm"}, {"--temperature", "'warm'"}},
      {"bias --vp-drift of the wrong sign", {"bias", "@stage.toml", "--temperature", "0..50", "--vp-drift", "2"}, {"--vp-drift: ", "the pinch-off drift must be 0 to -10 mV/K (n-channel sign)", "got 2.00 mV/K"}},
      {"bias --beta-exponent out of range", {"bias", "@stage.toml", "--temperature", "0..50", "--beta-exponent", "1"}, {"--beta-exponent: ", "must be -3 to 0", "got 1"}},
      {"bias --vp-drift with a unit that is not V/K", {"bias", "@stage.toml", "--temperature", "0..50", "--vp-drift", "-2mV"}, {"--vp-drift", "V/K"}},
      {"bias --vp-drift as a value beyond 10 mV/K", {"bias", "@stage.toml", "--temperature", "0..50", "--vp-drift", "-20m"}, {"--vp-drift: ", "0 to -10 mV/K", "got -20.0 mV/K"}},
      {"bias --vp-drift without --temperature", {"bias", "@stage.toml", "--vp-drift", "-3"}, {"--vp-drift", "--temperature"}},
      {"bias --beta-exponent without --temperature", {"bias", "@stage.toml", "--beta-exponent", "-2"}, {"--beta-exponent", "--temperature"}},
      {"[jfet] vp_drift beyond 10 mV/K", {"bias", "@tc-drift-big.toml"}, {"@tc-drift-big.toml:7:12:", "jfet.vp_drift must be 0 to -10 mV/K for an n-channel part", "got -20.0 mV/K"}},
      {"[jfet] vp_drift of the wrong sign", {"bias", "@tc-drift-sign.toml"}, {"@tc-drift-sign.toml:7:12:", "jfet.vp_drift must be 0 to -10 mV/K", "grows in magnitude"}},
      {"[jfet] vp_drift in another unit", {"bias", "@tc-drift-unit.toml"}, {"@tc-drift-unit.toml:7:12:", "jfet.vp_drift", "V/K"}},
      {"[jfet] beta_exponent above 0", {"bias", "@tc-exp-sign.toml"}, {"@tc-exp-sign.toml:7:17:", "jfet.beta_exponent must be -3 to 0", "got 1.5"}},
      {"[jfet] beta_exponent below -3", {"bias", "@tc-exp-big.toml"}, {"@tc-exp-big.toml:7:17:", "jfet.beta_exponent must be -3 to 0", "got -4"}},
      {"[stage.jfet] vp_drift of the wrong sign in a chain", {"bias", "@tc-chain.toml"}, {"@tc-chain.toml:24:12:", "stage2.jfet.vp_drift must be 0 to -10 mV/K"}},
      {"--set jfet.beta_exponent out of range", {"bias", "@stage.toml", "--set", "jfet.beta_exponent=2"}, {"--set jfet.beta_exponent", "must be -3 to 0", "got 2.00"}},
      {"--set stage1.jfet.vp_drift of the wrong sign", {"bias", "@chain.toml", "--set", "stage1.jfet.vp_drift=1m"}, {"stage1.jfet.vp_drift must be 0 to -10 mV/K"}},
      {"a class's vp_drift of the wrong sign", {"bias", "@tcclass/stage.toml"}, {"tcclass/devices.toml:6:12:", "general.vp_drift must be 0 to -10 mV/K (n-channel sign)"}},
      // ---- first use: a key written out in full where the file abbreviates it
      {"a key written out in full", {"bias", "@stage.toml", "--set", "gate.coupling_capacitor=100n"}, {"--set gate.coupling_capacitor", "did you mean 'coupling_cap'"}},
      {"a key written out in full, in a sweep", {"sweep", "@stage.toml", "--set", "source.bypass_capacitor=100u"}, {"did you mean 'bypass_cap'"}},
      // ---- workbench: refused before the server starts (a port in use: tests/cli/test_workbench.cpp)
      {"workbench --port above 65535", {"workbench", "@stage.toml", "--port", "70000"}, {"--port must be 0 (a free port) to 65535", "got 70000"}},
      {"workbench --port below 0", {"workbench", "@stage.toml", "--port", "-1"}, {"--port must be 0 (a free port) to 65535", "got -1"}},
      {"workbench on a stage file that does not exist", {"workbench", "@missing.toml"}, {"@missing.toml", "No such file"}},
      {"workbench on a misspelt key", {"workbench", "@stage.toml", "@typo.toml"}, {"@typo.toml:13:1:", "unknown key 'resistr' in [source]"}},
      {"workbench on binary garbage", {"workbench", "@garbage.bin"}, {"@garbage.bin:1:"}},
      {"workbench --audio that does not exist", {"workbench", "@stage.toml", "--audio", "@missing.wav"}, {"@missing.wav", "No such file"}},
      {"workbench --audio of garbage", {"workbench", "@stage.toml", "--audio", "@garbage.bin"}, {"@garbage.bin", "not recognised"}},
      {"workbench --audio from a pipe", {"workbench", "@stage.toml", "--audio", "@pipe.wav"}, {"@pipe.wav", "it is a pipe", "several times"}},
  };

  REQUIRE(std::size(rows) >= 180);
  MESSAGE("bad-input catalogue: " << std::size(rows) << " rows");
  const bool permissions_hold = ::geteuid() != 0;
  for (const row& r : rows) {
    std::vector<std::string> args;
    for (const char* a : r.args)
      if (a) args.push_back(expand(fx, a));
    const std::string given = r.given;
    CAPTURE(given);
    if (r.needs_permissions && !permissions_hold) {
      MESSAGE("skipped (running as root, where permission bits do not stop reads): " << given);
      continue;
    }
    const std::set<std::string> before = listing(fx.dir.path);
    outcome o;
    if (r.no_data_files) {
      std::ostringstream out, err;
      o.status = pinchoff::cli::run(args, out, err, pinchoff::cli::data_files{});
      o.out = out.str();
      o.err = err.str();
    } else {
      o = run_cli(args);
    }
    CAPTURE(o.err);
    CAPTURE(o.out);
    CHECK(o.status == r.status);
    CHECK(o.out.empty());
    for (const char* w : r.words) {
      if (!w) continue;
      const std::string word = expand(fx, w);
      CAPTURE(word);
      CHECK(o.err.find(word) != std::string::npos);
    }
    CHECK(listing(fx.dir.path) == before);  // no output file, no temporary left behind
  }
}

TEST_CASE("the value parsers refuse what later commands will rely on them to refuse") {
  // Parsers not yet behind a command option; each row is a base or cli entry point.
  using pinchoff::input_error;
  namespace base = pinchoff::base;
  CHECK_THROWS_WITH_AS(base::parse_level_vpk("0.5", true), doctest::Contains("'0.5'"), input_error);  // a unit is required
  CHECK_THROWS_WITH_AS(base::parse_level_vpk("1e5dBu"), doctest::Contains("too large"), input_error);  // found by fuzzing
  CHECK_THROWS_WITH_AS(base::parse_level_vpk("-1Vrms"), doctest::Contains("'-1Vrms'"), input_error);
  CHECK_THROWS_WITH_AS(base::parse_range("8..2", base::unit::volt, "--drive"),
                       doctest::Contains("--drive: range '8..2' has its minimum above its maximum"), input_error);
  CHECK_THROWS_WITH_AS(base::parse_fraction("1", "--tolerance"), doctest::Contains("outside 0 to 100 %"), input_error);
  CHECK_THROWS_WITH_AS(pinchoff::cli::parse_requirement("gain=.."), doctest::Contains("at least one end"), input_error);
}

}  // namespace test_bad_input
