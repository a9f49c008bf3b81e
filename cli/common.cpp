#include "cli/common.hpp"

#include <cmath>

#include "model/stage_file.hpp"

namespace pinchoff::cli {

void add_stage_input(CLI::App& sub, stage_input& in) {
  sub.add_option("FILE", in.path, "Stage file (TOML); see README \"Stage file\"")->required();
  sub.add_option("--set", in.overrides,
                 "Override a stage-file value, KEY=VALUE (repeatable), e.g. --set drain.resistor=4.7k")
      ->type_name("KEY=VALUE")
      ->take_last();
  // take_last would keep only one; we want them all:
  sub.get_option("--set")->multi_option_policy(CLI::MultiOptionPolicy::TakeAll);
}

model::stage load_stage(const stage_input& in) { return model::read_stage_file(in.path, in.overrides); }

nlohmann::json number_or_null(double v) { return std::isfinite(v) ? nlohmann::json(v) : nlohmann::json(nullptr); }

nlohmann::json operating_point_json(const model::terminal_point& t) {
  return {{"vg_v", t.vg_v},   {"vs_v", t.vs_v},   {"vd_v", t.vd_v}, {"vgs_v", t.vgs_v},
          {"vds_v", t.vds_v}, {"id_a", t.id_a},   {"ig_a", t.ig_a}, {"region", model::region_name(t.region)}};
}

const char* topology_name(model::topology t) noexcept {
  return t == model::topology::common_source ? "common-source" : "source-follower";
}

}  // namespace pinchoff::cli
