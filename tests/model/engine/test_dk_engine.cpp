// The DK engine on its own: device evaluation, DC start, allocation-free sample loop,
// sub-stepping and failure reporting. Its agreement with the nodal reference solver is in
// test_transient_reference.cpp, its periodic steady state in test_steady_state.cpp.
#include <doctest/doctest.h>

#include <atomic>
#include <cmath>
#include <cstdlib>
#include <numbers>
#include <string>
#include <vector>

#include "fixtures/engine_stages.hpp"
#include "fixtures/multi_device_networks.hpp"
#include "model/engine/dk_device.hpp"
#include "support/sanitized.hpp"
#include "model/engine/dk_engine.hpp"
#include "model/device/jfet.hpp"

// Heap allocations are counted by wrapping glibc's allocator (the "replacing malloc" hooks
// glibc documents: malloc, free, calloc, realloc plus the aligned forms). Eigen allocates
// through std::malloc, the standard containers through operator new, which calls malloc,
// so this sees every heap allocation, in release builds too (EIGEN_RUNTIME_NO_MALLOC only
// asserts, and assertions are off under NDEBUG). Sanitizer builds bring their own
// allocator; there the count is not available.
#if defined(__GLIBC__) && !PINCHOFF_SANITIZED_BUILD
#define PINCHOFF_COUNT_ALLOCATIONS 1
namespace {
std::atomic<long> heap_allocations{0};
}
extern "C" {
void* __libc_malloc(std::size_t);
void* __libc_calloc(std::size_t, std::size_t);
void* __libc_realloc(void*, std::size_t);
void* __libc_memalign(std::size_t, std::size_t);
void __libc_free(void*);
void* malloc(std::size_t n) {
  heap_allocations.fetch_add(1, std::memory_order_relaxed);
  return __libc_malloc(n);
}
void* calloc(std::size_t n, std::size_t s) {
  heap_allocations.fetch_add(1, std::memory_order_relaxed);
  return __libc_calloc(n, s);
}
void* realloc(void* p, std::size_t n) {
  heap_allocations.fetch_add(1, std::memory_order_relaxed);
  return __libc_realloc(p, n);
}
void* aligned_alloc(std::size_t a, std::size_t n) {
  heap_allocations.fetch_add(1, std::memory_order_relaxed);
  return __libc_memalign(a, n);
}
int posix_memalign(void** p, std::size_t a, std::size_t n) {
  heap_allocations.fetch_add(1, std::memory_order_relaxed);
  *p = __libc_memalign(a, n);
  return *p ? 0 : 12;  // ENOMEM
}
void free(void* p) { __libc_free(p); }
}
#endif

namespace test_dk_engine {

namespace {

using namespace pinchoff;
using pinchoff::test::engine_stages;
using pinchoff::test::network_of;
using pinchoff::test::solve;

double sine(double amplitude_v, double f_hz, double fs_hz, int n) {
  return amplitude_v * std::sin(2.0 * std::numbers::pi * f_hz * n / fs_hz);
}

}  // namespace

TEST_CASE("the engine's device evaluation is the device model of jfet.hpp") {
  model::jfet_params p;
  p.idss_a = 6e-3;
  p.vp_v = -2.0;
  p.lambda_per_v = 0.01;
  p.is_a = 1e-14;
  p.n = 1.2;
  const double vt = model::thermal_voltage(model::default_temperature_k);
  const model::detail::device_consts d = model::detail::device_consts::of(p, vt);
  struct row {
    const char* source;
    double vgs_v, vds_v;
  };
  // Points in every region of the level-1 model (Shichman & Hodges 1968) and of the
  // junction: cutoff, triode, saturation, inverse mode, forward gate, beyond exp(80).
  const row rows[] = {
      {"cutoff, gate deeply reverse", -3.0, 5.0},       {"saturation", -1.0, 5.0},
      {"saturation near pinch-off", -1.99, 0.5},        {"triode", -0.5, 0.3},
      {"triode at vds = 0", -0.5, 0.0},                 {"inverse mode", -0.5, -0.4},
      {"inverse saturation", 0.2, -3.0},                {"gate forward 0.6 V", 0.6, 4.0},
      {"gate-drain forward", 0.3, -0.5},                {"junction beyond exp(80)", 2.6, 0.1},
      {"junction just above deep reverse", -1.17, 8.0}, {"junction just below deep reverse", -1.19, 8.0},
  };
  for (const row& r : rows) {
    CAPTURE(r.source);
    CAPTURE(r.vgs_v);
    CAPTURE(r.vds_v);
    const model::detail::port_currents c = model::detail::evaluate_ports(d, r.vgs_v, r.vds_v);
    const model::channel_eval ch = model::drain_current(p, r.vgs_v, r.vds_v);
    const model::junction_eval js = model::junction_current(p, r.vgs_v, vt);
    const model::junction_eval jd = model::junction_current(p, r.vgs_v - r.vds_v, vt);
    // Same equations, evaluated with a multiplication by 1/(n Vt) instead of a division:
    // a few ulps apart at most.
    auto close = [](double a, double b, double abs_floor) { return std::fabs(a - b) <= 1e-14 * std::fabs(b) + abs_floor; };
    CHECK(close(c.id_a, ch.id_a, 0.0));
    CHECK(close(c.gm_s, ch.gm_s, 0.0));
    CHECK(close(c.gds_s, ch.gds_s, 0.0));
    CHECK(close(c.igs_a, js.i_a, 0.0));
    CHECK(close(c.igd_a, jd.i_a, 0.0));
    // Deeply reverse-biased junctions report g = 0 instead of about 1e-30 S.
    CHECK(close(c.ggs_s, js.g_s, 1e-25));
    CHECK(close(c.ggd_s, jd.g_s, 1e-25));
  }
}

TEST_CASE("the acceptance's channel-only current is the engine's channel current in every region") {
  // The Newton acceptance takes the channel's linearisation error exactly from this
  // function, so it must be the id of evaluate_ports() (itself checked against jfet.hpp
  // above) bit for bit: cutoff, triode, saturation and inverse mode on a grid (common practice).
  model::jfet_params p;
  p.idss_a = 8e-3;
  p.vp_v = -2.5;
  p.lambda_per_v = 0.02;
  const model::detail::device_consts d = model::detail::device_consts::of(p, 0.025865);
  int nonzero = 0;
  for (double vgs = -3.0; vgs <= 0.5; vgs += 0.173) {
    for (double vds = -3.0; vds <= 6.0; vds += 0.211) {
      CAPTURE(vgs);
      CAPTURE(vds);
      const double id = model::detail::channel_current(d, vgs, vds);
      CHECK(id == model::detail::evaluate_ports(d, vgs, vds).id_a);
      if (id != 0.0) ++nonzero;
    }
  }
  CHECK(nonzero > 100);
}

TEST_CASE("silence in gives a flat output at the DC operating point") {
  for (const auto& st : engine_stages) {
    const std::string name = st.name;
    CAPTURE(name);
    const auto [net, op] = solve(st);
    model::dk_engine eng(net, op, 384000.0);
    const double y_op = net.sign * model::node_v(op.x, net.output_node);
    const double y0 = eng.process(0.0);
    double worst = 0.0;
    for (int n = 0; n < 4000; ++n) worst = std::max(worst, std::fabs(eng.process(0.0) - y0));
    // The trapezoidal rule keeps a DC solution fixed (common practice); what remains is
    // rounding: eps |q| per sample (about 1e-14 V on a 48 V stage) taken up by modes that
    // decay slowly or, for loops of capacitors and sources, alternate almost undamped.
    // The DC point itself is as exact as the slowest mode allows (about 1e-11 V here).
    CHECK(worst <= 1e-12);
    CHECK(std::fabs(y0 - y_op) <= 1e-10);
    CHECK(std::fabs(eng.dc_output_v() - y0) <= 1e-13);
    CHECK(eng.stats().failed == 0);
    CHECK(eng.stats().mean_evaluations() == doctest::Approx(1.0).epsilon(1e-12));
  }
}

TEST_CASE("the sample loop allocates nothing") {
#ifdef PINCHOFF_COUNT_ALLOCATIONS
  const model::network net = network_of(pinchoff::test::booster_9v, "booster");
  model::dk_engine eng(net, 384000.0);
  Eigen::MatrixXd sens = Eigen::MatrixXd::Identity(eng.states(), eng.states());
  std::vector<double> buf(512);
  for (std::size_t n = 0; n < buf.size(); ++n) buf[n] = sine(8.0, 1000.0, 384000.0, static_cast<int>(n));
  const long before = heap_allocations.load();
  double sum = 0.0;
  for (int n = 0; n < 2000; ++n) sum += eng.process(sine(8.0, 1000.0, 384000.0, n));
  eng.process(buf, buf);
  for (int n = 0; n < 500; ++n) sum += eng.process_tracked(sine(8.0, 1000.0, 384000.0, n), sens);
  const long during = heap_allocations.load() - before;
  CHECK(std::isfinite(sum));
  CHECK(during == 0);
  // The counter itself works: one vector allocates.
  std::vector<double>* probe = new std::vector<double>(100);
  CHECK(heap_allocations.load() - before >= 2);
  delete probe;
#else
  MESSAGE("allocation counting needs glibc without a sanitizer; not checked in this build");
#endif
}

TEST_CASE("the sample loop allocates nothing with more than one JFET") {
#ifdef PINCHOFF_COUNT_ALLOCATIONS
  // The general path (LU of I - F Jf, per-JFET limiting and bounds, sub-steps), at a drive
  // that clips both stages and so takes every branch of it; sub-steps forced by a low
  // iteration cap in a second engine.
  const model::network net = pinchoff::test::two_stage_network();
  model::dk_engine eng(net, 384000.0);
  model::dk_options few;
  few.max_iterations = 3;
  model::dk_options confirm;
  confirm.confirm = true;
  model::dk_engine starved(net, 384000.0, few), checked(net, 384000.0, confirm);
  REQUIRE(eng.devices() == 2);
  Eigen::MatrixXd sens = Eigen::MatrixXd::Identity(eng.states(), eng.states());
  std::vector<double> buf(512);
  for (std::size_t n = 0; n < buf.size(); ++n) buf[n] = sine(6.0, 1000.0, 384000.0, static_cast<int>(n));
  const long before = heap_allocations.load();
  double sum = 0.0;
  for (int n = 0; n < 2000; ++n) {
    const double u = sine(6.0, 1000.0, 384000.0, n);
    sum += eng.process(u) + starved.process(u) + checked.process(u);
  }
  eng.process(buf, buf);
  for (int n = 0; n < 500; ++n) sum += eng.process_tracked(sine(6.0, 1000.0, 384000.0, n), sens);
  const long during = heap_allocations.load() - before;
  CHECK(std::isfinite(sum));
  CHECK(during == 0);
  CHECK(starved.stats().substepped > 0);
  CHECK(checked.stats().bound_misses == 0);
  eng.reset();
#else
  MESSAGE("allocation counting needs glibc without a sanitizer; not checked in this build");
#endif
}

TEST_CASE("the sample loop allocates nothing on chains of two to seven stages") {
#ifdef PINCHOFF_COUNT_ALLOCATIONS
  // Every compile-time size of the general path (2..6 JFETs) and the run-time one (7), wide
  // and portable loops, at a drive deep into clipping, with sub-steps forced by a low
  // iteration cap and the tracked monodromy.
  for (int k = 2; k <= 7; ++k) {
    CAPTURE(k);
    pinchoff::test::cascade_options o;
    o.rail_filters = true;
    o.dc_follower = k % 2 == 1;
    const model::network net = pinchoff::test::cascade(k, o);
    model::dk_options few;
    few.max_iterations = 3;
    model::dk_options portable;
    portable.wide_kernels = false;
    model::dk_engine eng(net, 384000.0), starved(net, 384000.0, few), plain(net, 384000.0, portable);
    REQUIRE(eng.devices() == k);
    Eigen::MatrixXd sens = Eigen::MatrixXd::Identity(eng.states(), eng.states());
    std::vector<double> buf(256);
    for (std::size_t n = 0; n < buf.size(); ++n) buf[n] = sine(10.0, 1000.0, 384000.0, static_cast<int>(n));
    const long before = heap_allocations.load();
    double sum = 0.0;
    for (int n = 0; n < 600; ++n) {
      const double u = sine(10.0, 1000.0, 384000.0, n);
      sum += eng.process(u) + starved.process(u) + plain.process(u);
    }
    eng.process(buf, buf);
    for (int n = 0; n < 100; ++n) sum += eng.process_tracked(sine(10.0, 1000.0, 384000.0, n), sens);
    const long during = heap_allocations.load() - before;
    CHECK(std::isfinite(sum));
    CHECK(during == 0);
    CHECK(starved.stats().substepped > 0);
    CHECK(eng.stats().failed == 0);
  }
#else
  MESSAGE("allocation counting needs glibc without a sanitizer; not checked in this build");
#endif
}

TEST_CASE("the solution does not depend on the warm start") {
  // Newton's answer is the same from every predictor; only the iteration count changes.
  const model::network net = network_of(pinchoff::test::divider_18v, "divider");
  const model::operating_point op = model::solve_operating_point(net);
  std::vector<double> y[4];
  double mean[4];
  for (int order = 0; order < 4; ++order) {
    model::dk_options o;
    o.predictor_order = order;
    model::dk_engine eng(net, op, 384000.0, o);
    for (int n = 0; n < 3000; ++n) y[order].push_back(eng.process(sine(6.0, 1000.0, 384000.0, n)));
    CHECK(eng.stats().failed == 0);
    // Iteration counts at moderate drive, where the waveform is smooth enough for the
    // warm start's order to matter (in hard clipping the kinks dominate either way).
    model::dk_engine moderate(net, op, 384000.0, o);
    for (int n = 0; n < 3000; ++n) moderate.process(sine(1.0, 1000.0, 384000.0, n));
    mean[order] = moderate.stats().mean_evaluations();
  }
  for (int order = 1; order < 4; ++order) {
    CAPTURE(order);
    double worst = 0.0;
    for (std::size_t n = 0; n < y[0].size(); ++n) worst = std::max(worst, std::fabs(y[order][n] - y[0][n]));
    CHECK(worst <= 1e-9);
  }
  // The warm start pays: fewer evaluations than starting from the last solution, and the
  // Adams-Bashforth orders fewer than the first-order step along dv/dp alone (the higher
  // orders follow how dv/dp changes along the way; Hairer, Norsett & Wanner, Solving
  // ODEs I, sec. III.1, from memory).
  CAPTURE(mean[0]);
  CAPTURE(mean[1]);
  CAPTURE(mean[2]);
  CAPTURE(mean[3]);
  CHECK(mean[1] < mean[0]);
  CHECK(mean[2] < mean[1]);
  CHECK(mean[3] < mean[1]);
}

TEST_CASE("a small drive needs one evaluation a sample") {
  // At 0.1 V peak the port voltages move smoothly, and the warm start lands within the
  // acceptance bound of the solution every sample (what README.md says of the engine).
  for (const auto& st : engine_stages) {
    const std::string name = st.name;
    CAPTURE(name);
    const auto [net, op] = solve(st);
    model::dk_engine eng(net, op, 384000.0);
    for (int n = 0; n < 3840; ++n) eng.process(sine(0.1, 1000.0, 384000.0, n));
    CHECK(eng.stats().failed == 0);
    CHECK(eng.stats().max_evaluations == 1);
  }
}

TEST_CASE("the acceptance bound is sound: confirmed residuals never exceed the tolerance") {
  for (const auto& st : engine_stages) {
    for (double amp : {0.1, 3.0, 20.0}) {
      const std::string name = st.name;
    CAPTURE(name);
      CAPTURE(amp);
      const auto [net, op] = solve(st);
      model::dk_options confirm;
      confirm.confirm = true;
      model::dk_engine fast(net, op, 384000.0), checked(net, op, 384000.0, confirm);
      double worst = 0.0;
      for (int n = 0; n < 1536; ++n) {
        const double u = sine(amp, 1000.0, 384000.0, n);
        worst = std::max(worst, std::fabs(fast.process(u) - checked.process(u)));
      }
      CHECK(checked.stats().bound_misses == 0);
      CHECK(checked.stats().failed == 0);
      CHECK(worst <= 1e-9);
    }
  }
}

TEST_CASE("a sample Newton cannot solve directly is sub-stepped, and what still fails is counted") {
  const model::network net = network_of(pinchoff::test::booster_9v, "booster");
  const model::operating_point op = model::solve_operating_point(net);
  SUBCASE("three iterations per attempt: sub-steps rescue the hard samples") {
    model::dk_options o;
    o.max_iterations = 3;
    model::dk_engine eng(net, op, 384000.0, o);
    for (int n = 0; n < 1536; ++n) CHECK(std::isfinite(eng.process(sine(15.0, 1000.0, 384000.0, n))));
    CHECK(eng.stats().substepped > 0);
    CHECK(eng.stats().failed == 0);
  }
  SUBCASE("one iteration and no sub-steps: failures are counted, outputs stay finite") {
    model::dk_options o;
    o.max_iterations = 1;
    o.max_substep_levels = 0;
    model::dk_engine eng(net, op, 384000.0, o);
    bool finite = true;
    for (int n = 0; n < 1536; ++n) finite = finite && std::isfinite(eng.process(sine(15.0, 1000.0, 384000.0, n)));
    CHECK(finite);
    CHECK(eng.stats().failed > 0);
    CHECK(eng.stats().substepped == 0);
  }
}

TEST_CASE("the wide and the portable sample loops give the same samples") {
  // The loop compiled for AVX2 + FMA computes the same sums with fused multiply-adds (one
  // rounding instead of two), so the two differ by rounding only: far below the 1e-9 V the
  // engine is held to against the reference (common practice: compare against a plain path).
  for (const auto& st : engine_stages) {
    const std::string name = st.name;
    CAPTURE(name);
    const auto [net, op] = solve(st);
    model::dk_options portable;
    portable.wide_kernels = false;
    model::dk_engine wide(net, op, 384000.0), plain(net, op, 384000.0, portable);
    double worst = 0.0;
    for (int n = 0; n < 3000; ++n) {
      const double u = sine(6.0, 1000.0, 384000.0, n);
      worst = std::max(worst, std::fabs(wide.process(u) - plain.process(u)));
    }
    CHECK(worst <= 1e-10);
    CHECK(wide.stats().failed == 0);
    CHECK(plain.stats().failed == 0);
  }
}

}  // namespace test_dk_engine
