#pragma once
// Generic JFET classes (presets/devices.toml): parameter ranges of a general kind of
// part plus typical values, in n-channel signs.
#include <filesystem>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "base/text_file.hpp"
#include "base/units.hpp"

namespace pinchoff::model {

struct device_class {
  std::string name, summary;
  base::value_range idss_a;  ///< > 0
  base::value_range vp_v;    ///< n-channel: both < 0, lo is the most negative
  double typical_idss_a{}, typical_vp_v{};
  double lambda_per_v{0.0}, is_a{1e-14}, n{1.0}, cgs_f{0.0}, cgd_f{0.0};
  std::optional<double> vds_max_v;  ///< the class's typical drain-source rating; a stage naming the class takes it
  std::optional<double> vp_drift_v_per_k;  ///< typical dVP/dT (n-channel sign, <= 0); a stage naming the class takes it
  std::optional<double> beta_exponent;     ///< typical m in beta ∝ T^m; likewise
};

/// The most a device-class file may hold: the shipped one is about a kilobyte for three
/// classes, so a megabyte holds thousands.
inline constexpr base::text_file_kind device_class_file_kind{"device-class file", std::size_t{1} << 20,
                                                             "a class file is a few kilobytes"};

/// Reads a device-class file; errors name file, line and column like stage files.
std::vector<device_class> read_device_classes(const std::filesystem::path& path);
/// The same from text; `source_name` stands for the file in messages.
std::vector<device_class> parse_device_classes(std::string_view text, std::string_view source_name);

/// The class file used for `stage_file`: devices.toml beside it, else `fallback` (the
/// program's own class file, chosen by the caller). Throws input_error when there is
/// neither.
std::filesystem::path device_file_for(const std::filesystem::path& stage_file, const std::filesystem::path& fallback);

/// Looks a class up by name; throws input_error listing the known names (with a
/// did-you-mean) when there is none.
device_class find_device_class(std::string_view name, const std::filesystem::path& file);

}  // namespace pinchoff::model
