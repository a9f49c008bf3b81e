// Noise weightings (dsp/weighting.hpp) against the tables of their standards.
#include <cmath>

#include <doctest/doctest.h>

#include "dsp/weighting.hpp"

namespace test_weighting {

namespace {
struct table_row {
  double f_hz;
  double db;
  double tol_db;
};
}  // namespace

TEST_CASE("A-weighting matches the table of IEC 61672-1") {
  // IEC 61672-1:2013, Table 3 (from memory): A at the exact base-10 frequencies of the
  // nominal 31.5 Hz, 100 Hz, 1 kHz and 10 kHz (f = 1000 x 10^(n/10) Hz), values given to
  // 0.1 dB, so the tolerance is the table's rounding. More rows of the same table (from
  // memory): 63 Hz -26.2, 250 Hz -8.6, 2 kHz +1.2, 4 kHz +1.0, 8 kHz -1.1, 20 kHz -9.3.
  const table_row rows[] = {
      {std::pow(10.0, 1.5), -39.4, 0.05},  // nominal 31.5 Hz
      {100.0, -19.1, 0.05},
      {1000.0, 0.0, 1e-9},                 // the standard's normalisation
      {10000.0, -2.5, 0.05},
      {std::pow(10.0, 1.8), -26.2, 0.05},  // nominal 63 Hz
      {std::pow(10.0, 2.4), -8.6, 0.05},   // nominal 250 Hz
      {std::pow(10.0, 3.3), 1.2, 0.05},    // nominal 2 kHz
      {std::pow(10.0, 3.6), 1.0, 0.05},    // nominal 4 kHz
      {std::pow(10.0, 3.9), -1.1, 0.05},   // nominal 8 kHz
      {std::pow(10.0, 4.3), -9.3, 0.05},   // nominal 20 kHz
  };
  for (const table_row& r : rows) {
    CAPTURE(r.f_hz);
    CHECK(std::fabs(pinchoff::dsp::a_weighting_db(r.f_hz) - r.db) <= r.tol_db);
    CHECK(std::fabs(20.0 * std::log10(pinchoff::dsp::a_weighting_gain(r.f_hz)) - r.db) <= r.tol_db);
  }
}

TEST_CASE("ITU-R 468 weighting matches the table of the recommendation") {
  // ITU-R BS.468-4, Table 1 (from memory): the response at its table frequencies, 0 dB at
  // 1 kHz and +12.2 dB at 6.3 kHz. The table states its values to 0.1 dB; the tolerance is
  // that rounding (0.05 dB) plus the 0.05 dB the rational realisation is allowed to differ
  // by in band, far below the recommendation's own tolerances (+-0.2 dB near 6.3 kHz,
  // +-2 dB at 31.5 Hz).
  const table_row rows[] = {
      {31.5, -29.9, 0.1},  {63.0, -23.9, 0.1},  {100.0, -19.8, 0.1},  {200.0, -13.8, 0.1},   {400.0, -7.8, 0.1},
      {800.0, -1.9, 0.1},  {1000.0, 0.0, 1e-9}, {2000.0, 5.6, 0.1},   {3150.0, 9.0, 0.1},    {4000.0, 10.5, 0.1},
      {5000.0, 11.7, 0.1}, {6300.0, 12.2, 0.1}, {7100.0, 12.0, 0.1},  {8000.0, 11.4, 0.1},   {9000.0, 10.1, 0.1},
      {10000.0, 8.1, 0.1}, {12500.0, 0.0, 0.1}, {14000.0, -5.3, 0.1}, {16000.0, -11.7, 0.1}, {20000.0, -22.2, 0.1},
      {31500.0, -42.7, 0.1},
  };
  for (const table_row& r : rows) {
    CAPTURE(r.f_hz);
    CHECK(std::fabs(pinchoff::dsp::itu468_weighting_db(r.f_hz) - r.db) <= r.tol_db);
  }
  CHECK(pinchoff::dsp::itu468_weighting_gain(0.0) == 0.0);
  CHECK(pinchoff::dsp::a_weighting_gain(0.0) == 0.0);
}

}  // namespace test_weighting
