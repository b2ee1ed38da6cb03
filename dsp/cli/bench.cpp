// `earshot bench FILE`: speed of each native variant at the model rate, on the
// standard test signal, next to the variant's own peak multiply-add rate
// (measure_peak_madd_rate). One thread. Rounds are interleaved (every variant
// once per round, then the peak kernels) so slow drifts of the machine's speed
// fall on all variants alike; the table shows medians.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <memory>
#include <string>
#include <vector>

#include "cli.hpp"
#include "cpu_variants.hpp"
#include "test_signal.hpp"
#include "text_out.hpp"

#include <rapidjson/stringbuffer.h>
#include <rapidjson/writer.h>

namespace earshot {
namespace cli {
namespace {

const char* kHelp =
    "usage: earshot bench FILE [--seconds S] [--block N] [--variant V] [--rounds R]\n"
    "                          [--channels C] [--json]\n"
    "\n"
    "Measures, for every native variant this CPU runs (or the one given), on one\n"
    "thread, at the model's sample rate, with the controls at their defaults:\n"
    "  real time      seconds of audio processed per second of the thread's CPU time\n"
    "  madd/s         multiply-adds per second achieved (multiply-adds per sample\n"
    "                 x samples per second)\n"
    "  peak madd/s    the variant's in-register multiply-add rate on this machine\n"
    "  share          achieved / peak\n"
    "The input is the standard test signal (see 'earshot verify --help'). Each round\n"
    "runs every variant once, then every peak kernel; the table shows medians.\n"
    "With --channels C (2 .. 8), each round also runs a stream of C channels in\n"
    "lockstep (each channel a shifted copy of the signal) right after the mono one,\n"
    "and the table adds its real time per channel and its ratio to mono.\n"
    "\n"
    "options:\n"
    "  --seconds S   seconds of test signal per variant per round, 0.1 .. 600 (default 3)\n"
    "  --block N     samples per earshot_process call, 1 .. 65536 (default 512)\n"
    "  --variant V   only this variant: scalar, sse4, avx2, avx2fma\n"
    "  --rounds R    rounds, 1 .. 100 (default 3)\n"
    "  --channels C  also measure a C-channel stream, 2 .. 8\n"
    "  --json        print the figures as JSON\n"
    MAX_STREAM_HELP
    "  -h, --help    this text\n";

double median(std::vector<double> v) {
  std::sort(v.begin(), v.end());
  const size_t n = v.size();
  return n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

struct BenchOptions {
  std::string path;
  double seconds = 3.0;
  int block = 512, rounds = 3, channels = 1;
  std::vector<std::string> variants;  // --variant, else every variant this CPU runs
  bool json = false;
};

BenchOptions parse_bench(const Args& a) {
  if (a.positional.size() != 1)
    throw UsageError(a.positional.empty() ? "missing the effect FILE"
                                          : "expected one effect FILE, got " + std::to_string(a.positional.size()) +
                                                " arguments");
  BenchOptions o;
  if (a.has("--seconds")) o.seconds = parse_number("--seconds", *a.last("--seconds"), 0.1, 600);
  if (a.has("--block")) o.block = int(parse_integer("--block", *a.last("--block"), 1, EARSHOT_MAX_BLOCK));
  if (a.has("--rounds")) o.rounds = int(parse_integer("--rounds", *a.last("--rounds"), 1, 100));
  if (a.has("--channels"))
    o.channels = int(parse_integer("--channels", *a.last("--channels"), 2, EARSHOT_MAX_CHANNELS));
  if (const std::string* v = a.last("--variant")) {
    check_variant(*v);
    o.variants.push_back(*v);
  } else {
    o.variants = supported_variants();
  }
  o.path = a.positional[0];
  o.json = a.has("--json");
  return o;
}

struct BenchRow {
  std::string name;
  double rtf, madds, peak, share;
  double channel_rtf = 0;  // --channels: real time per channel of the C-channel stream
};

struct BenchResult {
  std::string title;
  double model_rate = 0, audio_s = 0;
  int64_t macs = 0;
  std::vector<BenchRow> rows;
};

BenchResult measure(const BenchOptions& o, const std::vector<unsigned char>& bytes) {
  BenchResult R;
  {
    Stream probe(bytes, 48000, o.variants[0], o.path);
    R.model_rate = json_number(probe.info(), "model_rate", 48000);
  }
  std::vector<std::unique_ptr<Stream>> streams, multi;
  for (const std::string& v : o.variants) {
    streams.emplace_back(new Stream(bytes, R.model_rate, v, o.path));
    if (o.channels > 1) multi.emplace_back(new Stream(bytes, R.model_rate, v, o.path, o.channels));
  }
  const rapidjson::Document info = streams[0]->info();
  R.macs = int64_t(json_number(info, "macs_per_sample"));
  R.title = json_string(info, "title");

  const std::vector<float> x = test_signal(R.model_rate, o.seconds);
  std::vector<float> y(x.size());
  R.audio_s = double(x.size()) / R.model_rate;
  // The C-channel input: channel c is the signal rotated by c·1009 samples.
  std::vector<std::vector<float>> xc(size_t(o.channels), x), yc(size_t(o.channels), y);
  for (size_t c = 1; c < xc.size(); ++c)
    std::rotate(xc[c].begin(), xc[c].begin() + long((c * 1009) % x.size()), xc[c].end());

  // Warm-up: caches, page faults, CPU clock ramp.
  for (auto& s : streams) {
    s->process(x.data(), y.data(), std::min<size_t>(x.size(), size_t(R.model_rate / 10)), o.block);
    earshot_reset(s->get());
  }
  for (auto& s : multi) {
    s->process_channels(xc, yc, std::min<size_t>(x.size(), size_t(R.model_rate / 10)), o.block);
    earshot_reset(s->get());
  }
  measure_peak_madd_rate(o.variants[0], 0.1);

  const size_t nv = o.variants.size();
  std::vector<std::vector<double>> rtf(nv), peak(nv), crtf(nv);
  for (int r = 0; r < o.rounds; ++r) {
    for (size_t i = 0; i < nv; ++i) {
      earshot_reset(streams[i]->get());
      const double t0 = thread_seconds();
      streams[i]->process(x.data(), y.data(), x.size(), o.block);
      const double dt = thread_seconds() - t0;
      rtf[i].push_back(R.audio_s / std::max(dt, 1e-9));
      if (o.channels > 1) {
        earshot_reset(multi[i]->get());
        const double t1 = thread_seconds();
        multi[i]->process_channels(xc, yc, x.size(), o.block);
        const double dt1 = thread_seconds() - t1;
        crtf[i].push_back(o.channels * R.audio_s / std::max(dt1, 1e-9));
      }
    }
    for (size_t i = 0; i < nv; ++i) peak[i].push_back(measure_peak_madd_rate(o.variants[i], 0.25));
  }
  for (size_t i = 0; i < nv; ++i) {
    BenchRow w{o.variants[i], median(rtf[i]), 0, median(peak[i]), 0};
    if (o.channels > 1) w.channel_rtf = median(crtf[i]);
    w.madds = double(R.macs) * R.model_rate * w.rtf;
    w.share = w.peak > 0 ? w.madds / w.peak : 0;
    R.rows.push_back(w);
  }
  return R;
}

void print_json(const BenchOptions& o, const BenchResult& R) {
  rapidjson::StringBuffer sb;
  rapidjson::Writer<rapidjson::StringBuffer> w(sb);
  w.StartObject();
  w.Key("effect");
  w.String(o.path);
  w.Key("title");
  w.String(R.title);
  w.Key("model_rate");
  w.Double(R.model_rate);
  w.Key("macs_per_sample");
  w.Int64(R.macs);
  w.Key("block");
  w.Int(o.block);
  w.Key("seconds");
  w.Double(R.audio_s);
  w.Key("rounds");
  w.Int(o.rounds);
  w.Key("threads");
  w.Int(1);
  w.Key("variants");
  w.StartArray();
  for (const BenchRow& r : R.rows) {
    w.StartObject();
    w.Key("variant");
    w.String(r.name);
    w.Key("realtime");
    w.Double(r.rtf);
    w.Key("madds_per_second");
    w.Double(r.madds);
    w.Key("peak_madds_per_second");
    w.Double(r.peak);
    w.Key("share_of_peak");
    w.Double(r.share);
    if (o.channels > 1) {
      w.Key("channels");
      w.Int(o.channels);
      w.Key("realtime_per_channel");
      w.Double(r.channel_rtf);
      w.Key("per_channel_vs_mono");
      w.Double(r.channel_rtf / r.rtf);
    }
    w.EndObject();
  }
  w.EndArray();
  w.EndObject();
  std::printf("%s\n", sb.GetString());
}

void print_text(const BenchOptions& o, const BenchResult& R) {
  // The title is the effect file's own text (docs/cli.md, "Untrusted text").
  std::printf("%s (%s)\n", terminal_text(R.title).c_str(), terminal_text(o.path).c_str());
  std::printf("model rate %.0f Hz, %s multiply-adds per sample, block %d, %.2f s of test signal,\n"
              "one thread, median of %d interleaved round%s\n\n",
              R.model_rate, format_count(R.macs).c_str(), o.block, R.audio_s, o.rounds, o.rounds == 1 ? "" : "s");
  std::printf("%-9s %12s %14s %16s %8s", "variant", "real time", "Gmadd/s", "peak Gmadd/s", "share");
  if (o.channels > 1) std::printf(" %14s %9s", (std::to_string(o.channels) + "ch per ch").c_str(), "vs mono");
  std::printf("\n");
  for (const BenchRow& w : R.rows) {
    std::printf("%-9s %11.1fx %14.3f %16.3f %7.1f%%", w.name.c_str(), w.rtf, w.madds / 1e9, w.peak / 1e9,
                100 * w.share);
    if (o.channels > 1) std::printf(" %13.1fx %8.2fx", w.channel_rtf, w.channel_rtf / w.rtf);
    std::printf("\n");
  }
}

}  // namespace

int cmd_bench(const std::vector<std::string>& argv) {
  const Args a = parse_args(argv, {{"--help", false}, MAX_STREAM_OPTION,
                                   {"--seconds", true},
                                   {"--block", true},
                                   {"--variant", true},
                                   {"--rounds", true},
                                   {"--channels", true},
                                   {"--json", false}});
  apply_stream_limit(a);
  if (a.has("--help")) {
    std::fputs(kHelp, stdout);
    return kExitOk;
  }
  const BenchOptions o = parse_bench(a);
  const std::vector<unsigned char> bytes = read_effect_file(o.path);
  const BenchResult R = measure(o, bytes);
  if (o.json)
    print_json(o, R);
  else
    print_text(o, R);
  return kExitOk;
}

}  // namespace cli
}  // namespace earshot
