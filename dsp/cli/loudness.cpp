// `earshot loudness FILE...`: integrated loudness (ITU-R BS.1770-4) of audio
// files, optionally writing a loudness-matched copy; and `earshot anchors
// REF... --out DIR`: the MUSHRA anchors (ITU-R BS.1534-3) of reference clips.
// Both read audio through libsndfile and reach the core only through the C
// ABI (earshot_loudness, earshot_loudness_match, earshot_anchor), so their
// figures are the ones the browser computes. docs/listening.md describes them.
#include <sndfile.h>
#include <sys/stat.h>

#include <algorithm>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <exception>
#include <memory>
#include <new>
#include <string>
#include <vector>

#include "cli.hpp"
#include "text_out.hpp"
#include "output_file.hpp"

#include <rapidjson/prettywriter.h>
#include <rapidjson/stringbuffer.h>

namespace earshot {
namespace cli {
namespace {

const char* kLoudnessHelp =
    "usage: earshot loudness FILE... [options]\n"
    "\n"
    "Prints the integrated loudness of each audio file (WAV, FLAC, AIFF: anything\n"
    "libsndfile reads) per ITU-R BS.1770-4, in LUFS: K-weighting, 400 ms blocks\n"
    "with 75% overlap, absolute gate -70 LUFS, relative gate -10 LU. It is the\n"
    "core's measurement, the same the listening page uses to match stimuli.\n"
    "\n"
    "Channel weights by channel count: 1-3 channels 1.0 each; 4: L R Ls Rs;\n"
    "5: L R C Ls Rs; 6: L R C LFE Ls Rs (LFE not counted); surround channels\n"
    "weigh 1.41. Other counts need --weights.\n"
    "\n"
    "A file with no 400 ms block above -70 LUFS (silence, or shorter than 0.4 s)\n"
    "reads -inf (null in JSON).\n"
    "\n"
    "options:\n"
    "  --json            print one JSON document instead of the table\n"
    "  --weights LIST    channel weights, comma-separated, one per channel, 0 .. 10\n"
    "  --match LUFS      write a copy of the (single) FILE scaled to this loudness,\n"
    "                    -70 .. 0, to --out as 32-bit float WAV\n"
    "  --out FILE        where --match writes (must not exist unless --force; never\n"
    "                    FILE itself, also through a link)\n"
    "  --force           replace an existing --out\n"
    "  -h, --help        this text\n"
    "\n"
    "exit codes: 0 success, 2 bad command line, 3 unreadable or invalid audio file,\n"
    "            or a write failure\n";

const char* kAnchorsHelp =
    "usage: earshot anchors REF... --out DIR [options]\n"
    "\n"
    "Writes the MUSHRA anchors (ITU-R BS.1534-3) of each reference clip REF into\n"
    "DIR: NAME-lp3500.wav (the low anchor, 3.5 kHz low-pass) and NAME-lp7000.wav\n"
    "(the mid anchor, 7 kHz low-pass), where NAME is REF's file name without its\n"
    "extension. 32-bit float WAV at REF's rate, with REF's length and channels.\n"
    "\n"
    "The filter is a linear-phase FIR applied centred, so an anchor has no delay:\n"
    "it stays sample-aligned with REF. Pass band flat within +-0.003 dB, at least\n"
    "69 dB attenuation from 8/7 of the pass-band edge (4 kHz for the low anchor)\n"
    "(docs/listening.md). Anchors are not loudness-matched here; the listening\n"
    "page matches every stimulus to the configured target.\n"
    "\n"
    "options:\n"
    "  --out DIR         folder to write into (created if missing; required)\n"
    "  --passband HZ     write one low-pass copy NAME-lpHZ.wav per value instead of\n"
    "                    the two standard anchors (repeatable; 1000 .. 20000, and\n"
    "                    9/7 of it must not exceed half the sample rate)\n"
    "  --force           replace existing anchor files\n"
    "  -h, --help        this text\n"
    "\n"
    "exit codes: 0 success, 2 bad command line, 3 unreadable or invalid audio file,\n"
    "            or a write failure\n";

// Writes the temporary file of `out` (output_file.hpp); the caller commits it.
void write_float_wav(OutputFile& out, const Audio& a, const std::vector<float>& samples) {
  SF_INFO info;
  std::memset(&info, 0, sizeof info);
  info.channels = a.channels;
  info.samplerate = a.rate;
  info.format = SF_FORMAT_WAV | SF_FORMAT_FLOAT;
  SNDFILE* f = out.sound(info);
  const sf_count_t put = a.frames ? sf_writef_float(f, samples.data(), sf_count_t(a.frames)) : 0;
  if (put != sf_count_t(a.frames))
    throw InputError("cannot write audio file '" + out.target() + "': " + sf_strerror(f));
}

double peak_dbfs(const std::vector<float>& x) {
  float p = 0;
  for (float v : x) p = std::max(p, std::abs(v));
  return p > 0 ? 20.0 * std::log10(double(p)) : -INFINITY;
}

std::vector<double> parse_weights(const std::string& text) {
  std::vector<double> w;
  size_t start = 0;
  while (true) {
    const size_t comma = text.find(',', start);
    const std::string item = text.substr(start, comma == std::string::npos ? std::string::npos : comma - start);
    w.push_back(parse_number("--weights item " + std::to_string(w.size() + 1), item, 0, 10));
    if (comma == std::string::npos) break;
    start = comma + 1;
  }
  return w;
}

// The core's status as a message naming the file and what it refused.
std::string status_message(const std::string& path, int st) {
  return "'" + path + "': the core refused it: " + earshot_status_text(st);
}

std::string lufs_text(double v) { return std::isinf(v) ? "-inf" : format_fixed(v, 2); }

struct LoudnessOptions {
  std::vector<double> weights;  // empty: the default layout
  bool matching = false, json = false;
  double target = 0;
  std::string out_path;
};

LoudnessOptions parse_loudness(const Args& a) {
  if (a.positional.empty()) throw UsageError("give at least one audio FILE");
  LoudnessOptions o;
  if (const std::string* w = a.last("--weights")) o.weights = parse_weights(*w);
  o.matching = a.has("--match");
  o.json = a.has("--json");
  if (o.matching) {
    o.target = parse_number("--match", *a.last("--match"), -70, 0);
    if (a.positional.size() != 1) throw UsageError("--match takes exactly one FILE");
    if (!a.has("--out")) throw UsageError("--match needs --out FILE");
    o.out_path = *a.last("--out");
    if (o.out_path == a.positional[0])
      throw UsageError("--out '" + o.out_path + "' is the same file as FILE '" + a.positional[0] + "'; choose another");
    refuse_same_file("--out", o.out_path, {{"FILE", a.positional[0]}});
    check_overwrite(o.out_path, a.has("--force"));
  } else if (a.has("--out")) {
    throw UsageError("--out is only used with --match");
  }
  return o;
}

struct FileLoudness {
  std::string path;
  int channels = 0, rate = 0;
  size_t frames = 0;
  double seconds = 0, lkfs = 0, peak = 0;
  double gain = 0, peak_after = 0;  // with --match
};

// Measures one file and, with --match, writes its matched copy to --out.
FileLoudness measure_file(const std::string& path, const LoudnessOptions& o) {
  Audio au = read_audio(path);
  const std::vector<double>& weights = o.weights;
  if (!weights.empty() && int(weights.size()) != au.channels)
    throw UsageError("--weights gives " + std::to_string(weights.size()) + " weights but '" + path + "' has " +
                     std::to_string(au.channels) + " channels");
  if (weights.empty() && au.channels > 6)
    throw UsageError("'" + path + "' has " + std::to_string(au.channels) +
                     " channels, which have no default weights; give --weights");
  const double* wp = weights.empty() ? nullptr : weights.data();
  FileLoudness r;
  r.path = path;
  r.channels = au.channels;
  r.rate = au.rate;
  r.frames = au.frames;
  const int st = earshot_loudness(au.samples.data(), au.frames, au.channels, double(au.rate), wp, &r.lkfs);
  if (st != EARSHOT_OK) throw InputError(status_message(path, st));
  r.seconds = double(au.frames) / double(au.rate);
  r.peak = peak_dbfs(au.samples);
  if (!o.matching) return r;
  if (std::isinf(r.lkfs))
    throw InputError("'" + path + "' is silent (no 400 ms block above -70 LUFS): there is no loudness to match");
  const int ms =
      earshot_loudness_match(au.samples.data(), au.frames, au.channels, double(au.rate), wp, o.target, &r.gain);
  if (ms != EARSHOT_OK) throw InputError(status_message(path, ms));
  r.peak_after = peak_dbfs(au.samples);
  OutputFile out(o.out_path, "audio file");
  write_float_wav(out, au, au.samples);
  out.commit();
  if (r.peak_after > 0)
    std::fprintf(stderr,
                 "earshot loudness: note: '%s' peaks at %+.2f dBFS after matching; the float WAV keeps the "
                 "peaks, but playback at full scale will clip\n",
                 o.out_path.c_str(), r.peak_after);
  return r;
}

template <class W>
void write_file_json(W& w, const FileLoudness& r, const LoudnessOptions& o) {
  w.StartObject();
  w.Key("file");
  w.String(r.path);
  w.Key("integrated_lufs");
  if (std::isinf(r.lkfs))
    w.Null();
  else
    w.Double(r.lkfs);
  w.Key("channels");
  w.Int(r.channels);
  w.Key("sample_rate");
  w.Int(r.rate);
  w.Key("frames");
  w.Uint64(r.frames);
  w.Key("seconds");
  w.Double(r.seconds);
  w.Key("sample_peak_dbfs");
  if (std::isinf(r.peak))
    w.Null();
  else
    w.Double(r.peak);
  if (o.matching) {
    w.Key("matched");
    w.StartObject();
    w.Key("out");
    w.String(o.out_path);
    w.Key("target_lufs");
    w.Double(o.target);
    w.Key("gain_db");
    w.Double(r.gain);
    w.Key("sample_peak_dbfs");
    w.Double(r.peak_after);
    w.EndObject();
  }
  w.EndObject();
}

void print_file_text(const FileLoudness& r, const LoudnessOptions& o) {
  std::printf("%8s LUFS  %s  (%d ch, %d Hz, %s s, sample peak %s dBFS)\n", lufs_text(r.lkfs).c_str(), r.path.c_str(),
              r.channels, r.rate, format_fixed(r.seconds, 3).c_str(),
              std::isinf(r.peak) ? "-inf" : format_fixed(r.peak, 2).c_str());
  if (o.matching)
    std::printf("%8s LUFS  %s  (gain %+.2f dB, sample peak %s dBFS)\n", lufs_text(o.target).c_str(),
                o.out_path.c_str(), r.gain, format_fixed(r.peak_after, 2).c_str());
}

}  // namespace

int cmd_loudness(const std::vector<std::string>& argv) {
  const Args a = parse_args(argv, {{"--help", false},
                                   {"--json", false},
                                   {"--weights", true},
                                   {"--match", true},
                                   {"--out", true},
                                   {"--force", false}});
  if (a.has("--help")) {
    std::fputs(kLoudnessHelp, stdout);
    return kExitOk;
  }
  const LoudnessOptions o = parse_loudness(a);
  rapidjson::StringBuffer sb;
  rapidjson::PrettyWriter<rapidjson::StringBuffer> w(sb);
  w.StartObject();
  w.Key("measurement");
  w.String("ITU-R BS.1770-4 integrated loudness");
  w.Key("files");
  w.StartArray();
  for (const std::string& path : a.positional) {
    const FileLoudness r = measure_file(path, o);
    if (o.json)
      write_file_json(w, r, o);
    else
      print_file_text(r, o);  // as each file is measured
  }
  w.EndArray();
  w.EndObject();
  if (o.json) std::printf("%s\n", sb.GetString());
  return kExitOk;
}

namespace {

std::string stem_of(const std::string& path) {
  const size_t slash = path.find_last_of('/');
  std::string name = slash == std::string::npos ? path : path.substr(slash + 1);
  const size_t dot = name.find_last_of('.');
  if (dot != std::string::npos && dot > 0) name = name.substr(0, dot);
  return name;
}

}  // namespace

int cmd_anchors(const std::vector<std::string>& argv) {
  const Args a = parse_args(argv, {{"--help", false}, {"--out", true}, {"--passband", true}, {"--force", false}});
  if (a.has("--help")) {
    std::fputs(kAnchorsHelp, stdout);
    return kExitOk;
  }
  if (a.positional.empty()) throw UsageError("give at least one reference clip REF");
  if (!a.has("--out")) throw UsageError("give the output folder with --out DIR");
  const std::string dir = *a.last("--out");
  std::vector<double> bands;
  for (const std::string& v : a.all("--passband")) bands.push_back(parse_number("--passband", v, 1000, 20000));
  if (bands.empty()) bands = {3500, 7000};
  struct stat st;
  const bool have_dir = stat(dir.c_str(), &st) == 0;
  if (have_dir && !S_ISDIR(st.st_mode)) throw UsageError("--out '" + dir + "' exists and is not a folder");
  // Every output name first, so a clash or an existing file stops the run before anything is written.
  std::vector<std::string> names;
  std::vector<std::pair<std::string, std::string>> inputs;
  for (const std::string& ref : a.positional) inputs.emplace_back("REF", ref);
  for (const std::string& ref : a.positional)
    for (double b : bands) {
      char suffix[32];
      std::snprintf(suffix, sizeof suffix, "-lp%.0f.wav", b);
      const std::string out = dir + "/" + stem_of(ref) + suffix;
      if (std::find(names.begin(), names.end(), out) != names.end())
        throw UsageError("two outputs would both be '" + out + "' (references with the same name, or a repeated "
                         "--passband)");
      refuse_same_file("anchor", out, inputs);
      check_overwrite(out, a.has("--force"));
      names.push_back(out);
    }
  if (!have_dir && mkdir(dir.c_str(), 0777) != 0)
    throw InputError("cannot create folder '" + dir + "': " + std::strerror(errno));
  // Every anchor is held in its temporary file until all are made: a failed run writes none.
  std::vector<std::unique_ptr<OutputFile>> outs;
  std::vector<std::string> lines;
  size_t k = 0;
  for (const std::string& ref : a.positional) {
    const Audio au = read_audio(ref);
    std::vector<float> y(au.samples.size());
    for (double b : bands) {
      const int rc = earshot_anchor(au.samples.data(), y.data(), au.frames, au.channels, double(au.rate), b);
      if (rc == EARSHOT_ERR_RANGE)
        throw InputError("'" + ref + "': a " + format_fixed(b, 0) + " Hz low-pass needs 9/7 of it (" +
                         format_fixed(b * 9 / 7, 0) + " Hz) at or below half the sample rate (" +
                         format_fixed(au.rate / 2.0, 0) + " Hz)");
      if (rc != EARSHOT_OK) throw InputError(status_message(ref, rc));
      outs.emplace_back(new OutputFile(names[k], "audio file"));
      write_float_wav(*outs.back(), au, y);
      char line[128];
      std::snprintf(line, sizeof line, "  (%.0f Hz low-pass, %d taps, %d ch, %d Hz)\n", b,
                    earshot_anchor_taps(double(au.rate), b, nullptr, 0), au.channels, au.rate);
      lines.push_back(names[k] + line);
      ++k;
    }
  }
  for (auto& o : outs) o->commit();
  for (const std::string& l : lines) std::fputs(l.c_str(), stdout);
  return kExitOk;
}

}  // namespace cli
}  // namespace earshot
