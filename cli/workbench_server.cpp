#include "cli/workbench_server.hpp"

#include <sys/random.h>
#include <unistd.h>

#include <atomic>
#include <cerrno>
#include <cstdlib>
#include <cstring>
#include <fstream>
#include <future>
#include <iterator>
#include <mutex>
#include <sstream>
#include <string_view>
#include <system_error>
#include <thread>

#include <nlohmann/json.hpp>

#include "base/error.hpp"
#include "base/eseries.hpp"
#include "base/output_file.hpp"
#include "base/text_file.hpp"
#include "cli/command_files.hpp"
#include "cli/common.hpp"
#include "cli/report_json.hpp"
#include "cli/web_assets.hpp"
#include "dsp/io/sound_file.hpp"
#include "model/audio/render.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage_file.hpp"

// Last: it brings <resolv.h>, whose `_res` macro breaks Eigen's headers included after it.
#include <httplib.h>

namespace pinchoff::cli {

namespace fs = std::filesystem;

std::string random_token() {
  unsigned char bytes[16];
  std::size_t got = 0;
  while (got < sizeof bytes) {
    const ssize_t n = ::getrandom(bytes + got, sizeof bytes - got, 0);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) throw internal_error(std::string("cannot read the system's random source: ") + std::strerror(errno));
    got += static_cast<std::size_t>(n);
  }
  static constexpr char hex[] = "0123456789abcdef";
  std::string t;
  for (unsigned char b : bytes) {
    t += hex[b >> 4];
    t += hex[b & 15];
  }
  return t;
}

namespace {

// Compares without stopping at the first difference, so the time taken does not tell how
// much of a guess was right.
bool same_secret(std::string_view a, std::string_view b) {
  if (a.size() != b.size()) return false;
  unsigned char d = 0;
  for (std::size_t i = 0; i < a.size(); ++i) d |= static_cast<unsigned char>(a[i] ^ b[i]);
  return d == 0;
}

std::string base64(std::string_view bytes) {
  static constexpr char table[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
  std::string out;
  out.reserve((bytes.size() + 2) / 3 * 4);
  std::size_t i = 0;
  for (; i + 2 < bytes.size(); i += 3) {
    const unsigned v = (static_cast<unsigned char>(bytes[i]) << 16) | (static_cast<unsigned char>(bytes[i + 1]) << 8) |
                       static_cast<unsigned char>(bytes[i + 2]);
    out += {table[(v >> 18) & 63], table[(v >> 12) & 63], table[(v >> 6) & 63], table[v & 63]};
  }
  if (i + 1 == bytes.size()) {
    const unsigned v = static_cast<unsigned char>(bytes[i]) << 16;
    out += {table[(v >> 18) & 63], table[(v >> 12) & 63], '=', '='};
  } else if (i + 2 == bytes.size()) {
    const unsigned v = (static_cast<unsigned char>(bytes[i]) << 16) | (static_cast<unsigned char>(bytes[i + 1]) << 8);
    out += {table[(v >> 18) & 63], table[(v >> 12) & 63], table[(v >> 6) & 63], '='};
  }
  return out;
}

// The page with its style sheet and script inlined, so the one address that needs the token
// serves everything.
std::string page_text() {
  std::string page(web_asset("index.html"));
  auto inline_one = [&page](std::string_view tag, std::string_view open, std::string_view asset, std::string_view close) {
    const std::size_t at = page.find(tag);
    if (at == std::string::npos) throw internal_error("the embedded page lacks " + std::string(tag));
    page.replace(at, tag.size(), std::string(open) + std::string(web_asset(asset)) + std::string(close));
  };
  inline_one("<link rel=\"stylesheet\" href=\"workbench.css\">", "<style>\n", "workbench.css", "</style>");
  inline_one("<script src=\"workbench.js\"></script>", "<script>\n", "workbench.js", "</script>");
  return page;
}

void answer_json(httplib::Response& res, int status, const nlohmann::json& j) {
  res.status = status;
  res.set_content(j.dump(-1, ' ', false, nlohmann::json::error_handler_t::replace), "application/json");
}

void answer_error(httplib::Response& res, int status, const std::string& message) {
  answer_json(res, status, nlohmann::json{{"error", message}});
}

// A discarding stream for the cautions the commands write to stderr (the JSON holds them).
struct null_buffer : std::streambuf {
  int overflow(int c) override { return c; }
};

}  // namespace

struct workbench_server::impl {
  workbench_settings settings;
  std::vector<std::string> texts;  // each file's text as read at start
  std::string token;
  std::string page;
  std::vector<std::string> hosts;
  std::vector<std::unique_ptr<httplib::Server>> servers;
  std::vector<std::thread> threads;
  int port{0};
  std::mutex render_mutex;  // one render at a time: each uses every core

  std::size_t file_index(const httplib::Request& req) const {
    if (!req.has_param("file")) return 0;
    const std::string v = req.get_param_value("file");
    std::size_t k = 0;
    for (char c : v) {
      if (c < '0' || c > '9' || k > texts.size()) throw input_error("file: give the index of a loaded file, got '" + v + "'");
      k = k * 10 + static_cast<std::size_t>(c - '0');
    }
    if (v.empty() || k >= texts.size())
      throw input_error("file: give the index of a loaded file (0 to " + std::to_string(texts.size() - 1) + "), got '" + v + "'");
    return k;
  }

  // The text read as if it were file k: its class files beside it, its name in messages.
  model::stage parse(const std::string& text, std::size_t k) const {
    return model::parse_stage(text, settings.files[k].string(), {}, settings.devices);
  }

  bool host_allowed(const std::string& host) const {
    const std::string p = ":" + std::to_string(port);
    return host == "127.0.0.1" + p || host == "[::1]" + p || host == "localhost" + p;
  }

  void routes(httplib::Server& s);
  void analyse(const httplib::Request& req, httplib::Response& res) const;
  void render(const httplib::Request& req, httplib::Response& res);
  void save(const httplib::Request& req, httplib::Response& res) const;
};

void workbench_server::impl::routes(httplib::Server& s) {
  s.set_payload_max_length(settings.max_body_bytes);
  // SO_REUSEADDR alone (a restart can take the port at once), never the library's default
  // SO_REUSEPORT, which would let a second server, ours or another program's, bind the same
  // port beside this one and take some of its requests.
  s.set_socket_options([](socket_t sock) {
    int yes = 1;
    ::setsockopt(sock, SOL_SOCKET, SO_REUSEADDR, &yes, sizeof yes);
  });
  s.set_pre_routing_handler([this](const httplib::Request& req, httplib::Response& res) {
    res.set_header("Cache-Control", "no-store");
    res.set_header("Referrer-Policy", "no-referrer");
    res.set_header("X-Content-Type-Options", "nosniff");
    if (!host_allowed(req.get_header_value("Host"))) {
      answer_error(res, 403, "this server answers only at 127.0.0.1:" + std::to_string(port) + " or [::1]:" +
                                 std::to_string(port) + " (the Host header names another)");
      return httplib::Server::HandlerResponse::Handled;
    }
    if (!req.has_param("token") || !same_secret(req.get_param_value("token"), token)) {
      answer_error(res, 403, "a request without this run's token (the address pinchoff workbench printed) is refused");
      return httplib::Server::HandlerResponse::Handled;
    }
    return httplib::Server::HandlerResponse::Unhandled;
  });
  s.set_exception_handler([](const httplib::Request&, httplib::Response& res, std::exception_ptr ep) {
    try {
      std::rethrow_exception(ep);
    } catch (const file_exists_error& e) {
      answer_error(res, 409, e.what());
    } catch (const input_error& e) {
      answer_error(res, 400, e.what());
    } catch (const std::exception& e) {
      answer_error(res, 500, std::string("internal failure: ") + e.what());
    }
  });
  s.Get("/", [this](const httplib::Request&, httplib::Response& res) {
    res.set_header("Content-Security-Policy",
                   "default-src 'none'; style-src 'unsafe-inline'; script-src 'unsafe-inline'; connect-src 'self'; "
                   "media-src blob:; img-src data:; base-uri 'none'; form-action 'none'; frame-ancestors 'none'");
    res.set_content(page, "text/html; charset=utf-8");
  });
  s.Get("/api/files", [this](const httplib::Request&, httplib::Response& res) {
    nlohmann::json files = nlohmann::json::array();
    for (std::size_t k = 0; k < texts.size(); ++k)
      files.push_back({{"index", k}, {"name", settings.files[k].string()}, {"text", texts[k]}});
    answer_json(res, 200,
                {{"files", files},
                 {"clip", settings.clip.empty() ? nlohmann::json(nullptr) : nlohmann::json(settings.clip.filename().string())}});
  });
  s.Get("/api/series", [](const httplib::Request&, httplib::Response& res) {
    // The preferred-number series the page steps values through (base/eseries.hpp, IEC 60063).
    nlohmann::json j = nlohmann::json::object();
    for (const char* name : {"E12", "E24", "E96"}) {
      const auto m = base::series_mantissas(base::parse_series(name));
      j[name] = std::vector<double>(m.begin(), m.end());
    }
    answer_json(res, 200, j);
  });
  s.Post("/api/analyse", [this](const httplib::Request& req, httplib::Response& res) { analyse(req, res); });
  s.Post("/api/render", [this](const httplib::Request& req, httplib::Response& res) { render(req, res); });
  s.Post("/api/save", [this](const httplib::Request& req, httplib::Response& res) { save(req, res); });
}

void workbench_server::impl::analyse(const httplib::Request& req, httplib::Response& res) const {
  // parts=small: bias, response and noise (quick on any design); parts=sweep: the sweep
  // alone (most of the time on a chain); absent: all four. The page asks for both halves at
  // once and shows each as it comes.
  const std::string parts = req.has_param("parts") ? req.get_param_value("parts") : std::string("all");
  if (parts != "all" && parts != "small" && parts != "sweep")
    throw input_error("parts: give small, sweep or all, got '" + parts + "'");
  const model::stage st = parse(req.body, file_index(req));
  const auto small = [&st] {
    null_buffer nb;
    std::ostream quiet(&nb);
    return nlohmann::json{{"bias", bias_json(st)}, {"response", response_json(st, quiet)}, {"noise", noise_json(st, quiet)}};
  };
  const auto sweep = [&st] {
    null_buffer nb;
    std::ostream quiet(&nb);
    return sweep_json(st, quiet);
  };
  if (parts == "small") return answer_json(res, 200, small());
  if (parts == "sweep") return answer_json(res, 200, nlohmann::json{{"sweep", sweep()}});
  // The sweep is most of the time; the small-signal reports run beside it.
  auto linear = std::async(std::launch::async, small);
  nlohmann::json sw = sweep();
  nlohmann::json j = linear.get();
  j["sweep"] = std::move(sw);
  answer_json(res, 200, j);
}

namespace {

// A folder of the server's own for one render's files, removed with everything in it.
struct scratch_folder {
  fs::path path;
  scratch_folder() {
    std::string pattern = (fs::temp_directory_path() / "pinchoff-workbench-XXXXXX").string();
    if (::mkdtemp(pattern.data()) == nullptr)
      throw io_error(std::string("cannot make a scratch folder for the render: ") + std::strerror(errno));
    path = pattern;
  }
  ~scratch_folder() {
    std::error_code ec;
    fs::remove_all(path, ec);
  }
  scratch_folder(const scratch_folder&) = delete;
  scratch_folder& operator=(const scratch_folder&) = delete;
};

std::string read_bytes(const fs::path& p) {
  std::ifstream f(p, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(f), std::istreambuf_iterator<char>());
}

model::render_stage render_stage_of(const model::stage& st, std::string name, const fs::path& output) {
  model::render_stage r;
  r.name = std::move(name);
  r.net = model::build_network(st);
  r.op = model::solve_operating_point(r.net);
  r.output = output;
  return r;
}

}  // namespace

void workbench_server::impl::render(const httplib::Request& req, httplib::Response& res) {
  if (settings.clip.empty()) throw input_error("no recording to render: start pinchoff workbench with --audio CLIP.wav");
  const std::size_t k = file_index(req);
  const model::stage edited = parse(req.body, k);
  const model::stage loaded = parse(texts[k], k);
  model::render_job job;
  job.input = settings.clip;
  job.input_peak_v = req.has_param("input_peak")
                         ? option_level_vpk(req.get_param_value("input_peak"), "input peak", &edited)
                         : job.input_peak_v;
  job.format = dsp::sample_format::wav16;  // what every browser plays
  job.match_loudness = true;
  const std::lock_guard lock(render_mutex);
  const scratch_folder dir;
  job.stages.push_back(render_stage_of(edited, "edited", dir.path / "edited.wav"));
  job.stages.push_back(render_stage_of(loaded, "loaded", dir.path / "loaded.wav"));
  job.dry_output = dir.path / "dry.wav";
  const model::render_report r = model::render(job, {});
  nlohmann::json outs = nlohmann::json::object();
  for (const model::output_report& o : r.outputs)
    outs[o.is_dry ? "dry" : o.name] = {{"wav_base64", base64(read_bytes(o.path))},
                                      {"loudness_lufs", number_or_null(o.loudness_lufs)},
                                      {"sample_peak", o.sample_peak},
                                      {"clipped_samples", o.clipped_samples}};
  answer_json(res, 200,
              {{"outputs", outs},
               {"duration_s", r.input.seconds()},
               {"oversampling", r.oversample},
               {"input_peak_v", job.input_peak_v},
               {"target_lufs", r.target_lufs},
               {"seconds", r.seconds},
               {"realtime_factor", r.realtime_factor}});
}

void workbench_server::impl::save(const httplib::Request& req, httplib::Response& res) const {
  const std::size_t k = file_index(req);
  if (!req.has_param("path") || req.get_param_value("path").empty()) throw input_error("save: type the path of the file to write");
  const fs::path target = req.get_param_value("path");
  const bool confirm = req.has_param("confirm") && req.get_param_value("confirm") == "1";
  parse(req.body, k);  // a file that does not read back is not written (read as file k: no file is opened beside the target)
  // Every file this run reads, but the loaded file itself when replacing it is confirmed.
  command_files f;
  std::error_code ec;
  for (std::size_t i = 0; i < settings.files.size(); ++i) {
    const bool is_loaded = fs::equivalent(settings.files[i], target, ec);
    if (is_loaded && !confirm)
      throw file_exists_error(quoted_path(target) + " is the loaded file " + quoted_path(settings.files[i]) +
                              ": replace it only when you confirm (the old one is then kept as " +
                              quoted_path(target.string() + ".bak") + ")");
    const bool replacing_loaded = confirm && is_loaded;
    if (replacing_loaded) {
      f.inputs.push_back({"the device-class file beside it", settings.files[i].parent_path() / "devices.toml"});
      if (!settings.devices.empty()) f.inputs.push_back({"the program's device-class file", settings.devices});
    } else {
      add_stage_inputs(f, settings.files[i], settings.devices, "the loaded file " + quoted_path(settings.files[i]));
    }
  }
  if (!settings.clip.empty()) f.inputs.push_back({"the clip", settings.clip});
  f.outputs.push_back({"save", target, false, confirm});
  check_command_files(f);
  base::output_set set;
  fs::path backup;
  if (confirm && fs::exists(target, ec)) {
    // The old file is kept beside it before it is replaced.
    backup = target;
    backup += ".bak";
    base::output_file b = base::output_file::create(backup, base::existing::replace);
    b.write(base::read_text_file(target, model::stage_file_kind));
    set.add(std::move(b));
  }
  base::output_file out = base::output_file::create(target, confirm ? base::existing::replace : base::existing::refuse);
  out.write(req.body);
  set.add(std::move(out));
  set.commit();
  answer_json(res, 200, {{"saved", target.string()}, {"backup", backup.empty() ? nlohmann::json(nullptr) : nlohmann::json(backup.string())}});
}

workbench_server::workbench_server(workbench_settings settings) : p_(std::make_unique<impl>()) {
  p_->settings = std::move(settings);
  if (p_->settings.files.empty()) throw input_error("give at least one stage file");
  for (const fs::path& f : p_->settings.files) {
    p_->texts.push_back(base::read_text_file(f, model::stage_file_kind));
    p_->parse(p_->texts.back(), p_->texts.size() - 1);  // a bad file is refused before the server starts
  }
  if (!p_->settings.clip.empty()) {
    dsp::require_seekable_file(p_->settings.clip, "the workbench renders the clip several times");
    (void)dsp::sound_reader::open(p_->settings.clip).info();
  }
  p_->token = random_token();
  p_->page = page_text();
  auto first = std::make_unique<httplib::Server>();
  p_->routes(*first);
  if (p_->settings.port < 0 || p_->settings.port > 65535)
    throw input_error("--port must be 0 (a free port) to 65535, got " + std::to_string(p_->settings.port));
  if (p_->settings.port == 0) {
    p_->port = first->bind_to_any_port("127.0.0.1");
    if (p_->port <= 0) throw io_error("cannot listen on 127.0.0.1: no free port");
  } else {
    if (!first->bind_to_port("127.0.0.1", p_->settings.port))
      throw io_error("cannot listen on 127.0.0.1 port " + std::to_string(p_->settings.port) +
                     ": it is in use or needs privileges (give another --port, or 0 for a free one)");
    p_->port = p_->settings.port;
  }
  p_->hosts.push_back("127.0.0.1");
  p_->servers.push_back(std::move(first));
  // ::1 too where the system has IPv6 loopback; not having it is no failure.
  auto second = std::make_unique<httplib::Server>();
  p_->routes(*second);
  if (second->bind_to_port("::1", p_->port)) {
    p_->hosts.push_back("::1");
    p_->servers.push_back(std::move(second));
  }
}

workbench_server::~workbench_server() { stop(); }

int workbench_server::port() const noexcept { return p_->port; }
const std::string& workbench_server::token() const noexcept { return p_->token; }
const std::vector<std::string>& workbench_server::hosts() const noexcept { return p_->hosts; }

std::string workbench_server::address() const {
  return "http://127.0.0.1:" + std::to_string(p_->port) + "/?token=" + p_->token;
}

void workbench_server::start() {
  for (auto& s : p_->servers) {
    httplib::Server* server = s.get();
    p_->threads.emplace_back([server] { server->listen_after_bind(); });
  }
  // Bound and listening already (connections wait in the queue); stop() needs the loop
  // running to end it.
  for (auto& s : p_->servers)
    while (!s->is_running()) std::this_thread::sleep_for(std::chrono::milliseconds(1));
}

void workbench_server::stop() {
  if (!p_) return;
  for (auto& s : p_->servers) s->stop();
  for (std::thread& t : p_->threads)
    if (t.joinable()) t.join();
  p_->threads.clear();
}

}  // namespace pinchoff::cli
