#pragma once
// A chain's discretised network cut at its joints: the per-stage form of the DK equations.
//
// The MNA unknowns z of the discretised network (discrete_mna, dk_matrices.hpp) are split
// into one block per JFET (its stage's own nodes) and the joints J: the supply node and
// the nodes that reach more than one stage (a shared rail, each stage's output that the
// next stage's `between` hangs from). No part connects two blocks but through a joint, so
// S is block diagonal but for the joints' rows and columns, and with K_b = S_bb^-1,
//
//   Sigma w = joint_in [q; u; i]          (Sigma = S_JJ - sum_b S_Jb K_b S_bJ; w = z_J)
//   z_b     = K_b (R_b [q; u; i] - S_bJ w)
//
// Everything the engine reads from z (a JFET's port voltages, a state's capacitor or
// inductor voltage, the output) lies in one block and the joints, so for stage b
//
//   v_b  = ports_in_b  [q; u; i]_b + ports_j_b  w     (vgs, vds of the stage's JFET)
//   q'_s = states_in_b [q; u; i]_b + states_j_b w     (the states the stage holds)
//
// where [q; u; i]_b are only the columns the block reads (its capacitors' and inductors'
// states, the two sources, its JFET's three currents), and joint_in is a sum of one such
// part per block and the joints' own. The cost of a sample is then linear in the stages
// but for the joints' small solve, where the dense matrices (discretise) are quadratic.
// This is the form a per-stage solver works in: each stage's 2 x 2 port equations, the
// joints' voltages the only unknowns the stages share. dense() puts the split back
// together into the matrices discretise builds (a test holds the two together).
#include <optional>
#include <vector>

#include <Eigen/Dense>

#include "model/circuit/network.hpp"
#include "model/engine/dk_matrices.hpp"

namespace pinchoff::model {

struct dk_split {
  int states{0};
  int devices{0};
  int joints{0};
  std::vector<int> joint_unknowns;  ///< the MNA unknowns that are joints, in order
  Eigen::MatrixXd sigma;            ///< joints x joints
  /// joints x (ns + 2 + 3k): the joints' right-hand side from [q; u; i] (its block parts folded in)
  Eigen::MatrixXd joint_in;

  struct block {
    int device{0};                ///< the JFET (index into network::jfets)
    std::vector<int> unknowns;    ///< its MNA unknowns
    std::vector<int> columns;     ///< the columns of [q; u; i] it reads
    std::vector<int> held;        ///< the states it updates
    Eigen::MatrixXd ports_in;     ///< 2 x columns
    Eigen::MatrixXd ports_j;      ///< 2 x joints
    Eigen::MatrixXd states_in;    ///< held x columns
    Eigen::MatrixXd states_j;     ///< held x joints
    Eigen::MatrixXd to_joint;     ///< joints x columns: its part of joint_in
  };
  std::vector<block> blocks;      ///< one a JFET, in the JFETs' order

  /// States on joints alone (both ends on joints or ground): q' = joint_states_j w + self q.
  std::vector<int> joint_held;
  Eigen::MatrixXd joint_states_j;
  Eigen::VectorXd joint_states_self;

  /// The output: in block output_block (columns as that block's), or on the joints (-1).
  int output_block{-1};
  Eigen::RowVectorXd out_in, out_j;

  /// The dense matrices the split stands for (the same layout as discretise's).
  dk_matrices dense(double sample_rate_hz) const;
};

/// Splits a chain's network at its joints, or nothing where it has a single JFET, no stages
/// listed (a network built in code without them), or no cut leaves each JFET in a block of
/// its own with a well-conditioned S_bb.
std::optional<dk_split> split_at_joints(const network& net, double sample_rate_hz);

}  // namespace pinchoff::model
