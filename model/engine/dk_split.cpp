#include "model/engine/dk_split.hpp"

#include <algorithm>
#include <cmath>

namespace pinchoff::model {
namespace {

using row_ld = Eigen::Matrix<long double, 1, Eigen::Dynamic>;

matrix_ld rows_cols(const matrix_ld& m, const std::vector<int>& r, const std::vector<int>& c) {
  matrix_ld out(static_cast<Eigen::Index>(r.size()), static_cast<Eigen::Index>(c.size()));
  for (std::size_t i = 0; i < r.size(); ++i)
    for (std::size_t j = 0; j < c.size(); ++j) out(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)) = m(r[i], c[j]);
  return out;
}

// The blocks: the connected components of S's graph (and each JFET's three terminals)
// without the joints. comp[u] is u's component, -1 for a joint.
int components(const std::vector<std::vector<int>>& adj, const std::vector<char>& joint, std::vector<int>& comp) {
  const int n = static_cast<int>(adj.size());
  comp.assign(static_cast<std::size_t>(n), -1);
  int count = 0;
  std::vector<int> stack;
  for (int s = 0; s < n; ++s) {
    if (joint[static_cast<std::size_t>(s)] || comp[static_cast<std::size_t>(s)] >= 0) continue;
    comp[static_cast<std::size_t>(s)] = count;
    stack.assign(1, s);
    while (!stack.empty()) {
      const int u = stack.back();
      stack.pop_back();
      for (int v : adj[static_cast<std::size_t>(u)])
        if (!joint[static_cast<std::size_t>(v)] && comp[static_cast<std::size_t>(v)] < 0) {
          comp[static_cast<std::size_t>(v)] = count;
          stack.push_back(v);
        }
    }
    ++count;
  }
  return count;
}

}  // namespace

std::optional<dk_split> split_at_joints(const network& net, double sample_rate_hz) {
  const int nd = net.devices();
  if (nd < 2 || static_cast<int>(net.stages.size()) != nd) return std::nullopt;
  const discrete_network dn = discrete_mna(net, sample_rate_hz);
  const int n = static_cast<int>(dn.s.rows()), nu = dn.node_unknowns, ns = dn.states;
  const int ncols = ns + 2 + 3 * nd;
  auto unknown = [](int node) { return node - 1; };

  // S's graph, each JFET's terminals joined (its currents couple them).
  std::vector<std::vector<int>> adj(static_cast<std::size_t>(n));
  for (int i = 0; i < n; ++i)
    for (int j = 0; j < n; ++j)
      if (i != j && (dn.s(i, j) != 0.0 || dn.s(j, i) != 0.0)) adj[static_cast<std::size_t>(i)].push_back(j);
  std::vector<std::vector<int>> terminals(static_cast<std::size_t>(nd));
  for (int k = 0; k < nd; ++k) {
    const net_jfet& q = net.jfets[static_cast<std::size_t>(k)];
    for (int node : {q.gate, q.drain, q.source})
      if (node != 0) terminals[static_cast<std::size_t>(k)].push_back(unknown(node));
    for (int a : terminals[static_cast<std::size_t>(k)])
      for (int b : terminals[static_cast<std::size_t>(k)])
        if (a != b) adj[static_cast<std::size_t>(a)].push_back(b);
  }

  // The joints: the supply (its node and branch), each stage's output but the last's, and
  // from the supply outwards, ring by ring, what still joins two JFETs (a reservoir node, a
  // shared rail).
  std::vector<char> joint(static_cast<std::size_t>(n), 0);
  std::vector<int> frontier;
  if (net.supply_node != 0) frontier.push_back(unknown(net.supply_node));
  frontier.push_back(nu);
  for (int u : frontier) joint[static_cast<std::size_t>(u)] = 1;
  for (int s = 0; s + 1 < nd; ++s)
    if (net.stages[static_cast<std::size_t>(s)].output != 0) joint[static_cast<std::size_t>(unknown(net.stages[static_cast<std::size_t>(s)].output))] = 1;
  // A rail two stages share, and a node two stages' rails hang from (the reservoir behind
  // their rail filters).
  {
    std::vector<int> rails;
    for (const net_stage& st : net.stages)
      if (st.rail != 0) rails.push_back(unknown(st.rail));
    std::sort(rails.begin(), rails.end());
    std::vector<int> rails_at(static_cast<std::size_t>(n), 0);
    for (std::size_t i = 0; i < rails.size(); ++i) {
      if (i > 0 && rails[i] == rails[i - 1]) {
        joint[static_cast<std::size_t>(rails[i])] = 1;  // shared
        continue;
      }
      for (int v : adj[static_cast<std::size_t>(rails[i])]) ++rails_at[static_cast<std::size_t>(v)];
    }
    for (int u = 0; u < nu; ++u)
      if (rails_at[static_cast<std::size_t>(u)] >= 2) joint[static_cast<std::size_t>(u)] = 1;
  }
  std::vector<int> comp;
  std::vector<int> of_device(static_cast<std::size_t>(nd));  // each JFET's component, -1: on joints alone
  auto place_devices = [&](int nc) {
    std::vector<int> devices_in(static_cast<std::size_t>(nc), 0);
    for (int k = 0; k < nd; ++k) {
      int c = -1;
      for (int u : terminals[static_cast<std::size_t>(k)])
        if (comp[static_cast<std::size_t>(u)] >= 0) c = comp[static_cast<std::size_t>(u)];
      of_device[static_cast<std::size_t>(k)] = c;
      if (c >= 0) ++devices_in[static_cast<std::size_t>(c)];
    }
    return devices_in;
  };
  for (int round = 0;; ++round) {
    const std::vector<int> devices_in = place_devices(components(adj, joint, comp));
    if (std::all_of(devices_in.begin(), devices_in.end(), [](int d) { return d <= 1; })) {
      // A part that reaches no JFET but through joints goes with the stage whose rail it
      // holds (a rail filter behind a drain that is a joint), else joins the joints.
      std::vector<int> owner(devices_in.size(), -1);
      for (std::size_t s = 0; s < net.stages.size(); ++s) {
        const int r = net.stages[s].rail;
        if (r != 0 && comp[static_cast<std::size_t>(unknown(r))] >= 0) owner[static_cast<std::size_t>(comp[static_cast<std::size_t>(unknown(r))])] = net.stages[s].jfet;
      }
      for (int u = 0; u < n; ++u) {
        const int c = comp[static_cast<std::size_t>(u)];
        if (c >= 0 && devices_in[static_cast<std::size_t>(c)] == 0 && owner[static_cast<std::size_t>(c)] < 0) joint[static_cast<std::size_t>(u)] = 1;
      }
      for (int& c : comp)
        if (c >= 0 && devices_in[static_cast<std::size_t>(c)] == 0 && owner[static_cast<std::size_t>(c)] >= 0) c = -2 - owner[static_cast<std::size_t>(c)];
      break;
    }
    if (round == 4) return std::nullopt;
    std::vector<int> next;
    for (int u : frontier)
      for (int v : adj[static_cast<std::size_t>(u)])
        if (!joint[static_cast<std::size_t>(v)] && devices_in[static_cast<std::size_t>(comp[static_cast<std::size_t>(v)])] >= 2) {
          joint[static_cast<std::size_t>(v)] = 1;
          next.push_back(v);
        }
    if (next.empty()) return std::nullopt;
    frontier = next;
  }

  dk_split sp;
  sp.states = ns;
  sp.devices = nd;
  for (int u = 0; u < n; ++u)
    if (joint[static_cast<std::size_t>(u)]) sp.joint_unknowns.push_back(u);
  const int nj = static_cast<int>(sp.joint_unknowns.size());
  sp.joints = nj;
  std::vector<int> block_of(static_cast<std::size_t>(n), -1);  // unknown -> block (-1: joint)
  for (int u = 0; u < n; ++u) {
    if (joint[static_cast<std::size_t>(u)]) continue;
    const int c = comp[static_cast<std::size_t>(u)];
    if (c <= -2) block_of[static_cast<std::size_t>(u)] = -2 - c;  // a rail filter given to its stage
    for (int k = 0; k < nd; ++k)
      if (of_device[static_cast<std::size_t>(k)] >= 0 && c == of_device[static_cast<std::size_t>(k)]) block_of[static_cast<std::size_t>(u)] = k;
  }

  const matrix_ld s_ld = dn.s.cast<long double>(), r_ld = dn.rhs.cast<long double>();
  std::vector<int> all_cols(static_cast<std::size_t>(ncols));
  for (int c = 0; c < ncols; ++c) all_cols[static_cast<std::size_t>(c)] = c;
  const matrix_ld s_jj = rows_cols(s_ld, sp.joint_unknowns, sp.joint_unknowns);
  matrix_ld sigma = s_jj;
  matrix_ld joint_in = rows_cols(r_ld, sp.joint_unknowns, all_cols);

  // Per block: K_b S_bJ and K_b R_b, and what the joints see of it.
  std::vector<matrix_ld> kbj(static_cast<std::size_t>(nd)), kbr(static_cast<std::size_t>(nd));
  sp.blocks.resize(static_cast<std::size_t>(nd));
  for (int k = 0; k < nd; ++k) {
    dk_split::block& b = sp.blocks[static_cast<std::size_t>(k)];
    b.device = k;
    for (int u = 0; u < n; ++u)
      if (block_of[static_cast<std::size_t>(u)] == k) b.unknowns.push_back(u);
    for (int c = 0; c < ncols; ++c)
      for (int u : b.unknowns)
        if (dn.rhs(u, c) != 0.0) {
          b.columns.push_back(c);
          break;
        }
    if (b.unknowns.empty()) {  // a JFET on joints alone: its ports and currents are the joints'
      kbj[static_cast<std::size_t>(k)].resize(0, nj);
      kbr[static_cast<std::size_t>(k)].resize(0, 0);
      b.to_joint.resize(nj, 0);
      continue;
    }
    const matrix_ld s_bb = rows_cols(s_ld, b.unknowns, b.unknowns);
    const Eigen::FullPivLU<matrix_ld> lu(s_bb);
    if (!lu.isInvertible() || !(static_cast<double>(lu.rcond()) >= 1e-15)) return std::nullopt;
    const matrix_ld s_bj = rows_cols(s_ld, b.unknowns, sp.joint_unknowns);
    const matrix_ld s_jb = rows_cols(s_ld, sp.joint_unknowns, b.unknowns);
    const matrix_ld r_b = rows_cols(r_ld, b.unknowns, b.columns);
    kbj[static_cast<std::size_t>(k)] = refined_solve(lu, s_bb, s_bj);
    kbr[static_cast<std::size_t>(k)] = refined_solve(lu, s_bb, r_b);
    sigma -= s_jb * kbj[static_cast<std::size_t>(k)];
    const matrix_ld to_joint = -(s_jb * kbr[static_cast<std::size_t>(k)]);
    b.to_joint = to_joint.cast<double>();
    for (std::size_t c = 0; c < b.columns.size(); ++c) joint_in.col(b.columns[c]) += to_joint.col(static_cast<Eigen::Index>(c));
  }
  {
    const Eigen::FullPivLU<matrix_ld> lu(sigma);
    if (!lu.isInvertible() || !(static_cast<double>(lu.rcond()) >= 1e-15)) return std::nullopt;
  }
  sp.sigma = sigma.cast<double>();
  sp.joint_in = joint_in.cast<double>();

  // A row read from z, in block k's columns and the joints: phi_b K_b R_b and
  // phi_J - phi_b K_b S_bJ. Returns false where it reads unknowns of another block.
  auto read = [&](const Eigen::RowVectorXd& phi, int& k, row_ld& in, row_ld& on_j) {
    k = -1;
    for (int u = 0; u < n; ++u) {
      if (phi[u] == 0.0 || joint[static_cast<std::size_t>(u)]) continue;
      if (k >= 0 && block_of[static_cast<std::size_t>(u)] != k) return false;
      k = block_of[static_cast<std::size_t>(u)];
    }
    on_j.resize(nj);
    for (int j = 0; j < nj; ++j) on_j[j] = phi[sp.joint_unknowns[static_cast<std::size_t>(j)]];
    if (k < 0) {
      in.resize(0);
      return true;
    }
    const dk_split::block& b = sp.blocks[static_cast<std::size_t>(k)];
    row_ld phi_b(static_cast<Eigen::Index>(b.unknowns.size()));
    for (std::size_t i = 0; i < b.unknowns.size(); ++i) phi_b[static_cast<Eigen::Index>(i)] = phi[b.unknowns[i]];
    in = phi_b * kbr[static_cast<std::size_t>(k)];
    on_j -= phi_b * kbj[static_cast<std::size_t>(k)];
    return true;
  };

  for (int k = 0; k < nd; ++k) {
    dk_split::block& b = sp.blocks[static_cast<std::size_t>(k)];
    b.ports_in.resize(2, static_cast<Eigen::Index>(b.columns.size()));
    b.ports_j.resize(2, nj);
    for (int p = 0; p < 2; ++p) {
      int at = -1;
      row_ld in, on_j;
      if (!read(dn.port_rows.row(2 * k + p), at, in, on_j) || (at >= 0 && at != k)) return std::nullopt;
      if (at < 0) in = row_ld::Zero(static_cast<Eigen::Index>(b.columns.size()));
      if (!b.columns.empty()) b.ports_in.row(p) = in.cast<double>();  // (a JFET on joints alone reads no column)
      b.ports_j.row(p) = on_j.cast<double>();
    }
  }
  for (int s = 0; s < ns; ++s) {
    int at = -1;
    row_ld in, on_j;
    if (!read(dn.state_rows.row(s), at, in, on_j)) return std::nullopt;
    if (at < 0) {
      sp.joint_held.push_back(s);
      sp.joint_states_j.conservativeResize(static_cast<Eigen::Index>(sp.joint_held.size()), nj);
      sp.joint_states_j.row(sp.joint_states_j.rows() - 1) = on_j.cast<double>();
      sp.joint_states_self.conservativeResize(static_cast<Eigen::Index>(sp.joint_held.size()));
      sp.joint_states_self[sp.joint_states_self.size() - 1] = dn.state_self[s];
      continue;
    }
    dk_split::block& b = sp.blocks[static_cast<std::size_t>(at)];
    const auto self = std::find(b.columns.begin(), b.columns.end(), s);
    if (self == b.columns.end()) return std::nullopt;  // a state its block does not read
    in[static_cast<Eigen::Index>(self - b.columns.begin())] += dn.state_self[s];
    b.held.push_back(s);
    const Eigen::Index r = static_cast<Eigen::Index>(b.held.size()) - 1;
    b.states_in.conservativeResize(r + 1, static_cast<Eigen::Index>(b.columns.size()));
    b.states_j.conservativeResize(r + 1, nj);
    b.states_in.row(r) = in.cast<double>();
    b.states_j.row(r) = on_j.cast<double>();
  }
  for (dk_split::block& b : sp.blocks) {
    if (b.held.empty()) {
      b.states_in.resize(0, static_cast<Eigen::Index>(b.columns.size()));
      b.states_j.resize(0, nj);
    }
  }
  {
    row_ld in, on_j;
    if (!read(dn.out_row, sp.output_block, in, on_j)) return std::nullopt;
    sp.out_in = in.cast<double>();
    sp.out_j = on_j.cast<double>();
  }
  if (sp.joint_held.empty()) {
    sp.joint_states_j.resize(0, nj);
    sp.joint_states_self.resize(0);
  }
  return sp;
}

dk_matrices dk_split::dense(double sample_rate_hz) const {
  // In extended precision: this is the split's check against the whole solve (a test),
  // so its own rounding should not hide a fault in the split.
  const int ncols = states + 2 + 3 * devices;
  const matrix_ld wj = sigma.cast<long double>().fullPivLu().solve(matrix_ld(joint_in.cast<long double>()));
  auto scatter = [&](const block& b, const Eigen::MatrixXd& in) {
    matrix_ld full = matrix_ld::Zero(in.rows(), ncols);
    for (std::size_t c = 0; c < b.columns.size(); ++c) full.col(b.columns[c]) = in.col(static_cast<Eigen::Index>(c)).cast<long double>();
    return full;
  };
  matrix_ld st(states, ncols), ports(2 * devices, ncols);
  for (const block& b : blocks) {
    ports.middleRows(2 * b.device, 2) = scatter(b, b.ports_in) + b.ports_j.cast<long double>() * wj;
    const matrix_ld rows = scatter(b, b.states_in) + b.states_j.cast<long double>() * wj;
    for (std::size_t r = 0; r < b.held.size(); ++r) st.row(b.held[r]) = rows.row(static_cast<Eigen::Index>(r));
  }
  for (std::size_t r = 0; r < joint_held.size(); ++r) {
    st.row(joint_held[r]) = joint_states_j.row(static_cast<Eigen::Index>(r)).cast<long double>() * wj;
    st(joint_held[r], joint_held[r]) += joint_states_self[static_cast<Eigen::Index>(r)];
  }
  row_ld out = out_j.cast<long double>() * wj;
  if (output_block >= 0) out += scatter(blocks[static_cast<std::size_t>(output_block)], out_in);
  dk_matrices m;
  m.states = states;
  m.devices = devices;
  m.sample_rate_hz = sample_rate_hz;
  const int ni = 3 * devices;
  m.a = st.leftCols(states).cast<double>();
  m.b = st.middleCols(states, 2).cast<double>();
  m.c = st.rightCols(ni).cast<double>();
  m.d = ports.leftCols(states).cast<double>();
  m.e = ports.middleCols(states, 2).cast<double>();
  m.f = ports.rightCols(ni).cast<double>();
  m.d_out = out.head(states).cast<double>();
  m.e_out = out.segment(states, 2).cast<double>();
  m.f_out = out.tail(ni).cast<double>();
  return m;
}

}  // namespace pinchoff::model
