#pragma once
// Small-signal (linearised) analysis at the operating point of a network of one JFET or a
// chain of them: each JFET becomes gm, gds and the two gate-junction conductances; capacitors are either admittances s C, or (in the
// mid-band) shorts for coupling, bypass and reservoir capacitors and open for the junction
// capacitances. Solved as a complex modified nodal system.
#include <complex>
#include <limits>
#include <span>
#include <string>
#include <vector>

#include <Eigen/Dense>

#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"

namespace pinchoff::model {

/// The JFET linearised at a point (network frame; the values are the same in real signs).
struct jfet_linear {
  double gm_s{}, gds_s{}, ggs_s{}, ggd_s{};
};
/// The network's only JFET (internal_error for more: use linearise_all).
jfet_linear linearise(const network& net, const operating_point& op);
/// Every JFET of the network, in order.
std::vector<jfet_linear> linearise_all(const network& net, const operating_point& op);

/// How a small-signal solve is set up.
struct ac_setup {
  std::complex<double> s{0.0, 0.0};  ///< complex frequency, used when !midband
  bool midband{true};                ///< large caps shorted, junction caps open
  bool generator_present{true};      ///< false: the generator source is removed (open)
  double generator_v{0.0};           ///< generator amplitude when present
  bool load_present{true};
  int removed_cap{-1};               ///< index of a capacitor left out (its terminals open)
  int admittance_cap{-1};            ///< in the mid-band, this one capacitor is s C instead of a short
  /// In the mid-band, the capacitors that are not shorts (junction, treble cut, capsule) are
  /// open when 0, or their admittances at this frequency (a capsule network's `midband_hz`).
  double small_caps_hz{0.0};
  bool include_gds{true};
  int inject_a{-1};                  ///< node a 1 A test current flows into (-1: none)
  int inject_b{0};                   ///< node it flows out of
};

/// Node voltages (index = node, 0 = ground) of the linearised network.
/// `lins` holds one entry per JFET (internal_error otherwise).
Eigen::VectorXcd solve_small_signal(const network& net, std::span<const jfet_linear> lins, const ac_setup& setup);
/// The same for a network of one JFET.
Eigen::VectorXcd solve_small_signal(const network& net, const jfet_linear& lin, const ac_setup& setup);

/// The modified nodal system behind solve_small_signal: unknowns are the node voltages 1..N-1
/// (row node - 1) and then one branch current per voltage source or shorted capacitor. The
/// noise analysis solves its transpose (the adjoint network) for every source at once.
struct small_signal_system {
  Eigen::MatrixXcd a;
  Eigen::VectorXcd rhs;
};
small_signal_system assemble_small_signal(const network& net, std::span<const jfet_linear> lins, const ac_setup& setup);

/// The factors of a small-signal system's matrix, for solves with it and with its transpose
/// (the adjoint network). LU with partial pivoting, the usual choice for nodal matrices
/// (Golub & Van Loan, Matrix Computations, Alg. 3.4.1); where its reciprocal condition
/// estimate, or its smallest pivot against its largest, is below 1e-12 (a node without a
/// path at this frequency, say), LU with complete
/// pivoting (its pivot search reads the magnitude of every remaining entry at every step,
/// most of the time for complex entries).
class small_signal_factors {
 public:
  explicit small_signal_factors(const Eigen::MatrixXcd& a);
  Eigen::MatrixXcd solve(const Eigen::MatrixXcd& b) const;
  Eigen::MatrixXcd solve_transposed(const Eigen::MatrixXcd& b) const;

 private:
  Eigen::PartialPivLU<Eigen::MatrixXcd> partial_;
  Eigen::FullPivLU<Eigen::MatrixXcd> full_;
  bool complete_{false};
};

/// Low-frequency corner of one large capacitor by the short-circuit time-constant method
/// (Gray & Searle, Electronic Principles, 1969; Gray, Hurst, Lewis & Meyer, sec. 7.3):
/// f = 1 / (2 pi R C), R = resistance its terminals see with the other large capacitors
/// shorted, junction capacitors open and the generator at 0 V.
struct cap_corner {
  std::string key;
  cap_role role;
  double farad{};
  double r_seen_ohm{};
  double corner_hz{};
};

/// One stage of a chain in the mid-band: its JFET's gm and gds, and its gain from the signal
/// at its input (the end of its `between`, or the first stage's input after the generator
/// impedance) to the next stage's input (after that stage's `between`), or to the load for
/// the last stage. The stages' gains multiply to the chain's gain after the generator
/// impedance.
struct stage_small_signal {
  double gm_s{}, gds_s{};
  double rds_ohm{std::numeric_limits<double>::infinity()};
  double gain{};          ///< V/V, signed; NaN when the stage's input carries no signal (a volume at 0)
};

struct small_signal_figures {
  double gm_s{}, gds_s{};         ///< of the first JFET
  double rds_ohm{std::numeric_limits<double>::infinity()};  ///< 1/gds
  double gain_midband{};          ///< generator to load, V/V, signed (negative: inverting); for a capsule
                                  ///< network, at its mid-band frequency (magnitude, with the sign of its real part)
  double gain_midband_no_gds{};   ///< the same with gds = 0
  double zin_ohm{};               ///< looking into the stage after the generator impedance
  double zout_ohm{};              ///< looking back into the output, load removed
  std::vector<cap_corner> corners;  ///< coupling and bypass capacitors (not the reservoir), and a capsule's
                                    ///< high-pass (its farad: capsule, stray and the gate's input capacitance)
  double low_corner_estimate_hz{};  ///< sum of the corners (the method's estimate)
  std::vector<stage_small_signal> stages;  ///< one per stage (empty for a network built without stages)
};

small_signal_figures analyse_small_signal(const network& net, const operating_point& op);

/// One capacitor at a chosen frequency: its reactance, the resistance it sees, and how
/// much the mid-band gain drops when it alone is real (the others shorted): exact for
/// coupling capacitors (a high-pass) and bypass capacitors (a shelf) alike.
struct cap_reactance {
  std::string key;
  double farad{};
  double xc_ohm{};
  double r_seen_ohm{};
  double loss_db{};  ///< <= 0 for coupling capacitors; a bypass capacitor's shelf is also < 0
};
std::vector<cap_reactance> reactances_at(const network& net, const operating_point& op, double f_hz);

/// Loss of a first-order high-pass section with corner fc at frequency f, in dB (<= 0):
/// 20 log10( (f/fc) / sqrt(1 + (f/fc)^2) ).
double highpass_loss_db(double f_hz, double fc_hz) noexcept;

}  // namespace pinchoff::model
