#pragma once
// The workbench server: a page and its API on the loopback interface only, for editing the
// stage files given on the command line in a browser (`pinchoff workbench`).
//
// Safety (each refusal has a test in tests/cli/test_workbench.cpp):
// - it listens on 127.0.0.1 (and ::1 where the system has it), never on another address;
// - every request must carry the run's token (`?token=T`, 128 bits from the system's random
//   source) or it is refused with 403;
// - the Host header must name the loopback address served (127.0.0.1:PORT, [::1]:PORT or
//   localhost:PORT), so a page of another site that a DNS record points at 127.0.0.1 cannot
//   drive it (DNS rebinding): 403 otherwise;
// - request bodies are limited (max_body_bytes: a stage file's own bound): 413 beyond;
// - no request names a file it reads: the stage files and the clip are the command line's,
//   read once at start; the only path a request gives is the save target the user typed,
//   which is only ever written (atomically, by base::output_file), never a file the run
//   reads, never the loaded file without `confirm`, and then with the old one kept as
//   FILE.bak.
//
// The API (every figure is computed here, by the functions the commands use):
//   GET  /                     the page (embedded at build time from web/)
//   GET  /api/files            the loaded files' names and texts, and the clip's name
//   POST /api/analyse?file=K   body: a stage or chain file's text, read as if it were
//                              file K (its class files, its name in messages); answers
//                              {"bias","response","sweep","noise"}, each what the command's
//                              --json prints for that text; 400 {"error"} with the message
//                              the command line prints for a bad file
//   POST /api/render?file=K&input_peak=LEVEL   body: the edited text; renders the clip
//                              through the edited design and file K as loaded, with the dry
//                              clip, loudness-matched (model::render, as `render --dry`);
//                              answers the three WAV files in base64 and the run's figures
//   POST /api/save?file=K&path=P[&confirm=1]   body: the text; writes P (see above)
#include <cstddef>
#include <filesystem>
#include <memory>
#include <string>
#include <vector>

namespace pinchoff::cli {

struct workbench_settings {
  std::vector<std::filesystem::path> files;  ///< the stage files, as given
  std::filesystem::path devices;             ///< the program's class file (data_files::devices)
  std::filesystem::path clip;                ///< the recording for listening; empty: none
  int port{0};                               ///< 0: a free port
  std::size_t max_body_bytes{std::size_t{1} << 20};
};

/// Reads the files and binds the loopback addresses; throws input_error / io_error for a
/// file that cannot be read or a port that cannot be had. Serves from start() until stop()
/// or destruction.
class workbench_server {
 public:
  explicit workbench_server(workbench_settings settings);
  ~workbench_server();
  workbench_server(const workbench_server&) = delete;
  workbench_server& operator=(const workbench_server&) = delete;

  int port() const noexcept;
  const std::string& token() const noexcept;
  /// The addresses listened on ("127.0.0.1", and "::1" where it could be bound).
  const std::vector<std::string>& hosts() const noexcept;
  /// The page's address with the token: http://127.0.0.1:PORT/?token=T
  std::string address() const;

  /// Starts serving on background threads and returns.
  void start();
  /// Stops serving and waits for the threads; safe to call twice.
  void stop();

 private:
  struct impl;
  std::unique_ptr<impl> p_;
};

/// 32 hex digits (128 bits) from the system's random source (getrandom(2)); throws
/// internal_error when it cannot be read.
std::string random_token();

}  // namespace pinchoff::cli
