#pragma once
// Rendering recorded audio through one or several stages (the `render` command's work).
//
// Signal path, per stage and per channel, each with its own engine and oversampler:
//   file sample x (full scale 1) -> generator volts x * input_peak_v -> upsample by the
//   factor -> DK engine at factor * file rate (starting at the DC operating point) ->
//   the load voltage minus its rest value -> downsample -> load volts at the file's rate.
// The rest value (the load voltage at the DC operating point) is removed so that a
// DC-coupled output does not carry its standing voltage into the file.
// The round trip of the oversampler delays by a whole number of samples; those are
// dropped at the start and made up at the end by feeding zeros, so output sample n is the
// response at the time of input sample n and the output has exactly the input's length.
//
// Streaming: blocks of block_frames frames; memory stays flat whatever the file length.
// Work units (stage, channel) run in parallel threads, each unit always in one thread with
// its own state, so the result does not depend on the number of threads. With more than one
// thread allowed, the calling thread interleaves, meters and spools block i - 1 while the
// engines render block i (so a mono render uses a second core for that work too).
//
// Output level (a file's full scale, 0 dBFS, is `1 / scale` volts at the load):
// - normalise (the default): the peak of every output lands at `peak_dbfs`. It needs the
//   peak before the file is written, so a first pass spools the volts to a temporary float
//   file beside the output and a second pass scales and writes them.
// - fixed: `scale = 1 / full_scale_v`, one pass; samples beyond full scale are counted.
// - match_loudness (several outputs): every output gets the same integrated loudness
//   (ITU-R BS.1770): the highest loudness at which no output's peak exceeds `peak_dbfs`.
//   The dry output (the input itself, scaled the same way) takes part when asked for.
// Peaks are sample peaks of the written values (true peaks are reported beside them).
//
// The silence floor (normalise and match_loudness): normalising divides by the output's
// peak, so an output that holds only the engine's numerical residue (an all-zero input
// leaves femtovolts at the load: the rounding of the rest voltage, which is several volts)
// would be lifted by hundreds of dB into a full-scale step. The engine accepts a sample
// when its port voltages are within floor_v = tol_v + the port equation's rounding
// allowance (1.01e-8 V with the default options; model/engine/dk_stats.hpp and
// dk_acceptance.hpp) of the exact solution, so a swing no larger than floor_v, at the
// generator or at the load, may be all error: it is not a result. Per output and channel:
// a stage's channel is below the floor when the input channel driving it peaks at or below
// floor_v volts at the generator (in the file's terms floor_v / input_peak_v of full
// scale: -160 dBFS at the default 1 V) or when the stage's swing at the load peaks at or
// below floor_v; the dry output's channel when its input channel does. Such a channel is
// written as digital silence (zeros), takes no part in the normalisation, and the report
// lists it; an output whose channels are all below the floor is silent (scale 0) and is
// left out of the loudness matching. A fixed scale lifts nothing and is written as it is.
//
// Modelled noise (`noise`): each stage's own hiss is added at the load, after the engine:
// Gaussian noise whose density is the stage's output noise density at its operating point
// (model/analysis/noise.hpp: every resistor, channel, flicker and gate-current source, as
// `noise` reports them), shaped up to half the file's rate (dsp/shaped_noise.hpp), one
// independent stream per stage and channel from `noise_seed`, so a seed repeats the file.
// It is in volts at the load, so it stands to the signal as it would on the bench through
// the input calibration (input_peak_v). It is never normalised on its own: the scale
// comes from the noiseless output (pass 1 meters and peaks the noiseless volts; pass 2,
// or the one pass at a fixed scale, adds the noise before writing), so hiss under silence
// is not lifted to full scale. An output whose signal is below the silence floor has no
// scale of its own; its noise is then scaled as a signal peaking at the stage's clean
// swing would be (the largest clean output, model/analysis/headroom.hpp), so the file's
// hiss sits below the ceiling by the signal-to-noise ratio at the clean swing. The
// reported loudness and peaks are those of the written values, noise included.
//
// Files: every output is written to a temporary file beside it (dsp::sound_writer) and
// committed only when all of them are complete, all or none (base::output_set): by
// render() itself, or, when `control.outputs` is given, by the caller once it has done
// everything else that can fail. An output that is the input or that exists without
// `overwrite` is refused before any work starts. A float input holding
// NaN or infinity is refused naming the first position (dsp::sound_reader).
// Interrupt: `stop` is checked every block; when set, render() removes its temporaries and
// throws pinchoff::interrupted.
#include <atomic>
#include <cstdint>
#include <filesystem>
#include <functional>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include "base/output_file.hpp"
#include "dsp/oversampler.hpp"
#include "dsp/io/sound_file.hpp"
#include "model/engine/dk_engine.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/audio/oversampling_choice.hpp"

namespace pinchoff::model {

/// One channel's path at the file's rate: generator volts in, load volts out (rest value
/// removed), aligned with the input (see the file comment). Allocates only in the
/// constructor. Output sample n depends only on inputs 0..n+latency, never on how the
/// input was split into blocks.
class channel_renderer {
 public:
  /// factor 1, 2, 4, 8, 16, 32 or 64; base_rate_hz as dsp::oversampler takes it; block_samples >= 1
  /// is the size of the internal buffers (any input length is accepted).
  channel_renderer(const network& net, const operating_point& op, int factor, double base_rate_hz,
                   std::size_t block_samples = 8192, const dk_options& engine = {});

  /// Feeds in_v and writes the aligned outputs that are complete to the front of out_v
  /// (out_v.size() >= in_v.size()); returns how many. That is in_v.size() except while the
  /// first latency_samples() outputs are being dropped.
  std::size_t process(std::span<const double> in_v, std::span<double> out_v);
  /// After the last input: feeds zeros to bring out the outputs still owed (at most
  /// latency_samples(); out_v must hold that many) and returns how many. Inputs and outputs
  /// then have the same count; later calls return 0.
  std::size_t finish(std::span<double> out_v);

  int latency_samples() const noexcept { return latency_; }
  const dk_stats& engine_stats() const noexcept { return engine_.stats(); }
  double rest_output_v() const noexcept { return rest_v_; }

 private:
  std::size_t run(std::span<const double> in_v, std::span<double> out_v);
  dsp::oversampler os_;
  dk_engine engine_;
  double rest_v_;
  int latency_;
  std::size_t block_;
  std::vector<double> high_, low_, zeros_;
  long long to_skip_;   // outputs still to drop at the start
  long long fed_{0}, produced_{0};
  bool finished_{false};
};

/// A stage to render and where its file goes.
struct render_stage {
  std::string name;              ///< for reports (the stage file's stem)
  network net;
  operating_point op;
  std::filesystem::path output;
  /// Written with its sign flipped: an inverting stage's polarity restored, so its file and
  /// the dry one line up for A/B listening. The level figures do not change.
  bool invert{false};
};

enum class output_level {
  normalize,  ///< peak at peak_dbfs (two passes)
  fixed,      ///< 0 dBFS = full_scale_v volts at the load (one pass)
};

struct render_job {
  std::filesystem::path input;
  std::vector<render_stage> stages;                 ///< at least one
  std::optional<std::filesystem::path> dry_output;  ///< also write the input itself
  double input_peak_v{1.0};                         ///< generator volts for full scale, 1 µV to 1 kV
  /// 1, 2, 4, 8, 16, 32 or 64; 0: chosen from the input (model/audio/oversampling_choice.hpp)
  int oversample{8};
  output_level level{output_level::normalize};
  double peak_dbfs{-1.0};                           ///< normalize / match: peak ceiling, <= 0
  double full_scale_v{1.0};                         ///< fixed: volts at the load for 0 dBFS, 1 µV to 10 kV
  bool match_loudness{false};                       ///< several outputs: same integrated loudness
  std::optional<dsp::sample_format> format;         ///< default: nearest to the input's
  bool overwrite{false};
  /// 0: one per core. Engine threads are at most one per unit; with 2 or more the calling
  /// thread works beside them (see the file comment); 1 runs everything on the caller.
  int threads{0};
  std::size_t block_frames{8192};
  dk_options engine;
  bool noise{false};            ///< add each stage's modelled noise (see the file comment)
  std::uint64_t noise_seed{1};
};

struct render_progress {
  double fraction{0};          ///< 0..1 of the whole job
  double realtime_factor{0};   ///< input seconds rendered per second of wall time so far
  double seconds_left{0};      ///< estimate
};

struct render_control {
  std::function<void(const render_progress&)> progress;  ///< called from the calling thread
  const std::atomic<bool>* stop{nullptr};                 ///< set (e.g. by SIGINT) to abandon
  /// When given, the finished outputs are added here, uncommitted, for the caller to
  /// commit with its other outputs; otherwise render() commits them itself.
  base::output_set* outputs{nullptr};
};

struct output_report {
  std::filesystem::path path;
  std::string name;              ///< the stage's name, or "dry"
  bool is_dry{false};
  double scale{0};               ///< full scale per volt at the load (dry: per generator volt)
  /// Of the values written (before integer rounding; in two passes, the first pass's figures
  /// scaled by `scale`); -infinity when silent
  /// (no 400 ms block above BS.1770's absolute gate).
  double loudness_lufs{0};
  double sample_peak{0};         ///< ratio to full scale
  double true_peak{0};           ///< ratio to full scale (BS.1770 Annex 2, libebur128)
  /// Samples at or beyond full scale: clipped in an integer file; a float file keeps them.
  long long clipped_samples{0};
  bool matched{true};            ///< false for a silent output that loudness matching left out
  /// Normalised: every channel is below the silence floor (see the file comment), the file
  /// holds zeros and `scale` is 0.
  bool silent{false};
  /// Why it is silent: the input is below the floor (else the stage's output is).
  bool input_below_floor{false};
  std::vector<int> silent_channels;  ///< channels (from 1) written as zeros below the floor
  double peak_v{0};              ///< first pass: largest |volts| at the load (dry: at the generator)
  dk_stats engine;               ///< summed over the channels (not for dry)
  /// With noise (not for dry): the rms of the noise added at the load, from 0 to half the
  /// file's rate (the shaped density's exact variance), the scale it was written at (full
  /// scale per volt), and whether that scale came from the clean swing (a silent output).
  double noise_rms_v{0};
  double noise_scale{0};
  bool noise_scale_from_swing{false};
  double clean_swing_vpk{0};     ///< the stage's clean swing at the load, when the noise was scaled by it
};

struct render_report {
  dsp::sound_info input;
  dsp::sample_format format{};
  int oversample{1};             ///< the factor run
  bool oversample_chosen{false}; ///< job.oversample was 0: `survey` and `choice` hold why
  input_survey survey;
  oversampling_choice choice;
  double engine_rate_hz{0};
  int latency_samples{0};        ///< the round trip compensated, at the file's rate
  int threads{1};                ///< engine threads (at most one per unit)
  bool pipelined{false};         ///< the calling thread metered and stored beside them
  double target_lufs{0};         ///< match_loudness: the common loudness
  double floor_v{0};             ///< the silence floor (volts; see the file comment)
  double input_peak_v{0};        ///< largest |volts| of the input at the generator
  std::vector<output_report> outputs;  ///< the stages in order, then dry
  double seconds{0};             ///< wall time
  double realtime_factor{0};     ///< input duration / wall time
};

/// Runs the job (see the file comment). Throws io_error / input_error for files and
/// values (before any output exists), internal_error on failures of valid input,
/// interrupted when control.stop was set.
render_report render(const render_job& job, const render_control& control = {});

/// The silence floor of a render with these engine options, volts (see the file comment).
double render_floor_v(const dk_options& engine) noexcept;

/// The gains that give every output the same integrated loudness without any peak above
/// `ceiling` (ratio): loudness_lufs and peak of each output at scale 1; returns the scales.
/// Outputs whose loudness is -infinity (below BS.1770's gate) are scaled to the ceiling on
/// their own peak and do not set the common loudness; an output whose peak is 0 (below the
/// silence floor) gets scale 0. `target_lufs` receives the common loudness (-infinity when
/// no output sets it).
std::vector<double> loudness_matched_scales(std::span<const double> loudness_lufs, std::span<const double> peak,
                                            double ceiling, double& target_lufs);

}  // namespace pinchoff::model
