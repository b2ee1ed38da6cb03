// `earshot render FILE IN OUT`: an audio file through an effect, streamed
// block by block through libsndfile. One stream of the file's channels
// (stereo runs left and right in lockstep, each channel bit-identical to a
// mono stream with the same settings), created at the file's rate; the core
// resamples to the model rate and back.
#include <sndfile.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <cctype>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <memory>
#include <string>
#include <vector>

#include "cli.hpp"
#include "output_file.hpp"

namespace earshot {
namespace cli {
namespace {

const char* kHelp =
    "usage: earshot render FILE IN OUT [options]\n"
    "\n"
    "Runs the audio file IN through the effect FILE and writes OUT.\n"
    "IN may be WAV, FLAC, AIFF (anything libsndfile reads) at any sample rate; the\n"
    "stream runs at IN's rate and the core resamples to the model's rate and back.\n"
    "Mono or stereo: a stereo file runs left and right together with the same\n"
    "controls, mix and gains; each channel comes out exactly as a mono file of that\n"
    "channel would. More than 2 channels is an error.\n"
    "\n"
    "OUT has IN's sample rate. Its container follows OUT's extension (.wav, .flac,\n"
    ".aif/.aiff), or IN's container when OUT has no extension. Sample format:\n"
    "32-bit float for WAV and AIFF (the exact core output, bit for bit), 24-bit\n"
    "integer for FLAC; --encoding changes it (integer formats clip at full scale).\n"
    "\n"
    "OUT is written to a temporary file beside it and renamed into place when the\n"
    "render is complete: a failed render leaves no partial file. An existing OUT is\n"
    "refused unless --force; OUT may never be IN (also through a link).\n"
    "\n"
    "Latency: by default the stream latency is trimmed from the start and the tail\n"
    "is flushed with silence, so OUT has IN's length and lines up with it in time.\n"
    "\n"
    "options:\n"
    "  --control NAME=VALUE  set a control (repeatable; see 'earshot info FILE');\n"
    "                        the render starts at the value, without a ramp\n"
    "  --mix W               dry/wet, 0 = dry only .. 1 = wet only (default 1)\n"
    "  --input-gain DB       gain before the effect, -60 .. 24 dB (default 0)\n"
    "  --output-gain DB      gain after the effect, -60 .. 24 dB (default 0)\n"
    "  --block N             samples per earshot_process call, 1 .. 65536 (default\n"
    "                        512; the output does not depend on it)\n"
    "  --variant V           CPU variant: scalar, sse4, avx2, avx2fma (default: the\n"
    "                        best bit-exact one this CPU runs)\n"
    "  --keep-latency        no trimming: OUT starts with the stream latency and is\n"
    "                        that many samples longer than IN (tail flushed)\n"
    "  --encoding E          float (32-bit), pcm16 or pcm24\n"
    "  --progress            always show a progress bar on stderr (default: only\n"
    "                        when stderr is a terminal and IN is over 10 s)\n"
    "  --no-progress         never show it\n"
    "  --quiet               no summary line\n"
    "  --force               replace an existing OUT\n"
    MAX_STREAM_HELP
    "  -h, --help            this text\n";

struct SndCloser {
  void operator()(SNDFILE* f) const {
    if (f) sf_close(f);
  }
};
using SndPtr = std::unique_ptr<SNDFILE, SndCloser>;

std::string lower(std::string s) {
  for (char& c : s) c = char(std::tolower((unsigned char)c));
  return s;
}

std::string extension_of(const std::string& path) {
  const size_t slash = path.find_last_of('/');
  const size_t dot = path.find_last_of('.');
  if (dot == std::string::npos || (slash != std::string::npos && dot < slash) || dot + 1 == path.size() ||
      dot == (slash == std::string::npos ? 0 : slash + 1))
    return "";
  return lower(path.substr(dot + 1));
}

const char* container_name(int major) {
  switch (major) {
    case SF_FORMAT_WAV: return "WAV";
    case SF_FORMAT_FLAC: return "FLAC";
    case SF_FORMAT_AIFF: return "AIFF";
    default: return "the input's container";
  }
}

const char* encoding_name(int sub) {
  switch (sub) {
    case SF_FORMAT_FLOAT: return "32-bit float";
    case SF_FORMAT_PCM_16: return "16-bit integer";
    case SF_FORMAT_PCM_24: return "24-bit integer";
    default: return "?";
  }
}

// A one-line bar on stderr, redrawn when the percentage changes.
class Progress {
 public:
  Progress(bool on, int64_t total) : on_(on && total > 0), total_(total) {}
  void update(int64_t done) {
    if (!on_) return;
    const int pct = int(std::min<int64_t>(100, done * 100 / total_));
    if (pct == last_) return;
    last_ = pct;
    const int width = 40, filled = pct * width / 100;
    std::fprintf(stderr, "\rrendering [%s%s] %3d%%", std::string(size_t(filled), '#').c_str(),
                 std::string(size_t(width - filled), '.').c_str(), pct);
    std::fflush(stderr);
  }
  void finish() {
    if (on_ && last_ >= 0) std::fputc('\n', stderr);
    on_ = false;
  }

 private:
  bool on_;
  int64_t total_;
  int last_ = -1;
};

// ---- parse: every option is checked before any file is touched ------------------

struct RenderOptions {
  std::string fx_path, in_path, out_path;
  int block = 512;
  std::string variant;
  std::vector<std::string> controls;             // --control NAME=VALUE, in order
  const std::string* mix = nullptr;              // the option texts, for messages
  const std::string* input_gain = nullptr;
  const std::string* output_gain = nullptr;
  double mix_value = 1.0, in_db = 0.0, out_db = 0.0;
  int encoding = 0;   // libsndfile subtype, 0: by container
  int out_major = 0;  // libsndfile container from OUT's extension, 0: IN's
  bool keep_latency = false, force = false, quiet = false, progress = false, no_progress = false;
};

int parse_encoding(const std::string* e) {
  if (!e) return 0;
  if (*e == "float") return SF_FORMAT_FLOAT;
  if (*e == "pcm16") return SF_FORMAT_PCM_16;
  if (*e == "pcm24") return SF_FORMAT_PCM_24;
  throw UsageError("--encoding: unknown encoding '" + *e + "' (float, pcm16 or pcm24)");
}

int container_of(const std::string& out_path) {
  const std::string ext = extension_of(out_path);
  if (ext == "wav") return SF_FORMAT_WAV;
  if (ext == "flac") return SF_FORMAT_FLAC;
  if (ext == "aif" || ext == "aiff" || ext == "aifc") return SF_FORMAT_AIFF;
  if (!ext.empty())
    throw UsageError("OUT '" + out_path + "': unknown extension '." + ext +
                     "' (use .wav, .flac, .aif or .aiff, or no extension for IN's container)");
  return 0;
}

RenderOptions parse_render(const Args& a) {
  if (a.positional.size() != 3) {
    static const char* names[] = {"the effect FILE", "the input audio file IN", "the output audio file OUT"};
    if (a.positional.size() < 3) throw UsageError(std::string("missing ") + names[a.positional.size()]);
    throw UsageError("expected FILE IN OUT, got " + std::to_string(a.positional.size()) + " arguments");
  }
  RenderOptions o;
  o.fx_path = a.positional[0];
  o.in_path = a.positional[1];
  o.out_path = a.positional[2];
  if (const std::string* v = a.last("--block")) o.block = int(parse_integer("--block", *v, 1, EARSHOT_MAX_BLOCK));
  if (const std::string* v = a.last("--variant")) {
    o.variant = *v;
    check_variant(o.variant);
  }
  o.controls = a.all("--control");
  o.mix = a.last("--mix");
  o.input_gain = a.last("--input-gain");
  o.output_gain = a.last("--output-gain");
  if (o.mix) o.mix_value = parse_number("--mix", *o.mix, -HUGE_VAL, HUGE_VAL);
  if (o.input_gain) o.in_db = parse_number("--input-gain", *o.input_gain, -HUGE_VAL, HUGE_VAL);
  if (o.output_gain) o.out_db = parse_number("--output-gain", *o.output_gain, -HUGE_VAL, HUGE_VAL);
  o.encoding = parse_encoding(a.last("--encoding"));
  o.out_major = container_of(o.out_path);
  o.keep_latency = a.has("--keep-latency");
  o.force = a.has("--force");
  o.quiet = a.has("--quiet");
  o.progress = a.has("--progress");
  o.no_progress = a.has("--no-progress");
  return o;
}

// ---- set up: input, streams, output format ----------------------------------------

// One stream of `channels` channels with the settings applied, then reset:
// the render starts at the settings, unramped. Mix and gains are checked by
// the core; the error names the option at fault.
std::unique_ptr<Stream> make_stream(const RenderOptions& o, const std::vector<unsigned char>& bytes, int rate,
                                    int channels) {
  std::unique_ptr<Stream> stream(new Stream(bytes, rate, o.variant, o.fx_path, channels));
  Stream& s = *stream;
  apply_controls(s, o.controls);
  if (o.mix) {
    const int st = earshot_set_mix(s.get(), float(o.mix_value));
    if (st != EARSHOT_OK) throw UsageError("--mix " + *o.mix + ": " + earshot_status_text(st) + " (0 .. 1)");
  }
  if (o.input_gain || o.output_gain) {
    // Checked one at a time so the error names the option at fault.
    int st = earshot_set_gain(s.get(), float(o.in_db), 0.0f);
    if (st != EARSHOT_OK)
      throw UsageError("--input-gain " + *o.input_gain + ": " + earshot_status_text(st) + " (-60 .. 24 dB)");
    st = earshot_set_gain(s.get(), float(o.in_db), float(o.out_db));
    if (st != EARSHOT_OK)
      throw UsageError("--output-gain " + *o.output_gain + ": " + earshot_status_text(st) + " (-60 .. 24 dB)");
  }
  earshot_reset(s.get());
  return stream;
}

struct OutputFormat {
  int major = 0, sub = 0;
};

// OUT's container (its extension, else IN's) and encoding (--encoding, else
// float, or 24-bit for FLAC and for a container that cannot hold float).
OutputFormat output_format(const RenderOptions& o, int in_format, int rate, int channels, SF_INFO& out_info) {
  OutputFormat f{o.out_major != 0 ? o.out_major : in_format & SF_FORMAT_TYPEMASK, o.encoding};
  if (f.sub == 0) f.sub = f.major == SF_FORMAT_FLAC ? SF_FORMAT_PCM_24 : SF_FORMAT_FLOAT;
  out_info = SF_INFO{};
  out_info.samplerate = rate;
  out_info.channels = channels;
  out_info.format = f.major | f.sub;
  if (!sf_format_check(&out_info)) {
    if (o.encoding == 0) {
      out_info.format = f.major | SF_FORMAT_PCM_24;
      f.sub = SF_FORMAT_PCM_24;
    }
    if (!sf_format_check(&out_info))
      throw UsageError(std::string("OUT '") + o.out_path + "': " + container_name(f.major) + " cannot hold " +
                       encoding_name(f.sub) + " samples" + (o.encoding ? "; choose another --encoding" : ""));
  }
  return f;
}

// ---- compute: blocks through the streams, the latency trimmed -----------------------

// Runs blocks of interleaved frames through the stream's channels and writes
// what lies past the first `skip` output frames (the latency) to `out`.
class TrimmedRender {
 public:
  TrimmedRender(Stream& stream, int block, int64_t skip, SNDFILE* out, const std::string& out_path, Progress& bar)
      : stream_(stream), channels_(earshot_channels(stream.get())), to_skip_(skip), out_(out), out_path_(out_path),
        bar_(bar), outer_(size_t(block) * size_t(channels_)),
        chan_(size_t(channels_), std::vector<float>(size_t(block), 0.0f)),
        res_(size_t(channels_), std::vector<float>(size_t(block), 0.0f)) {}

  // k interleaved frames (k <= block).
  void interleaved(const float* frames, int k) {
    for (int t = 0; t < k; ++t)
      for (int c = 0; c < channels_; ++c) chan_[size_t(c)][size_t(t)] = frames[size_t(t * channels_ + c)];
    run(k);
  }
  // k frames of silence (k <= block): the flush that pushes the tail out.
  void silence(int k) {
    for (auto& ch : chan_) std::fill(ch.begin(), ch.begin() + k, 0.0f);
    run(k);
  }

  int64_t done = 0, written = 0, clipped = 0;
  float peak = 0;

 private:
  void run(int k) {
    const float* in[EARSHOT_MAX_CHANNELS];
    float* res[EARSHOT_MAX_CHANNELS];
    for (int c = 0; c < channels_; ++c) {
      in[c] = chan_[size_t(c)].data();
      res[c] = res_[size_t(c)].data();
    }
    if (earshot_process_channels(stream_.get(), in, res, k) != k)
      throw std::runtime_error("earshot_process_channels refused a block of " + std::to_string(k) + " frames");
    const int skip = int(std::min<int64_t>(to_skip_, k));
    to_skip_ -= skip;
    const int m = k - skip;
    for (int t = 0; t < m; ++t)
      for (int c = 0; c < channels_; ++c) {
        const float y = res_[size_t(c)][size_t(skip + t)];
        outer_[size_t(t * channels_ + c)] = y;
        const float ay = std::fabs(y);
        peak = std::max(peak, ay);
        if (ay > 1.0f) ++clipped;
      }
    if (m > 0 && sf_writef_float(out_, outer_.data(), m) != m)
      throw InputError("cannot write audio file '" + out_path_ + "': " + sf_strerror(out_));
    written += m;
    done += k;
    bar_.update(done);
  }

  Stream& stream_;
  int channels_;
  int64_t to_skip_;
  SNDFILE* out_;
  const std::string& out_path_;
  Progress& bar_;
  std::vector<float> outer_;
  std::vector<std::vector<float>> chan_, res_;
};

// Reads IN to its end through `r`, then flushes `latency` frames of silence.
// A read error or a short read of a seekable file is an error, never a
// shorter output (libsndfile can end a damaged file early without an error).
void render_all(SNDFILE* in, const std::string& in_path, int channels, int block, bool seekable, int64_t in_frames,
                int latency, TrimmedRender& r, Progress& bar) {
  std::vector<float> inter(size_t(block) * size_t(channels));
  for (;;) {
    const sf_count_t got = sf_readf_float(in, inter.data(), sf_count_t(block));
    if (got <= 0) break;
    r.interleaved(inter.data(), int(got));
  }
  if (sf_error(in) != SF_ERR_NO_ERROR) {
    const std::string msg = sf_strerror(in);
    bar.finish();
    throw InputError("cannot read audio file '" + in_path + "': read " + std::to_string(r.done) + " of " +
                     std::to_string(in_frames) + " frames: " + msg);
  }
  if (seekable && r.done != in_frames) {
    bar.finish();
    throw InputError("'" + in_path + "': read " + std::to_string(r.done) + " of " + std::to_string(in_frames) +
                     " frames");
  }
  for (int64_t left = latency; left > 0;) {
    const int k = int(std::min<int64_t>(left, int64_t(block)));
    r.silence(k);
    left -= k;
  }
}

// ---- print ------------------------------------------------------------------------

void print_render(const RenderOptions& o, const TrimmedRender& r, const OutputFormat& f, int rate, int channels,
                  int latency, const Stream& stream) {
  const unsigned nonfinite = earshot_nonfinite_count(stream.get());
  if (nonfinite > 0)
    std::fprintf(stderr,
                 "earshot render: warning: %u block(s) produced a non-finite value; each was replaced by silence "
                 "(in every channel) and the stream state was reset\n",
                 nonfinite);
  if (r.clipped > 0 && f.sub != SF_FORMAT_FLOAT)
    std::fprintf(stderr, "earshot render: warning: %lld sample(s) above full scale were clipped in %s output\n",
                 (long long)r.clipped, encoding_name(f.sub));
  if (o.quiet) return;
  const std::string peak_text = r.peak > 0 ? format_fixed(20 * std::log10(double(r.peak)), 1) + " dBFS" : "silent";
  std::printf("wrote %s: %lld frames (%s s), %s, %d Hz, %s %s; variant %s; latency %d samples %s; peak %s\n",
              o.out_path.c_str(), (long long)r.written, format_fixed(double(r.written) / rate, 3).c_str(),
              channels == 1 ? "mono" : "stereo", rate, container_name(f.major), encoding_name(f.sub),
              earshot_variant(stream.get()), latency,
              latency == 0 ? "(none)" : o.keep_latency ? "(kept)" : "(trimmed)", peak_text.c_str());
}

}  // namespace

int cmd_render(const std::vector<std::string>& argv) {
  const Args a = parse_args(argv, {{"--help", false}, MAX_STREAM_OPTION,
                                   {"--control", true},
                                   {"--block", true},
                                   {"--variant", true},
                                   {"--mix", true},
                                   {"--input-gain", true},
                                   {"--output-gain", true},
                                   {"--keep-latency", false},
                                   {"--encoding", true},
                                   {"--progress", false},
                                   {"--no-progress", false},
                                   {"--quiet", false},
                                   {"--force", false}});
  apply_stream_limit(a);
  if (a.has("--help")) {
    std::fputs(kHelp, stdout);
    return kExitOk;
  }
  const RenderOptions o = parse_render(a);
  const std::vector<unsigned char> bytes = read_effect_file(o.fx_path);

  SF_INFO in_info{};
  SndPtr in(sf_open(o.in_path.c_str(), SFM_READ, &in_info));
  if (!in) throw InputError("cannot read audio file '" + o.in_path + "': " + sf_strerror(nullptr));
  const int channels = in_info.channels, rate = in_info.samplerate;
  if (channels < 1 || channels > 2)
    throw InputError("audio file '" + o.in_path + "' has " + std::to_string(channels) +
                     " channels; earshot renders mono or stereo (1 or 2 channels) only");
  if (!stream_rate_ok(rate))
    throw InputError("audio file '" + o.in_path + "' has sample rate " + std::to_string(rate) + " Hz; " +
                     stream_rates_text());
  refuse_same_file("OUT", o.out_path, {{"IN", o.in_path}, {"FILE", o.fx_path}});
  check_overwrite(o.out_path, o.force);
  // libsndfile shortens a WAV whose data runs past the end of the file: refused, never a shorter output.
  if (in_info.seekable) check_declared_length(o.in_path, in_info.format, channels, int64_t(in_info.frames));

  const std::unique_ptr<Stream> stream = make_stream(o, bytes, rate, channels);
  const int latency = stream->latency();
  SF_INFO out_info;
  const OutputFormat format = output_format(o, in_info.format, rate, channels, out_info);
  // Written to a temporary file beside OUT and renamed over it only after the whole run succeeded
  // (output_file.hpp), so a failed run leaves an existing OUT untouched and no partial file.
  OutputFile out_file(o.out_path, "audio file");
  SNDFILE* const out = out_file.sound(out_info);
  if (format.sub != SF_FORMAT_FLOAT) sf_command(out, SFC_SET_CLIPPING, nullptr, SF_TRUE);

  const int64_t in_frames = in_info.frames;
  const bool seekable = in_info.seekable != 0 && in_frames >= 0;
  const bool want_bar = !o.no_progress && (o.progress || (isatty(2) && seekable && in_frames > int64_t(10) * rate));
  Progress bar(want_bar, seekable ? in_frames + latency : 0);
  TrimmedRender r(*stream, o.block, o.keep_latency ? 0 : latency, out, o.out_path, bar);
  render_all(in.get(), o.in_path, channels, o.block, seekable, in_frames, latency, r, bar);
  bar.finish();
  out_file.commit();
  print_render(o, r, format, rate, channels, latency, *stream);
  return kExitOk;
}

}  // namespace cli
}  // namespace earshot
