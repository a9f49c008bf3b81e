#include "model/analysis/warnings.hpp"

#include <algorithm>
#include <cmath>

#include "base/units.hpp"

namespace pinchoff::model {

double supply_current_a(const network& net, const operating_point& op) {
  // The supply branch current is the first unknown after the node voltages; it flows
  // into the source's + terminal, so a delivering supply shows a negative value.
  return std::fabs(op.x[net.node_count - 1]);
}

std::vector<std::string> operating_warnings(const stage& s, const network& net, const operating_point& op) {
  using base::format_si;
  std::vector<std::string> w = s.file_warnings;  // what the file gave that is unusual
  const int devices = std::min(net.devices(), s.stage_count());
  for (int k = 0; k < devices; ++k) {
    const terminal_point t = k == 0 ? op.at : terminals_of(net, op.x, k);
    const jfet_ratings& ratings = s.part(k).ratings;
    const std::string who = s.is_chain() ? "stage " + std::to_string(k + 1) + ": " : std::string();
    const std::string it = s.is_chain() ? "its JFET" : "the JFET";
    if (t.region == jfet_region::cutoff)
      w.push_back(who + it + " is cut off at rest (no drain current): this bias does not amplify");
    else if (t.region == jfet_region::triode)
      w.push_back(who + it + " sits in the triode region at rest (vds below vgs - vp): expect low gain and early clipping");
    if (ratings.vds_max_v && std::fabs(t.vds_v) > *ratings.vds_max_v)
      w.push_back(who + "vds " + format_si(std::fabs(t.vds_v), "V") + " exceeds the rating vds_max " +
                  format_si(*ratings.vds_max_v, "V"));
    else if (ratings.vds_max_v && std::fabs(s.supply.volts_v) > *ratings.vds_max_v)
      // When the channel cuts off (at power-up, or at the top of a large swing) the drain
      // rises to the rail and the whole supply stands across the part (common practice).
      w.push_back(who + "the supply " + format_si(std::fabs(s.supply.volts_v), "V") + " exceeds the rating vds_max " +
                  format_si(*ratings.vds_max_v, "V") + ": the drain reaches the rail when the JFET cuts off");
    const double pd = std::fabs(t.id_a * t.vds_v);
    if (ratings.pd_max_w && pd > *ratings.pd_max_w)
      w.push_back(who + "dissipation " + format_si(pd, "W") + " exceeds the rating pd_max " + format_si(*ratings.pd_max_w, "W"));
    if (ratings.igf_max_a && t.ig_a * net.sign > *ratings.igf_max_a)
      w.push_back(who + "gate forward current " + format_si(std::fabs(t.ig_a), "A") + " exceeds the rating igf_max " +
                  format_si(*ratings.igf_max_a, "A"));
    if (t.vgs_v * net.sign > 0.3)
      w.push_back(who + "the gate junction is forward biased at rest (vgs " + format_si(t.vgs_v, "V") + "): gate current flows");
  }
  const double vsup = std::fabs(s.supply.volts_v);
  if (vsup >= 60.0)
    w.push_back("supply of " + format_si(vsup, "V") +
                " DC: at or above 60 V is beyond the extra-low-voltage class (IEC 62368-1 ES1); such rails can hurt. "
                "Follow local codes and licensed practice");
  const double isup = supply_current_a(net, op);
  if (const phantom_feed* feed = s.supply.phantom) {
    w.push_back("caution: a " + std::string(feed->name) + " phantom feed (" + format_si(feed->volts_v, "V") +
                "); switch phantom power off at the preamp before connecting or reworking the microphone circuit");
    if (isup > feed->max_current_a)
      w.push_back("draws " + format_si(isup, "A") + " from the " + std::string(feed->name) + " phantom feed; IEC 61938 "
                  "allows at most " + format_si(feed->max_current_a, "A"));
    return w;
  }
  if (vsup >= 44.0 && vsup <= 52.0 && s.supply.resistance_ohm >= 3000.0)
    w.push_back("caution: a 48 V phantom feed; switch phantom power off at the preamp before connecting or "
                "reworking the microphone circuit");

  if (vsup >= 44.0 && vsup <= 52.0 && s.supply.resistance_ohm >= 3000.0 && isup > 10e-3)
    w.push_back("draws " + format_si(isup, "A") + " from what looks like a P48 phantom feed; IEC 61938 allows at most 10 mA");
  return w;
}

}  // namespace pinchoff::model
