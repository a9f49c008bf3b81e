#pragma once
// Headroom: how far the output can swing from its rest value before the JFET leaves the
// clean square-law region, found by a quasi-static sweep of the generator voltage with
// every coupling, bypass and reservoir capacitor held at its DC voltage (the mid-band
// large-signal transfer curve; junction capacitances open).
//
// Clean region: saturation (vds >= vgs - vp), not cut off (vgs > vp), and the gate not
// above the source (vgs <= 0, beyond which the gate junction starts to conduct; common
// practice for JFET stages). A chain is clean while every one of its JFETs is.
#include <string>
#include <vector>

#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"

namespace pinchoff::model {

enum class swing_limit_kind { none, triode, cutoff, gate_forward, no_convergence };
const char* swing_limit_text(swing_limit_kind k) noexcept;

struct swing_limit {
  swing_limit_kind kind{swing_limit_kind::none};
  double output_v{};  ///< excursion of the load voltage from rest, real sign
  double drive_v{};   ///< generator voltage (real sign) at which the limit is reached
};

/// When one stage of a chain first leaves its clean region as the generator's voltage moves
/// away from rest (either way) on the mid-band transfer curve.
struct stage_clip {
  int stage{};                ///< counted from 0
  swing_limit_kind kind{swing_limit_kind::none};  ///< none: clean up to the search limit
  double drive_vpk{};         ///< |generator voltage| at the edge
  double drive_sign{1.0};     ///< the direction it happens in (real signs)
};

struct headroom_figures {
  swing_limit up;    ///< output swinging positive
  swing_limit down;  ///< output swinging negative
  double symmetric_output_vpk{};  ///< min(|up|, |down|): largest clean symmetric swing
  double clean_drive_vpk{};       ///< largest sine peak at the generator that stays clean
  double search_limit_v{};        ///< |generator| searched up to, when a side found no limit
  /// Every stage, the first to leave its clean region first (stages that never leave it
  /// last). up/down above are those of the chain: where its first stage to clip does.
  std::vector<stage_clip> clip_order;
};

/// What analyse_headroom works out beyond the swing: a chain's clip order costs two more
/// sweeps of the transfer curve per side, which the analyses that use only the swing (spread,
/// tune, compare: once per run or probe) skip.
enum class headroom_detail { with_clip_order, swing_only };

/// swing_only: clip_order is left empty.
headroom_figures analyse_headroom(const network& net, const operating_point& op,
                                  headroom_detail detail = headroom_detail::with_clip_order);

}  // namespace pinchoff::model
