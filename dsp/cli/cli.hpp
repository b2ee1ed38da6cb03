// Shared pieces of the `earshot` command-line tool: argument parsing, the two
// kinds of failure (a bad command line, a bad file), the effect file and the
// stream handle. The tool reaches the core only through earshot.h (plus the
// native variant helpers of cpu_variants.hpp).
#pragma once
#include <cstdint>
#include <memory>
#include <stdexcept>
#include <string>
#include <utility>
#include <vector>

#include <rapidjson/document.h>

#include "earshot/earshot.h"

namespace earshot {
namespace cli {

// Exit codes (documented in docs/cli.md and `earshot --help`).
constexpr int kExitOk = 0;
constexpr int kExitCheckFailed = 1;  // verify: a parity or invariance check failed
constexpr int kExitUsage = 2;        // bad command line
constexpr int kExitInput = 3;        // unreadable or invalid effect or audio file, write failure

// A bad command line: unknown option, missing or malformed value, ...
struct UsageError : std::runtime_error {
  using std::runtime_error::runtime_error;
};
// A bad file or an I/O failure.
struct InputError : std::runtime_error {
  using std::runtime_error::runtime_error;
};

// ---- arguments -------------------------------------------------------------

struct OptionSpec {
  const char* name;  // with the leading "--"
  bool takes_value;
};

// Options may come before, between or after the positional arguments, as
// `--name VALUE` or `--name=VALUE`; `--` ends the options.
struct Args {
  std::vector<std::string> positional;
  std::vector<std::pair<std::string, std::string>> options;  // in command-line order

  bool has(const std::string& name) const;
  const std::string* last(const std::string& name) const;  // null when absent
  std::vector<std::string> all(const std::string& name) const;
};

Args parse_args(const std::vector<std::string>& argv, const std::vector<OptionSpec>& specs);

// Strict number parsing: the whole text must be the number, finite, in range.
// `what` names the option in the error, e.g. "--block".
double parse_number(const std::string& what, const std::string& text, double lo, double hi);
// --rate HZ: 0 when absent, else a whole number of Hz from EARSHOT_MIN_RATE to
// EARSHOT_MAX_RATE (UsageError naming the option otherwise).
double parse_rate_option(const Args& a);
// Whether a file's sample rate is one streams run at, and the phrase that says
// which are ("earshot streams run at 8000 .. 384000 Hz").
inline bool stream_rate_ok(double hz) { return hz >= EARSHOT_MIN_RATE && hz <= EARSHOT_MAX_RATE; }
std::string stream_rates_text();
long parse_integer(const std::string& what, const std::string& text, long lo, long hi);

// ---- audio files -----------------------------------------------------------

// A whole audio file as float, interleaved (libsndfile's scaling: integer PCM
// divided by 2^(bits-1)).
struct Audio {
  std::vector<float> samples;  // interleaved
  size_t frames = 0;
  int channels = 0;
  int rate = 0;
  int format = 0;  // libsndfile's SF_INFO.format (major | subtype)
};

// The most samples (frames x channels) read_audio holds: 2^28 floats, 1 GiB,
// 46 minutes of stereo at 48 kHz. A few MB of FLAC can decode to that much.
constexpr int64_t kMaxAudioSamples = int64_t(1) << 28;

// Reads any file libsndfile reads; InputError naming the file and what is
// wrong: unreadable, 1..32 channels, a rate outside stream_rate_ok, more than
// kMaxAudioSamples, fewer frames than declared, non-finite samples. Memory
// grows with the frames decoded, not with the header's claim.
Audio read_audio(const std::string& path);

// libsndfile shortens a WAV whose data chunk runs past the end of the file to
// what is there, without an error. This reads the header itself (RIFF, RIFX,
// RF64 data chunk and ds64 size; AIFF/AIFC COMM frame count) and throws
// InputError "'<path>': read N of M frames ..." when the header declares more
// frames than libsndfile reports (`frames`). Other containers, and encodings
// other than 8..32-bit integer and 32/64-bit float PCM, are not checked here
// (FLAC's STREAMINFO count is libsndfile's own, so a short read shows it).
void check_declared_length(const std::string& path, int format, int channels, int64_t frames);

// ---- effect file and stream ------------------------------------------------

// Reads a whole effect file; InputError naming the file and the OS reason.
std::vector<unsigned char> read_effect_file(const std::string& path);

// Checks a --variant value against the variants compiled in and this CPU.
void check_variant(const std::string& variant);

// The native variants this CPU can run, in preference order (scalar first).
std::vector<std::string> supported_variants();

// The memory limit every Stream of this run is created under (bytes; the
// core's default unless --max-stream-mib raised it). MAX_STREAM_OPTION goes
// into a command's option list; apply_stream_limit reads it.
#define MAX_STREAM_OPTION {"--max-stream-mib", true}
void apply_stream_limit(const Args& a);
size_t stream_limit_bytes();
#define MAX_STREAM_HELP                                                           \
  "  --max-stream-mib N    memory a stream may use per channel, in MiB (default 64; a file\n" \
  "                        needing more is refused, naming the layer)\n"

// Owns one earshot_stream.
class Stream {
 public:
  // InputError "<path>: <core message>" on failure. `channels` run in
  // lockstep (earshot_create_channels); the --max-stream-mib limit holds per channel.
  Stream(const std::vector<unsigned char>& bytes, double host_rate, const std::string& variant,
         const std::string& path, int channels = 1);
  ~Stream() { earshot_destroy(s_); }
  Stream(const Stream&) = delete;
  Stream& operator=(const Stream&) = delete;

  earshot_stream* get() const { return s_; }
  int latency() const { return earshot_latency(s_); }
  // Processes any number of samples in blocks of at most `block`.
  void process(const float* in, float* out, size_t n, int block);
  // The same for every channel: in[c][0..n) to out[c][0..n).
  void process_channels(const std::vector<std::vector<float>>& in, std::vector<std::vector<float>>& out, size_t n,
                        int block);
  rapidjson::Document info() const;

 private:
  earshot_stream* s_ = nullptr;
};

// Applies --control NAME=VALUE settings; UsageError naming the control, the
// value and the core's status text (with the allowed range) when refused.
void apply_controls(Stream& s, const std::vector<std::string>& settings);

// Field access on the info JSON with defaults for absent members.
double json_number(const rapidjson::Value& v, const char* key, double fallback = 0);
std::string json_string(const rapidjson::Value& v, const char* key, const std::string& fallback = "");

// ---- output helpers --------------------------------------------------------

std::string format_fixed(double v, int decimals);
std::string format_count(int64_t v);  // 1234567 → "1 234 567"
std::string hex64(uint64_t v);

// ---- commands --------------------------------------------------------------
// Each takes the arguments after the command word and returns an exit code;
// it throws UsageError or InputError, which main.cpp's one guarded runner
// turns into a message and an exit code. main.cpp's table lists them.

int cmd_info(const std::vector<std::string>& argv);      // info.cpp
int cmd_render(const std::vector<std::string>& argv);    // render.cpp
int cmd_bench(const std::vector<std::string>& argv);     // bench.cpp
int cmd_verify(const std::vector<std::string>& argv);    // verify.cpp
int cmd_site(const std::vector<std::string>& argv);      // site.cpp
int cmd_loudness(const std::vector<std::string>& argv);  // loudness.cpp
int cmd_anchors(const std::vector<std::string>& argv);   // loudness.cpp
int cmd_tally(const std::vector<std::string>& argv);     // tally.cpp

}  // namespace cli
}  // namespace earshot
