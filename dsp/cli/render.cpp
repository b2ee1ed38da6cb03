// `earshot render FILE IN OUT`: an audio file through an effect, streamed
// block by block through libsndfile. One stream per channel (stereo = two
// independent mono streams with the same settings), created at the file's
// rate; the core resamples to the model rate and back.
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
    "Mono or stereo: a stereo file runs as two independent streams, left and right,\n"
    "with the same controls, mix and gains. More than 2 channels is an error.\n"
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
  if (a.positional.size() != 3) {
    static const char* names[] = {"the effect FILE", "the input audio file IN", "the output audio file OUT"};
    if (a.positional.size() < 3) throw UsageError(std::string("missing ") + names[a.positional.size()]);
    throw UsageError("expected FILE IN OUT, got " + std::to_string(a.positional.size()) + " arguments");
  }
  const std::string fx_path = a.positional[0], in_path = a.positional[1], out_path = a.positional[2];

  // Every option is checked before any file is touched.
  int block = 512;
  if (const std::string* v = a.last("--block")) block = int(parse_integer("--block", *v, 1, EARSHOT_MAX_BLOCK));
  std::string variant;
  if (const std::string* v = a.last("--variant")) {
    variant = *v;
    check_variant(variant);
  }
  const bool has_mix = a.has("--mix"), has_gain = a.has("--input-gain") || a.has("--output-gain");
  const double mix = has_mix ? parse_number("--mix", *a.last("--mix"), -HUGE_VAL, HUGE_VAL) : 1.0;
  const double in_db =
      a.has("--input-gain") ? parse_number("--input-gain", *a.last("--input-gain"), -HUGE_VAL, HUGE_VAL) : 0.0;
  const double out_db =
      a.has("--output-gain") ? parse_number("--output-gain", *a.last("--output-gain"), -HUGE_VAL, HUGE_VAL) : 0.0;
  int encoding = 0;
  if (const std::string* e = a.last("--encoding")) {
    if (*e == "float")
      encoding = SF_FORMAT_FLOAT;
    else if (*e == "pcm16")
      encoding = SF_FORMAT_PCM_16;
    else if (*e == "pcm24")
      encoding = SF_FORMAT_PCM_24;
    else
      throw UsageError("--encoding: unknown encoding '" + *e + "' (float, pcm16 or pcm24)");
  }
  const std::string ext = extension_of(out_path);
  int out_major = 0;
  if (ext == "wav")
    out_major = SF_FORMAT_WAV;
  else if (ext == "flac")
    out_major = SF_FORMAT_FLAC;
  else if (ext == "aif" || ext == "aiff" || ext == "aifc")
    out_major = SF_FORMAT_AIFF;
  else if (!ext.empty())
    throw UsageError("OUT '" + out_path + "': unknown extension '." + ext +
                     "' (use .wav, .flac, .aif or .aiff, or no extension for IN's container)");

  const std::vector<unsigned char> bytes = read_effect_file(fx_path);

  SF_INFO in_info{};
  SndPtr in(sf_open(in_path.c_str(), SFM_READ, &in_info));
  if (!in) throw InputError("cannot read audio file '" + in_path + "': " + sf_strerror(nullptr));
  const int channels = in_info.channels, rate = in_info.samplerate;
  if (channels < 1 || channels > 2)
    throw InputError("audio file '" + in_path + "' has " + std::to_string(channels) +
                     " channels; earshot renders mono or stereo (1 or 2 channels) only");
  if (!stream_rate_ok(rate))
    throw InputError("audio file '" + in_path + "' has sample rate " + std::to_string(rate) + " Hz; " +
                     stream_rates_text());
  refuse_same_file("OUT", out_path, {{"IN", in_path}, {"FILE", fx_path}});
  check_overwrite(out_path, a.has("--force"));
  // libsndfile shortens a WAV whose data runs past the end of the file: refused, never a shorter output.
  if (in_info.seekable) check_declared_length(in_path, in_info.format, channels, int64_t(in_info.frames));

  // Streams, settings, then reset: the render starts at the settings, unramped.
  std::vector<std::unique_ptr<Stream>> streams;
  for (int c = 0; c < channels; ++c) {
    streams.emplace_back(new Stream(bytes, rate, variant, fx_path));
    Stream& s = *streams.back();
    apply_controls(s, a.all("--control"));
    if (has_mix) {
      const int st = earshot_set_mix(s.get(), float(mix));
      if (st != EARSHOT_OK)
        throw UsageError("--mix " + *a.last("--mix") + ": " + earshot_status_text(st) + " (0 .. 1)");
    }
    if (has_gain) {
      // Checked one at a time so the error names the option at fault.
      int st = earshot_set_gain(s.get(), float(in_db), 0.0f);
      if (st != EARSHOT_OK)
        throw UsageError("--input-gain " + *a.last("--input-gain") + ": " + earshot_status_text(st) +
                         " (-60 .. 24 dB)");
      st = earshot_set_gain(s.get(), float(in_db), float(out_db));
      if (st != EARSHOT_OK)
        throw UsageError("--output-gain " + *a.last("--output-gain") + ": " + earshot_status_text(st) +
                         " (-60 .. 24 dB)");
    }
    earshot_reset(s.get());
  }
  const int latency = streams[0]->latency();
  const bool keep = a.has("--keep-latency");

  // Output format.
  const int in_major = in_info.format & SF_FORMAT_TYPEMASK;
  if (out_major == 0) out_major = in_major;
  int sub = encoding;
  if (sub == 0) sub = out_major == SF_FORMAT_FLAC ? SF_FORMAT_PCM_24 : SF_FORMAT_FLOAT;
  SF_INFO out_info{};
  out_info.samplerate = rate;
  out_info.channels = channels;
  out_info.format = out_major | sub;
  if (!sf_format_check(&out_info)) {
    if (encoding == 0) {
      out_info.format = out_major | SF_FORMAT_PCM_24;
      sub = SF_FORMAT_PCM_24;
    }
    if (!sf_format_check(&out_info))
      throw UsageError(std::string("OUT '") + out_path + "': " + container_name(out_major) + " cannot hold " +
                       encoding_name(sub) + " samples" + (encoding ? "; choose another --encoding" : ""));
  }
  // Written to a temporary file beside OUT and renamed over it only after the whole run succeeded
  // (output_file.hpp), so a failed run leaves an existing OUT untouched and no partial file.
  OutputFile out_file(out_path, "audio file");
  SNDFILE* const out = out_file.sound(out_info);
  if (sub != SF_FORMAT_FLOAT) sf_command(out, SFC_SET_CLIPPING, nullptr, SF_TRUE);

  const int64_t in_frames = in_info.frames;
  const bool seekable = in_info.seekable != 0 && in_frames >= 0;
  const bool want_bar = !a.has("--no-progress") &&
                        (a.has("--progress") || (isatty(2) && seekable && in_frames > int64_t(10) * rate));
  Progress bar(want_bar, seekable ? in_frames + latency : 0);

  const size_t B = size_t(block);
  std::vector<float> inter(B * size_t(channels)), outer(B * size_t(channels));
  std::vector<std::vector<float>> chan(static_cast<size_t>(channels), std::vector<float>(B, 0.0f));
  std::vector<std::vector<float>> res(static_cast<size_t>(channels), std::vector<float>(B, 0.0f));
  int64_t to_skip = keep ? 0 : latency, written = 0, clipped = 0, done = 0;
  float peak = 0;

  auto fail_write = [&]() { throw InputError("cannot write audio file '" + out_path + "': " + sf_strerror(out)); };
  // Runs `k` frames from chan[] through the streams and writes what is past the trim.
  auto run = [&](int k) {
    for (int c = 0; c < channels; ++c)
      if (earshot_process(streams[size_t(c)]->get(), chan[size_t(c)].data(), res[size_t(c)].data(), k) != k)
        throw std::runtime_error("earshot_process refused a block of " + std::to_string(k) + " samples");
    const int skip = int(std::min<int64_t>(to_skip, k));
    to_skip -= skip;
    const int m = k - skip;
    for (int t = 0; t < m; ++t)
      for (int c = 0; c < channels; ++c) {
        const float y = res[size_t(c)][size_t(skip + t)];
        outer[size_t(t * channels + c)] = y;
        const float ay = std::fabs(y);
        peak = std::max(peak, ay);
        if (ay > 1.0f) ++clipped;
      }
    if (m > 0 && sf_writef_float(out, outer.data(), m) != m) fail_write();
    written += m;
    done += k;
    bar.update(done);
  };

  for (;;) {
    const sf_count_t got = sf_readf_float(in.get(), inter.data(), sf_count_t(B));
    if (got <= 0) break;
    for (sf_count_t t = 0; t < got; ++t)
      for (int c = 0; c < channels; ++c) chan[size_t(c)][size_t(t)] = inter[size_t(t * channels + c)];
    run(int(got));
  }
  if (sf_error(in.get()) != SF_ERR_NO_ERROR) {
    const std::string msg = sf_strerror(in.get());
    bar.finish();
    throw InputError("cannot read audio file '" + in_path + "': read " + std::to_string(done) + " of " +
                     std::to_string(in_frames) + " frames: " + msg);
  }
  // libsndfile can end a damaged file early without setting an error: a short read is an error, never a
  // shorter output.
  if (seekable && done != in_frames) {
    bar.finish();
    throw InputError("'" + in_path + "': read " + std::to_string(done) + " of " + std::to_string(in_frames) +
                     " frames");
  }
  // Flush: `latency` samples of silence push the tail out.
  for (int64_t left = latency; left > 0;) {
    const int k = int(std::min<int64_t>(left, int64_t(B)));
    for (int c = 0; c < channels; ++c) std::fill(chan[size_t(c)].begin(), chan[size_t(c)].begin() + k, 0.0f);
    run(k);
    left -= k;
  }
  bar.finish();
  out_file.commit();

  unsigned nonfinite = 0;
  for (const auto& s : streams) nonfinite += earshot_nonfinite_count(s->get());
  if (nonfinite > 0)
    std::fprintf(stderr,
                 "earshot render: warning: %u block(s) produced a non-finite value; each was replaced by silence "
                 "and the stream state was reset\n",
                 nonfinite);
  if (clipped > 0 && sub != SF_FORMAT_FLOAT)
    std::fprintf(stderr, "earshot render: warning: %lld sample(s) above full scale were clipped in %s output\n",
                 (long long)clipped, encoding_name(sub));
  if (!a.has("--quiet")) {
    const std::string peak_text = peak > 0 ? format_fixed(20 * std::log10(double(peak)), 1) + " dBFS" : "silent";
    std::printf("wrote %s: %lld frames (%s s), %s, %d Hz, %s %s; variant %s; latency %d samples %s; peak %s\n",
                out_path.c_str(), (long long)written, format_fixed(double(written) / rate, 3).c_str(),
                channels == 1 ? "mono" : "stereo", rate, container_name(out_major), encoding_name(sub),
                earshot_variant(streams[0]->get()), latency,
                latency == 0 ? "(none)" : keep ? "(kept)" : "(trimmed)", peak_text.c_str());
  }
  return kExitOk;
}

}  // namespace cli
}  // namespace earshot
