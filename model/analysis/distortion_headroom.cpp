#include "model/analysis/distortion_headroom.hpp"

#include <algorithm>
#include <cmath>

namespace pinchoff::model {

sweep_settings distortion_headroom_settings(const headroom_figures& head, int points) {
  const double clean = head.clean_drive_vpk;
  const bool usable = clean > 0.0 && std::isfinite(clean);
  const double from = usable ? clean / 100.0 : 1e-3, to = usable ? clean * 30.0 : 10.0;
  sweep_settings s;
  s.frequency_hz = 1000.0;
  s.automatic_oversample = true;  // as a sweep given no factor
  const int n = std::max(points, 2);
  for (int k = 0; k < n; ++k) s.drives_vpk.push_back(from * std::pow(to / from, static_cast<double>(k) / (n - 1)));
  return s;
}

distortion_headroom find_distortion_headroom(const stage& st, const headroom_figures& head, int points) {
  const sweep_settings s = distortion_headroom_settings(head, points);
  const sweep_result r = run_sweep(st, s);
  distortion_headroom d;
  d.frequency_hz = r.frequency_hz;
  d.from_vpk = s.drives_vpk.front();
  d.to_vpk = s.drives_vpk.back();
  d.points = static_cast<int>(s.drives_vpk.size());
  d.oversample = r.oversample;
  d.levels = r.crossings;
  d.lowest_drive_thd_percent = r.points.front().thd_percent;
  d.highest_drive_thd_percent = r.points.back().thd_percent;
  for (const sweep_point& p : r.points) {
    d.unconverged += p.converged ? 0 : 1;
    d.newton_failures += p.newton.failed;
  }
  return d;
}

}  // namespace pinchoff::model
