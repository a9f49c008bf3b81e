// The workbench server's API and its refusals, driven by cpp-httplib's client against a
// server started in this process on a free port (cli/workbench_server.hpp). The figures are
// checked against the commands' own --json output for the same file (the server must give
// exactly what the command line gives), the refusals against what the server promises.
#include <doctest/doctest.h>

#include <arpa/inet.h>
#include <netinet/in.h>
#include <signal.h>
#include <sys/socket.h>
#include <unistd.h>
#include <sys/wait.h>

#include <cctype>
#include <cmath>
#include <chrono>
#include <thread>
#include <cstdio>
#include <fstream>
#include <set>
#include <sstream>
#include <string>

#include <nlohmann/json.hpp>

#include "cli/workbench_server.hpp"
#include "support/cli_runner.hpp"
#include "support/sanitized.hpp"
#include "support/scratch_dir.hpp"
#include "support/sound_files.hpp"

// Last: it brings <resolv.h>, whose `_res` macro breaks Eigen's headers included after it.
#include <httplib.h>

namespace test_workbench {

namespace fs = std::filesystem;
using pinchoff::cli::workbench_server;
using pinchoff::cli::workbench_settings;
using pinchoff::testing::run_cli;
using pinchoff::testing::scratch_dir;

namespace {

std::string preset(const std::string& name) { return std::string(PINCHOFF_PRESETS_DIR) + "/" + name; }

std::string slurp(const fs::path& p) {
  std::ifstream f(p, std::ios::binary);
  std::ostringstream s;
  s << f.rdbuf();
  return s.str();
}

void write(const fs::path& p, const std::string& text) {
  std::ofstream f(p, std::ios::binary);
  f << text;
}

// A query value: every byte but letters and digits as %XX.
std::string url_encoded(const std::string& s) {
  std::string out;
  for (unsigned char c : s) {
    if (std::isalnum(c)) {
      out += static_cast<char>(c);
    } else {
      char hex[4];
      std::snprintf(hex, sizeof hex, "%%%02X", c);
      out += hex;
    }
  }
  return out;
}

workbench_settings settings_for(std::vector<fs::path> files, fs::path clip = {}) {
  workbench_settings s;
  s.files = std::move(files);
  s.devices = pinchoff::testing::built_data_files().devices;
  s.clip = std::move(clip);
  return s;
}

struct running {
  workbench_server server;
  httplib::Client client;
  explicit running(workbench_settings s) : server(std::move(s)), client("127.0.0.1", server.port()) {
    server.start();
    client.set_read_timeout(120, 0);
  }
  std::string with_token(const std::string& path) const {
    return path + (path.find('?') == std::string::npos ? "?" : "&") + "token=" + server.token();
  }
};

nlohmann::json cli_json(const std::vector<std::string>& args) {
  const auto r = run_cli(args);
  REQUIRE(r.status == 0);
  return nlohmann::json::parse(r.out);
}

// The listening sockets on `port` from the kernel's own table (/proc/net/tcp and tcp6):
// their local addresses in the table's hex form.
std::set<std::string> listening_addresses(int port) {
  std::set<std::string> found;
  char port_hex[8];
  std::snprintf(port_hex, sizeof port_hex, "%04X", port);
  for (const char* table : {"/proc/net/tcp", "/proc/net/tcp6"}) {
    std::ifstream f(table);
    std::string line;
    std::getline(f, line);  // the heading
    while (std::getline(f, line)) {
      std::istringstream in(line);
      std::string slot, local, remote, state;
      in >> slot >> local >> remote >> state;
      const auto colon = local.find(':');
      if (state == "0A" && colon != std::string::npos && local.substr(colon + 1) == port_hex)
        found.insert(local.substr(0, colon));
    }
  }
  return found;
}

}  // namespace

TEST_CASE("workbench: analyse answers exactly what bias, response, sweep and noise --json print") {
  // The server calls the commands' own report builders (cli/report_json.hpp); the command
  // line is the reference, a single stage and a chain.
  for (const std::string name : {"bass-booster-9v.toml", "two-stage-boost-9v.toml"}) {
    CAPTURE(name);
    running r(settings_for({preset(name)}));
    const auto res = r.client.Post(r.with_token("/api/analyse").c_str(), slurp(preset(name)), "text/plain");
    REQUIRE(res);
    REQUIRE(res->status == 200);
    const nlohmann::json got = nlohmann::json::parse(res->body);
    CHECK(got.at("bias") == cli_json({"bias", preset(name), "--json"}));
    CHECK(got.at("response") == cli_json({"response", preset(name), "--json"}));
    CHECK(got.at("sweep") == cli_json({"sweep", preset(name), "--json"}));
    CHECK(got.at("noise") == cli_json({"noise", preset(name), "--json"}));
    // The page asks for the two halves at once: each the same as in the whole answer.
    const auto small = r.client.Post(r.with_token("/api/analyse?parts=small").c_str(), slurp(preset(name)), "text/plain");
    const auto sweep = r.client.Post(r.with_token("/api/analyse?parts=sweep").c_str(), slurp(preset(name)), "text/plain");
    REQUIRE(small);
    REQUIRE(sweep);
    REQUIRE(small->status == 200);
    REQUIRE(sweep->status == 200);
    nlohmann::json halves = nlohmann::json::parse(small->body);
    CHECK(!halves.contains("sweep"));
    halves["sweep"] = nlohmann::json::parse(sweep->body).at("sweep");
    CHECK(halves == got);
  }
  running r(settings_for({preset("bass-booster-9v.toml")}));
  const auto bad = r.client.Post(r.with_token("/api/analyse?parts=harmonics").c_str(), slurp(preset("bass-booster-9v.toml")), "text/plain");
  REQUIRE(bad);
  CHECK(bad->status == 400);
  CHECK(nlohmann::json::parse(bad->body).at("error") == "parts: give small, sweep or all, got 'harmonics'");
}

TEST_CASE("workbench: an edited text is analysed as its file would be, and a bad one gets the command line's message") {
  scratch_dir dir;
  const fs::path file = dir.path / "stage.toml";
  const std::string good = slurp(preset("bass-booster-9v.toml"));
  write(file, good);
  running r(settings_for({file}));

  // An edit: the source resistor changed in the text; the answer is bias --json of that text.
  std::string edited = good;
  const auto at = edited.find("resistor", edited.find("[source]"));
  REQUIRE(at != std::string::npos);
  const auto q1 = edited.find('"', at), q2 = edited.find('"', q1 + 1);
  edited.replace(q1 + 1, q2 - q1 - 1, "1.5k");
  const auto res_ok = r.client.Post(r.with_token("/api/analyse").c_str(), edited, "text/plain");
  REQUIRE(res_ok);
  REQUIRE(res_ok->status == 200);
  write(file, edited);
  CHECK(nlohmann::json::parse(res_ok->body).at("bias") == cli_json({"bias", file.string(), "--json"}));

  const std::string bad = "name = \"bad\"\n[supply]\nvolts = 9\n[jfet]\nidss = \"5m\"\nvp = -1.8\n[drain]\nresistor = \"-3k\"\n";
  const auto res = r.client.Post(r.with_token("/api/analyse").c_str(), bad, "text/plain");
  REQUIRE(res);
  CHECK(res->status == 400);
  const std::string message = nlohmann::json::parse(res->body).at("error");
  // The same text in the file, through the command line.
  write(file, bad);
  const auto cli = run_cli({"bias", file.string()});
  CHECK(cli.status == 2);
  CHECK(cli.err == "pinchoff bias: " + message + "\n");
}

TEST_CASE("workbench: a part's temperature coefficients are read as the command line reads them") {
  // [jfet] vp_drift and beta_exponent: the page sends the text as it is; the server's answer
  // is bias --json of that file, and a value out of range gets the command line's message.
  scratch_dir dir;
  const fs::path file = dir.path / "stage.toml";
  std::string text = slurp(preset("bass-booster-9v.toml"));
  const auto at = text.find("[jfet]\n");
  REQUIRE(at != std::string::npos);
  text.insert(at + 7, "vp_drift = \"-2.8mV/K\"\nbeta_exponent = -2\n");
  write(file, text);
  running r(settings_for({file}));
  const auto ok = r.client.Post(r.with_token("/api/analyse").c_str(), text, "text/plain");
  REQUIRE(ok);
  REQUIRE(ok->status == 200);
  CHECK(nlohmann::json::parse(ok->body).at("bias") == cli_json({"bias", file.string(), "--json"}));
  std::string bad = text;
  bad.replace(bad.find("beta_exponent = -2"), 18, "beta_exponent = 2");
  const auto res = r.client.Post(r.with_token("/api/analyse").c_str(), bad, "text/plain");
  REQUIRE(res);
  CHECK(res->status == 400);
  const std::string message = nlohmann::json::parse(res->body).at("error");
  CHECK(message.find("jfet.beta_exponent must be -3 to 0") != std::string::npos);
  write(file, bad);
  const auto cli = run_cli({"bias", file.string()});
  CHECK(cli.status == 2);
  CHECK(cli.err == "pinchoff bias: " + message + "\n");
}

TEST_CASE("workbench: requests without the run's token are refused") {
  running r(settings_for({preset("bass-booster-9v.toml")}));
  CHECK(r.server.token().size() == 32);
  for (const std::string path : {"/", "/api/files", "/api/files?token=", "/api/files?token=0123456789abcdef0123456789abcdef"}) {
    CAPTURE(path);
    const auto res = r.client.Get(path.c_str());
    REQUIRE(res);
    CHECK(res->status == 403);
  }
  const auto post = r.client.Post("/api/analyse", slurp(preset("bass-booster-9v.toml")), "text/plain");
  REQUIRE(post);
  CHECK(post->status == 403);
  const auto ok = r.client.Get(r.with_token("/api/files").c_str());
  REQUIRE(ok);
  CHECK(ok->status == 200);
  // Two runs draw different tokens (128 bits from getrandom).
  CHECK(pinchoff::cli::random_token() != pinchoff::cli::random_token());
}

TEST_CASE("workbench: the series the page steps values through are the IEC 60063 series") {
  // IEC 60063:2015 (from memory): E12 holds 12 values a decade from 1.0 to 8.2, E24 24 from
  // 1.0 to 9.1 (with 2.7, 3.3, 4.7), E96 96 from 1.00 to 9.76.
  running r(settings_for({preset("bass-booster-9v.toml")}));
  const auto res = r.client.Get(r.with_token("/api/series").c_str());
  REQUIRE(res);
  CHECK(res->status == 200);
  const nlohmann::json j = nlohmann::json::parse(res->body);
  const struct {
    const char* name;
    std::size_t count;
    double first, last, holds;
  } rows[] = {{"E12", 12, 1.0, 8.2, 4.7}, {"E24", 24, 1.0, 9.1, 2.7}, {"E96", 96, 1.0, 9.76, 4.75}};
  for (const auto& row : rows) {
    const std::string name = row.name;
    CAPTURE(name);
    REQUIRE(j.contains(name));
    const std::vector<double> v = j[name].get<std::vector<double>>();
    REQUIRE(v.size() == row.count);
    CHECK(v.front() == doctest::Approx(row.first));
    CHECK(v.back() == doctest::Approx(row.last));
    bool found = false;
    for (double x : v) found = found || std::abs(x - row.holds) < 1e-9;
    CHECK(found);
  }
}

TEST_CASE("workbench: a Host header other than the loopback address served is refused (DNS rebinding)") {
  running r(settings_for({preset("bass-booster-9v.toml")}));
  const std::string port = std::to_string(r.server.port());
  for (const std::string& host :
       std::vector<std::string>{"attacker.example:" + port, "attacker.example", "127.0.0.1", "127.0.0.1:1", "10.0.0.1:" + port}) {
    CAPTURE(host);
    const auto res = r.client.Get(r.with_token("/api/files").c_str(), {{"Host", host}});
    REQUIRE(res);
    CHECK(res->status == 403);
  }
  for (const std::string& host : std::vector<std::string>{"127.0.0.1:" + port, "localhost:" + port}) {
    CAPTURE(host);
    const auto res = r.client.Get(r.with_token("/api/files").c_str(), {{"Host", host}});
    REQUIRE(res);
    CHECK(res->status == 200);
  }
}

TEST_CASE("workbench: request bodies beyond the limit are refused with 413") {
  workbench_settings s = settings_for({preset("bass-booster-9v.toml")});
  s.max_body_bytes = 4096;
  running r(std::move(s));
  const auto res = r.client.Post(r.with_token("/api/analyse").c_str(), std::string(4097, '#'), "text/plain");
  REQUIRE(res);
  CHECK(res->status == 413);
  const auto under = r.client.Post(r.with_token("/api/analyse").c_str(), std::string(100, '#'), "text/plain");
  REQUIRE(under);
  CHECK(under->status == 400);  // read, and refused as a stage file (no [jfet])
}

TEST_CASE("workbench: it listens on the loopback addresses only") {
  running r(settings_for({preset("bass-booster-9v.toml")}));
  for (const std::string& h : r.server.hosts()) CHECK((h == "127.0.0.1" || h == "::1"));
  // The kernel's table: every listening socket on the port is 127.0.0.1 or ::1.
  const std::set<std::string> addresses = listening_addresses(r.server.port());
  CHECK(!addresses.empty());
  for (const std::string& a : addresses) {
    CAPTURE(a);
    CHECK((a == "0100007F" || a == "00000000000000000000000001000000"));
  }
}

TEST_CASE("workbench: no request names a file it reads") {
  scratch_dir dir;
  const fs::path file = dir.path / "stage.toml";
  write(file, slurp(preset("bass-booster-9v.toml")));
  write(dir.path / "secret.txt", "not to be served");
  running r(settings_for({file}));
  for (const std::string path : {"/secret.txt", "/../secret.txt", "/%2e%2e/secret.txt", "/api/files/../../secret.txt",
                                 "/index.html", "/api/file?path=secret.txt"}) {
    CAPTURE(path);
    const auto res = r.client.Get(r.with_token(path).c_str());
    REQUIRE(res);
    CHECK(res->status == 404);
    CHECK(res->body.find("not to be served") == std::string::npos);
  }
  // The files it answers with are the command line's, by index.
  const auto files = r.client.Get(r.with_token("/api/files").c_str());
  REQUIRE(files);
  const nlohmann::json j = nlohmann::json::parse(files->body);
  REQUIRE(j.at("files").size() == 1);
  CHECK(j["files"][0]["name"] == file.string());
  const auto beyond = r.client.Post(r.with_token("/api/analyse?file=1").c_str(), slurp(file), "text/plain");
  REQUIRE(beyond);
  CHECK(beyond->status == 400);
}

TEST_CASE("workbench: save as writes a new file atomically, never an input, and the loaded file only when confirmed") {
  scratch_dir dir;
  const fs::path file = dir.path / "stage.toml";
  const fs::path clip = dir.path / "clip.wav";
  const std::string original = slurp(preset("bass-booster-9v.toml"));
  write(file, original);
  fs::copy_file(std::string(PINCHOFF_SAMPLES_DIR) + "/pluck-phrase-48k.wav", clip);
  const std::string clip_bytes = slurp(clip);
  running r(settings_for({file}, clip));
  std::string edited = original;
  edited.insert(0, "# edited on the page\n");
  auto save = [&](const fs::path& target, bool confirm) {
    return r.client.Post(r.with_token("/api/save?path=" + url_encoded(target.string()) +
                                      (confirm ? "&confirm=1" : ""))
                             .c_str(),
                         edited, "text/plain");
  };

  // A new file: written, and it reads back to the same design through the command line.
  const fs::path fresh = dir.path / "fresh.toml";
  auto res = save(fresh, false);
  REQUIRE(res);
  CHECK(res->status == 200);
  CHECK(slurp(fresh) == edited);
  CHECK(run_cli({"bias", fresh.string(), "--json"}).out == run_cli({"bias", file.string(), "--json"}).out);

  // The loaded file: refused without confirmation, unchanged.
  res = save(file, false);
  REQUIRE(res);
  CHECK(res->status == 409);
  CHECK(slurp(file) == original);
  // With it: replaced, the old one kept beside it.
  res = save(file, true);
  REQUIRE(res);
  CHECK(res->status == 200);
  CHECK(slurp(file) == edited);
  CHECK(slurp(dir.path / "stage.toml.bak") == original);

  // The clip is an input of the run: refused even when confirmed.
  res = save(clip, true);
  REQUIRE(res);
  CHECK(res->status == 400);
  CHECK(slurp(clip) == clip_bytes);

  // A text that does not read as a stage is not written.
  const auto bad = r.client.Post(r.with_token("/api/save?path=" + url_encoded((dir.path / "bad.toml").string())).c_str(),
                                 "[jfet]\nidss = \"oops\"\n", "text/plain");
  REQUIRE(bad);
  CHECK(bad->status == 400);
  CHECK(!fs::exists(dir.path / "bad.toml"));
  // No temporaries left: the folder holds the stage, its backup, the clip and the new file.
  std::set<std::string> names;
  for (const auto& e : fs::directory_iterator(dir.path)) names.insert(e.path().filename().string());
  CHECK(names == std::set<std::string>{"stage.toml", "stage.toml.bak", "clip.wav", "fresh.toml"});
}

TEST_CASE("workbench: render answers the edited design, the design as loaded and the dry clip as WAV") {
  // The demo clip is 6.5 s long (samples/MANIFEST.md). Under the sanitizers
  // (tests/support/sanitized.hpp) its first 2 s, as the loudness test of `render` takes:
  // the same renders and answer, on less audio.
  scratch_dir dir;
  fs::path clip = fs::path(PINCHOFF_SAMPLES_DIR) / "pluck-phrase-48k.wav";
  double clip_s = 6.5;
  if (pinchoff::testing::sanitized_build) {
    const pinchoff::testing::sound whole = pinchoff::testing::read_sound(clip);
    REQUIRE(whole.info.channels == 1);
    clip_s = 2.0;
    const std::vector<double> head(whole.x.begin(), whole.x.begin() + static_cast<std::ptrdiff_t>(clip_s * whole.info.rate_hz));
    pinchoff::testing::write_sound(dir.path / "head.wav", head, whole.info.rate_hz, 1, pinchoff::dsp::sample_format::wav24);
    clip = dir.path / "head.wav";
  }
  running r(settings_for({preset("bass-booster-9v.toml")}, clip));
  const auto res = r.client.Post(r.with_token("/api/render").c_str(), slurp(preset("bass-booster-9v.toml")), "text/plain");
  REQUIRE(res);
  REQUIRE(res->status == 200);
  const nlohmann::json j = nlohmann::json::parse(res->body);
  for (const char* which : {"edited", "loaded", "dry"}) {
    CAPTURE(which);
    const std::string b64 = j.at("outputs").at(which).at("wav_base64");
    CHECK(b64.substr(0, 5) == "UklGR");  // "RIFF" in base64 starts so
  }
  CHECK(j.at("duration_s").get<double>() == doctest::Approx(clip_s).epsilon(0.01));
  // The same design twice: loudness-matched to the same level.
  CHECK(j["outputs"]["edited"]["loudness_lufs"].get<double>() ==
        doctest::Approx(j["outputs"]["loaded"]["loudness_lufs"].get<double>()).epsilon(1e-6));
}

TEST_CASE("workbench: a port in use is refused by name before anything is served") {
  running r(settings_for({preset("bass-booster-9v.toml")}));
  const std::string port = std::to_string(r.server.port());
  const auto cli = run_cli({"workbench", preset("bass-booster-9v.toml"), "--port", port});
  CHECK(cli.status == 2);
  CHECK(cli.out.empty());
  CHECK(cli.err == "pinchoff workbench: cannot listen on 127.0.0.1 port " + port +
                       ": it is in use or needs privileges (give another --port, or 0 for a free one)\n");
}

TEST_CASE("workbench: a file index that is not one of the loaded files is refused") {
  running r(settings_for({preset("bass-booster-9v.toml")}));
  for (const std::string k : {"1", "-1", "x", "", "99999999999999999999999", "0x0"}) {
    CAPTURE(k);
    const auto res = r.client.Post(r.with_token("/api/analyse?file=" + k).c_str(), slurp(preset("bass-booster-9v.toml")), "text/plain");
    REQUIRE(res);
    CHECK(res->status == 400);
    CHECK(nlohmann::json::parse(res->body).at("error").get<std::string>().find("file: give the index of a loaded file") == 0);
  }
}

TEST_CASE("workbench: SIGTERM and Ctrl-C stop the server cleanly, exit status 0") {
  for (const int sig : {SIGTERM, SIGINT}) {
    CAPTURE(sig);
    int port = 0;
    {
      // A port that was free a moment ago.
      running probe(settings_for({preset("bass-booster-9v.toml")}));
      port = probe.server.port();
    }
    const pid_t pid = pinchoff::testing::spawn_cli({"workbench", preset("bass-booster-9v.toml"), "--port", std::to_string(port)});
    REQUIRE(pid > 0);
    httplib::Client client("127.0.0.1", port);
    bool up = false;
    for (int k = 0; k < 200 && !up; ++k) {
      up = static_cast<bool>(client.Get("/"));  // 403 without the token: it answers
      if (!up) std::this_thread::sleep_for(std::chrono::milliseconds(50));
    }
    CHECK(up);
    ::kill(pid, sig);
    int status = -1;
    for (int k = 0; k < 200; ++k) {
      if (::waitpid(pid, &status, WNOHANG) == pid) break;
      std::this_thread::sleep_for(std::chrono::milliseconds(50));
      if (k == 199) {
        ::kill(pid, SIGKILL);
        ::waitpid(pid, &status, 0);
        FAIL("the server did not stop within 10 s");
      }
    }
    CHECK(WIFEXITED(status));
    CHECK(WEXITSTATUS(status) == 0);
    CHECK(!client.Get("/"));  // nothing listens any more
  }
}

namespace {

// A port that was free a moment ago.
int free_port() {
  running probe(settings_for({preset("bass-booster-9v.toml")}));
  return probe.server.port();
}

// The child's exit status once it ends within `seconds`, else -1 (the child then killed).
int wait_for_exit(pid_t pid, double seconds) {
  int status = -1;
  for (int k = 0; k < static_cast<int>(seconds * 20); ++k) {
    if (::waitpid(pid, &status, WNOHANG) == pid) return status;
    std::this_thread::sleep_for(std::chrono::milliseconds(50));
  }
  ::kill(pid, SIGKILL);
  ::waitpid(pid, &status, 0);
  return -1;
}

// Whether anything accepts connections on 127.0.0.1:port (a listening socket held by any
// process accepts the connection into its backlog, so this sees an inherited one too).
bool accepts(int port) {
  const int fd = ::socket(AF_INET, SOCK_STREAM, 0);
  sockaddr_in a{};
  a.sin_family = AF_INET;
  a.sin_port = htons(static_cast<std::uint16_t>(port));
  a.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  const bool ok = ::connect(fd, reinterpret_cast<const sockaddr*>(&a), sizeof a) == 0;
  ::close(fd);
  return ok;
}

// `xdg-open` in `dir`: a shell script that writes its argument to dir/opened, then runs
// `then` (for a browser that stays, a sleep; for a failure, an exit status).
void fake_xdg_open(const scratch_dir& dir, const std::string& then) {
  const fs::path script = dir.path / "xdg-open";
  write(script, "#!/bin/sh\necho \"$1\" > '" + dir.file("opened") + "'\n" + then + "\n");
  fs::permissions(script, fs::perms::owner_all);
}

}  // namespace

TEST_CASE("workbench: --open starts xdg-open on the address and keeps serving and stopping while it runs") {
  // xdg-open may stay until the browser closes; the server must not wait for it, and a
  // browser it starts must not hold the server's sockets after it stops.
  scratch_dir dir;
  fake_xdg_open(dir, "sleep 30");
  const int port = free_port();
  const pid_t pid = pinchoff::testing::spawn_cli(
      {"workbench", preset("bass-booster-9v.toml"), "--port", std::to_string(port), "--open"},
      {{"PATH=" + dir.path.string() + ":/usr/bin:/bin"}, dir.file("err")});
  REQUIRE(pid > 0);
  for (int k = 0; k < 200 && !fs::exists(dir.file("opened")); ++k) std::this_thread::sleep_for(std::chrono::milliseconds(50));
  std::this_thread::sleep_for(std::chrono::milliseconds(100));
  const std::string opened = slurp(dir.file("opened"));
  const std::string err = slurp(dir.file("err"));
  CHECK(opened.rfind("http://127.0.0.1:" + std::to_string(port) + "/", 0) == 0);
  CHECK(opened.find("token=") != std::string::npos);
  // The address opened is the one printed.
  CHECK(err.find("serving on " + opened.substr(0, opened.size() - 1)) != std::string::npos);
  httplib::Client client("127.0.0.1", port);
  const std::string path_and_query = opened.substr(opened.find('/', 7), opened.size() - 1 - opened.find('/', 7));
  const auto page = client.Get(path_and_query);
  REQUIRE(page);
  CHECK(page->status == 200);
  ::kill(pid, SIGINT);
  const int status = wait_for_exit(pid, 10.0);
  REQUIRE(status != -1);  // else it waited for xdg-open
  CHECK(WIFEXITED(status));
  CHECK(WEXITSTATUS(status) == 0);
  CHECK(!accepts(port));  // xdg-open, still running, holds no listening socket
}

TEST_CASE("workbench: --open says when there is no xdg-open, or when it fails, and serves on") {
  for (const std::string& then : {std::string("exit 3"), std::string()}) {
    CAPTURE(then);
    scratch_dir dir;
    if (!then.empty()) fake_xdg_open(dir, then);
    const int port = free_port();
    const pid_t pid = pinchoff::testing::spawn_cli(
        {"workbench", preset("bass-booster-9v.toml"), "--port", std::to_string(port), "--open"},
        {{"PATH=" + dir.path.string()}, dir.file("err")});
    REQUIRE(pid > 0);
    const std::string expected = then.empty() ? "--open: no xdg-open on this system; open the address above in a browser"
                                              : "--open: xdg-open could not open a browser (exit status 3)";
    std::string err;
    for (int k = 0; k < 200 && err.find(expected) == std::string::npos; ++k) {
      std::this_thread::sleep_for(std::chrono::milliseconds(50));
      err = slurp(dir.file("err"));
    }
    CHECK(err.find(expected) != std::string::npos);
    CHECK(accepts(port));  // still serving
    ::kill(pid, SIGTERM);
    const int status = wait_for_exit(pid, 10.0);
    CHECK(WIFEXITED(status));
    CHECK(WEXITSTATUS(status) == 0);
  }
}

TEST_CASE("workbench: render and save refuse what they cannot do, by name") {
  scratch_dir dir;
  running r(settings_for({preset("bass-booster-9v.toml")}));  // no clip
  const std::string text = slurp(preset("bass-booster-9v.toml"));
  auto error_of = [](const httplib::Result& res) { return nlohmann::json::parse(res->body).at("error").get<std::string>(); };
  auto res = r.client.Post(r.with_token("/api/render").c_str(), text, "text/plain");
  REQUIRE(res);
  CHECK(res->status == 400);
  CHECK(error_of(res) == "no recording to render: start pinchoff workbench with --audio CLIP.wav");
  res = r.client.Post(r.with_token("/api/save").c_str(), text, "text/plain");
  REQUIRE(res);
  CHECK(res->status == 400);
  CHECK(error_of(res) == "save: type the path of the file to write");
  // A save into a folder that does not exist: refused, nothing made.
  res = r.client.Post(r.with_token("/api/save?path=" + url_encoded((dir.path / "no" / "such.toml").string())).c_str(), text,
                      "text/plain");
  REQUIRE(res);
  CHECK(res->status == 400);
  CHECK(!fs::exists(dir.path / "no"));

  running with_clip(settings_for({preset("bass-booster-9v.toml")}, std::string(PINCHOFF_SAMPLES_DIR) + "/pluck-phrase-48k.wav"));
  res = with_clip.client.Post(with_clip.with_token("/api/render?input_peak=loud").c_str(), text, "text/plain");
  REQUIRE(res);
  CHECK(res->status == 400);
  CHECK(error_of(res).find("input peak") == 0);
}

}  // namespace test_workbench
