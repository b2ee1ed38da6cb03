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

namespace earshot {
namespace cli {
namespace {

const char* kHelp =
    "usage: earshot bench FILE [--seconds S] [--block N] [--variant V] [--rounds R] [--json]\n"
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
    "\n"
    "options:\n"
    "  --seconds S   seconds of test signal per variant per round, 0.1 .. 600 (default 3)\n"
    "  --block N     samples per earshot_process call, 1 .. 65536 (default 512)\n"
    "  --variant V   only this variant: scalar, sse4, avx2, avx2fma\n"
    "  --rounds R    rounds, 1 .. 100 (default 3)\n"
    "  --json        print the figures as JSON\n"
    MAX_STREAM_HELP
    "  -h, --help    this text\n";

double median(std::vector<double> v) {
  std::sort(v.begin(), v.end());
  const size_t n = v.size();
  return n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

std::string json_escape(const std::string& s) {
  std::string o;
  for (char c : s) {
    if (c == '"' || c == '\\') {
      o += '\\';
      o += c;
    } else if ((unsigned char)c < 0x20) {
      char buf[8];
      std::snprintf(buf, sizeof buf, "\\u%04x", c);
      o += buf;
    } else {
      o += c;
    }
  }
  return o;
}

}  // namespace

int cmd_bench(const std::vector<std::string>& argv) {
  const Args a = parse_args(argv, {{"--help", false}, MAX_STREAM_OPTION,
                                   {"--seconds", true},
                                   {"--block", true},
                                   {"--variant", true},
                                   {"--rounds", true},
                                   {"--json", false}});
  apply_stream_limit(a);
  if (a.has("--help")) {
    std::fputs(kHelp, stdout);
    return kExitOk;
  }
  if (a.positional.size() != 1)
    throw UsageError(a.positional.empty() ? "missing the effect FILE"
                                          : "expected one effect FILE, got " + std::to_string(a.positional.size()) +
                                                " arguments");
  const double seconds = a.has("--seconds") ? parse_number("--seconds", *a.last("--seconds"), 0.1, 600) : 3.0;
  const int block = a.has("--block") ? int(parse_integer("--block", *a.last("--block"), 1, EARSHOT_MAX_BLOCK)) : 512;
  const int rounds = a.has("--rounds") ? int(parse_integer("--rounds", *a.last("--rounds"), 1, 100)) : 3;
  std::vector<std::string> variants;
  if (const std::string* v = a.last("--variant")) {
    check_variant(*v);
    variants.push_back(*v);
  } else {
    variants = supported_variants();
  }
  const std::string path = a.positional[0];
  const std::vector<unsigned char> bytes = read_effect_file(path);

  double model_rate;
  {
    Stream probe(bytes, 48000, variants[0], path);
    model_rate = json_number(probe.info(), "model_rate", 48000);
  }
  std::vector<std::unique_ptr<Stream>> streams;
  for (const std::string& v : variants) streams.emplace_back(new Stream(bytes, model_rate, v, path));
  const rapidjson::Document info = streams[0]->info();
  const int64_t macs = int64_t(json_number(info, "macs_per_sample"));
  const std::string title = json_string(info, "title");

  const std::vector<float> x = test_signal(model_rate, seconds);
  std::vector<float> y(x.size());
  const double audio_s = double(x.size()) / model_rate;

  // Warm-up: caches, page faults, CPU clock ramp.
  for (auto& s : streams) {
    s->process(x.data(), y.data(), std::min<size_t>(x.size(), size_t(model_rate / 10)), block);
    earshot_reset(s->get());
  }
  measure_peak_madd_rate(variants[0], 0.1);

  std::vector<std::vector<double>> rtf(variants.size()), peak(variants.size());
  for (int r = 0; r < rounds; ++r) {
    for (size_t i = 0; i < variants.size(); ++i) {
      earshot_reset(streams[i]->get());
      const double t0 = thread_seconds();
      streams[i]->process(x.data(), y.data(), x.size(), block);
      const double dt = thread_seconds() - t0;
      rtf[i].push_back(audio_s / std::max(dt, 1e-9));
    }
    for (size_t i = 0; i < variants.size(); ++i) peak[i].push_back(measure_peak_madd_rate(variants[i], 0.25));
  }

  struct Row {
    std::string name;
    double rtf, madds, peak, share;
  };
  std::vector<Row> rows;
  for (size_t i = 0; i < variants.size(); ++i) {
    Row w{variants[i], median(rtf[i]), 0, median(peak[i]), 0};
    w.madds = double(macs) * model_rate * w.rtf;
    w.share = w.peak > 0 ? w.madds / w.peak : 0;
    rows.push_back(w);
  }

  if (a.has("--json")) {
    std::printf("{\"effect\":\"%s\",\"title\":\"%s\",\"model_rate\":%.17g,\"macs_per_sample\":%lld,"
                "\"block\":%d,\"seconds\":%.17g,\"rounds\":%d,\"threads\":1,\"variants\":[",
                json_escape(path).c_str(), json_escape(title).c_str(), model_rate, (long long)macs, block, audio_s,
                rounds);
    for (size_t i = 0; i < rows.size(); ++i)
      std::printf("%s{\"variant\":\"%s\",\"realtime\":%.6g,\"madds_per_second\":%.6g,"
                  "\"peak_madds_per_second\":%.6g,\"share_of_peak\":%.6g}",
                  i ? "," : "", rows[i].name.c_str(), rows[i].rtf, rows[i].madds, rows[i].peak, rows[i].share);
    std::printf("]}\n");
    return kExitOk;
  }

  std::printf("%s (%s)\n", title.c_str(), path.c_str());
  std::printf("model rate %.0f Hz, %s multiply-adds per sample, block %d, %.2f s of test signal,\n"
              "one thread, median of %d interleaved round%s\n\n",
              model_rate, format_count(macs).c_str(), block, audio_s, rounds, rounds == 1 ? "" : "s");
  std::printf("%-9s %12s %14s %16s %8s\n", "variant", "real time", "Gmadd/s", "peak Gmadd/s", "share");
  for (const Row& w : rows)
    std::printf("%-9s %11.1fx %14.3f %16.3f %7.1f%%\n", w.name.c_str(), w.rtf, w.madds / 1e9, w.peak / 1e9,
                100 * w.share);
  return kExitOk;
}

}  // namespace cli
}  // namespace earshot
