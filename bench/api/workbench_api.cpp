// pinchoff_bench_api: the workbench's speed at its HTTP API (`make bench`), measured as the
// page meets it: from an edit posted to every panel's data received. A server is started in
// this process on a free loopback port and driven by cpp-httplib's client.
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "cli/data_files.hpp"
#include "cli/workbench_server.hpp"

// Last: it brings <resolv.h>, whose `_res` macro breaks Eigen's headers included after it.
#include <httplib.h>

namespace fs = std::filesystem;

namespace {

std::string slurp(const fs::path& p) {
  std::ifstream f(p, std::ios::binary);
  std::ostringstream s;
  s << f.rdbuf();
  return s.str();
}

// The text with the value of `key` after `section` (its first occurrence) replaced.
std::string with_value(std::string text, const std::string& section, const std::string& key, const std::string& value) {
  const auto at = text.find(key + " = \"", text.find(section));
  const auto q1 = text.find('"', at), q2 = text.find('"', q1 + 1);
  return text.replace(q1 + 1, q2 - q1 - 1, value);
}

using clock_type = std::chrono::steady_clock;

// Best and median of `runs` edits, in milliseconds; each edit alternates the value so that
// no two successive posts carry the same text.
void time_edits(httplib::Client& client, const std::string& token, int file, const std::string& text,
                const std::string& section, const std::string& a, const std::string& b, const char* what, double target_ms,
                const std::string& parts = "all") {
  std::vector<double> ms;
  for (int k = 0; k < 7; ++k) {
    const std::string edited = with_value(text, section, "resistor", k % 2 ? a : b);
    const auto t0 = clock_type::now();
    const auto res = client.Post(("/api/analyse?file=" + std::to_string(file) + "&parts=" + parts + "&token=" + token).c_str(), edited,
                                 "text/plain");
    const double elapsed = std::chrono::duration<double, std::milli>(clock_type::now() - t0).count();
    if (!res || res->status != 200) {
      std::printf("  %-44s failed (%d)\n", what, res ? res->status : -1);
      return;
    }
    ms.push_back(elapsed);
  }
  std::sort(ms.begin(), ms.end());
  if (target_ms > 0)
    std::printf("  %-44s %8.0f ms %8.0f ms   (target: under %.0f ms) %s\n", what, ms.front(), ms[ms.size() / 2], target_ms,
                ms[ms.size() / 2] < target_ms ? "met" : "NOT met");
  else
    std::printf("  %-44s %8.0f ms %8.0f ms\n", what, ms.front(), ms[ms.size() / 2]);
}

}  // namespace

int main() {
  const fs::path presets = PINCHOFF_PRESETS_DIR;
  const fs::path clip = fs::path(PINCHOFF_SAMPLES_DIR) / "pluck-phrase-48k.wav";
  // A four-stage chain: the three-stage preset with its last stage once more.
  const std::string three = slurp(presets / "three-stage-overdrive-9v.toml");
  std::string four = three + "\n" + three.substr(three.rfind("[[stage]]"));
  four.replace(four.rfind("name = \"power\""), 14, "name = \"fourth\"");
  const fs::path four_path = fs::temp_directory_path() / ("pinchoff-bench-four-stages-" + std::to_string(::getpid()) + ".toml");
  std::ofstream(four_path) << four;

  pinchoff::cli::workbench_settings s;
  s.files = {presets / "bass-booster-9v.toml", four_path};
  s.devices = presets / "devices.toml";
  s.clip = clip;
  pinchoff::cli::workbench_server server(s);
  server.start();
  httplib::Client client("127.0.0.1", server.port());
  client.set_read_timeout(300, 0);
  const std::string single = slurp(presets / "bass-booster-9v.toml");

  std::printf("workbench at its HTTP API: an edit posted to every panel's data received\n");
  std::printf("  (bias, response of 200 points, a 25-point sweep at 1 kHz, noise; best and median of 7)\n");
  std::printf("  %-44s %11s %11s\n", "", "best", "median");
  time_edits(client, server.token(), 0, single, "[source]", "560", "820", "single stage (bass booster)", 100.0);
  time_edits(client, server.token(), 1, four, "[stage.source]", "2.2k", "2.7k", "four-stage chain (overdrive + one)", 300.0);
  // What the page shows first (it asks for the two halves at once): no target of its own.
  time_edits(client, server.token(), 1, four, "[stage.source]", "2.2k", "2.7k", "  its bias, response and noise (parts=small)", 0,
             "small");

  std::vector<double> render_s;
  double rt = 0, clip_s = 0;
  for (int k = 0; k < 3; ++k) {
    const auto t0 = clock_type::now();
    const auto res = client.Post(("/api/render?file=0&token=" + server.token()).c_str(), with_value(single, "[source]", "resistor", "820"),
                                 "text/plain");
    if (!res || res->status != 200) {
      std::printf("  render failed (%d)\n", res ? res->status : -1);
      break;
    }
    render_s.push_back(std::chrono::duration<double>(clock_type::now() - t0).count());
    clip_s = nlohmann::json::parse(res->body).at("duration_s").get<double>();
  }
  if (!render_s.empty()) {
    std::sort(render_s.begin(), render_s.end());
    rt = clip_s / render_s.front();
    std::printf("  %-44s %8.2f s  %8.2f s    (target: under 1 s) %s\n",
                "render A/B, the 6.5 s demo clip at 8x", render_s.front(), render_s[render_s.size() / 2],
                render_s[render_s.size() / 2] < 1.0 ? "met" : "NOT met");
    std::printf("  (%.1fx real time for the clip through two designs and the dry copy, loudness-matched, encoded)\n", rt);
  }
  server.stop();
  fs::remove(four_path);
  return 0;
}
