// `earshot verify FILE`: every native variant this CPU runs, on the standard
// test signal, with the controls at their defaults, in several block
// partitions. Checks block-size invariance per variant, bit identity of the
// parity variants (scalar, sse4, avx2) and the ESR of avx2fma against scalar
// (design invariants 1 and 2); exit code 0 when all hold, 1 otherwise.
#include <sndfile.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstring>
#include <limits>
#include <stdexcept>
#include <string>
#include <vector>

#include "cli.hpp"  // first: it configures rapidjson
#include "text_out.hpp"

#include <rapidjson/stringbuffer.h>
#include <rapidjson/writer.h>

#include "cpu_variants.hpp"
#include "output_file.hpp"
#include "test_signal.hpp"

namespace earshot {
namespace cli {
namespace {

const char* kHelp =
    "usage: earshot verify FILE [--seconds S] [--rate HZ] [--json] [--write-signal PATH [--force]]\n"
    "\n"
    "Runs every native variant this CPU supports on the standard test signal, with\n"
    "the controls at their defaults, and checks:\n"
    "  block invariance  per variant, blocks of 512, 1, 65536 and an irregular\n"
    "                    partition (1 .. 1500 samples) give bit-identical output\n"
    "  parity            scalar, sse4 and avx2 give bit-identical output (else the\n"
    "                    first differing sample is shown)\n"
    "  avx2fma           ESR against scalar at most -120 dB (it fuses multiply-adds,\n"
    "                    so it is close but not bit-identical)\n"
    "It prints each variant's output hash: FNV-1a 64 over the little-endian bytes of\n"
    "the float32 output samples. Exit code 0 when every check holds, 1 otherwise.\n"
    "\n"
    "Test signal (dsp/cli/test_signal.hpp), at the model rate: a log sine sweep from\n"
    "20 Hz (up to 20480 Hz or 0.45 x rate) over the first 80%, decaying 220 Hz tones\n"
    "struck every 0.5 s and 30 ms white-noise bursts every 250 ms over the first\n"
    "90%, then silence; peak exactly -6 dBFS. Computed with plain arithmetic only, so\n"
    "it is the same on every platform.\n"
    "\n"
    "options:\n"
    "  --seconds S          length of the test signal, 0.1 .. 600 s (default 3)\n"
    "  --rate HZ            run the streams at this host rate (the core resamples;\n"
    "                       default: the model rate, no resampling)\n"
    "  --json               print the results as JSON\n"
    "  --write-signal PATH  also write the test signal as a float32 WAV\n"
    "  --force              replace an existing --write-signal PATH\n"
    MAX_STREAM_HELP
    "  -h, --help           this text\n";

constexpr double kFmaBoundDb = -120;  // design invariant 2

struct Partition {
  std::string name;
  std::vector<int> sizes;  // cycled over the signal
};

struct VariantResult {
  std::string name;
  bool supported = false;
  uint64_t hash = 0;
  bool block_invariant = true;
  std::string partition_failure;  // first partition that differed, with the sample
  unsigned nonfinite = 0;
  std::vector<float> out;
};

struct Difference {
  bool any = false;
  size_t index = 0;
  float a = 0, b = 0;
};

Difference first_difference(const std::vector<float>& a, const std::vector<float>& b) {
  Difference d;
  for (size_t i = 0; i < a.size() && i < b.size(); ++i)
    if (std::memcmp(&a[i], &b[i], 4) != 0) {
      d.any = true;
      d.index = i;
      d.a = a[i];
      d.b = b[i];
      return d;
    }
  return d;
}

std::vector<float> run(const std::vector<unsigned char>& bytes, double rate, const std::string& variant,
                       const std::string& path, const std::vector<float>& x, const std::vector<int>& sizes,
                       unsigned& nonfinite) {
  Stream s(bytes, rate, variant, path);
  std::vector<float> y(x.size());
  size_t off = 0, k = 0;
  while (off < x.size()) {
    const int n = int(std::min<size_t>(size_t(sizes[k % sizes.size()]), x.size() - off));
    if (earshot_process(s.get(), x.data() + off, y.data() + off, n) != n)
      throw std::runtime_error("earshot_process refused a block of " + std::to_string(n) + " samples");
    off += size_t(n);
    ++k;
  }
  nonfinite += earshot_nonfinite_count(s.get());
  return y;
}

std::string sample_text(float v) {
  uint32_t u;
  std::memcpy(&u, &v, 4);
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.9g (0x%08x)", double(v), u);
  return buf;
}

// Through output_file.hpp: a temporary file beside PATH, renamed into place when complete.
void write_signal(const std::string& path, const std::vector<float>& x, double rate) {
  SF_INFO info{};
  info.samplerate = int(rate);
  info.channels = 1;
  info.format = SF_FORMAT_WAV | SF_FORMAT_FLOAT;
  OutputFile out(path);
  SNDFILE* f = out.sound(info);
  const sf_count_t n = sf_writef_float(f, x.data(), sf_count_t(x.size()));
  if (n != sf_count_t(x.size())) throw InputError("cannot write '" + path + "': " + sf_strerror(f));
  out.commit();
}

// The test's partitions: the first is the reference for block invariance.
std::vector<Partition> partitions() {
  std::vector<Partition> parts = {{"512", {512}}, {"1", {1}}, {"65536", {65536}}, {"irregular", {}}};
  uint32_t lcg = 12345;  // Numerical Recipes' 32-bit LCG constants
  for (int i = 0; i < 997; ++i) {
    lcg = lcg * 1664525u + 1013904223u;
    parts[3].sizes.push_back(1 + int((lcg >> 8) % 1500));
  }
  return parts;
}

// One native variant over every partition (skipped when the CPU lacks it).
VariantResult run_variant(const std::string& v, const std::vector<unsigned char>& bytes, double rate,
                          const std::string& path, const std::vector<float>& x, const std::vector<Partition>& parts) {
  VariantResult r;
  r.name = v;
  r.supported = variant_supported(v);
  if (!r.supported) return r;
  r.out = run(bytes, rate, v, path, x, parts[0].sizes, r.nonfinite);
  r.hash = fnv1a64(r.out.data(), r.out.size());
  for (size_t p = 1; p < parts.size() && r.block_invariant; ++p) {
    unsigned nf = 0;
    const std::vector<float> y = run(bytes, rate, v, path, x, parts[p].sizes, nf);
    const Difference d = first_difference(r.out, y);
    if (d.any) {
      r.block_invariant = false;
      r.partition_failure = "blocks of " + parts[p].name + " differ from blocks of 512 at sample " +
                            std::to_string(d.index) + ": " + sample_text(d.b) + " vs " + sample_text(d.a);
    }
  }
  return r;
}

struct Report {
  std::string path, title;
  double rate = 0, seconds = 0;
  size_t samples = 0;
  uint64_t signal_hash = 0;
  std::vector<Partition> parts;
  std::vector<VariantResult> results;
  // Parity among scalar, sse4, avx2 (those this CPU runs), against scalar.
  std::vector<std::string> parity_names;
  bool parity = true;
  std::string parity_failure;
  const VariantResult* parity_bad = nullptr;
  Difference parity_diff;
  // avx2fma against scalar.
  bool fma_run = false, fma_ok = true, fma_identical = false;
  double esr_db = 0;
  bool invariant = true, pass = false;
};

void check_parity(Report& R) {
  const VariantResult* scalar = nullptr;
  for (const auto& r : R.results)
    if (r.name == "scalar") scalar = &r;
  for (const auto& r : R.results) {
    if (!r.supported || (r.name != "scalar" && r.name != "sse4" && r.name != "avx2")) continue;
    R.parity_names.push_back(r.name);
    if (!scalar || &r == scalar || !R.parity) continue;
    const Difference d = first_difference(scalar->out, r.out);
    if (d.any) {
      R.parity = false;
      R.parity_bad = &r;
      R.parity_diff = d;
      R.parity_failure = r.name + " differs from scalar at sample " + std::to_string(d.index) + ": " +
                         sample_text(d.b) + " vs " + sample_text(d.a);
    }
  }
  for (const auto& r : R.results) {
    if (r.name != "avx2fma" || !r.supported || !scalar) continue;
    R.fma_run = true;
    double err = 0, den = 0;
    for (size_t i = 0; i < r.out.size(); ++i) {
      const double e = double(r.out[i]) - double(scalar->out[i]);
      err += e * e;
      den += double(scalar->out[i]) * double(scalar->out[i]);
    }
    R.fma_identical = err == 0;
    if (R.fma_identical)
      R.esr_db = -std::numeric_limits<double>::infinity();
    else
      R.esr_db = den > 0 ? 10 * std::log10(err / den) : std::numeric_limits<double>::infinity();
    R.fma_ok = R.esr_db <= kFmaBoundDb;
  }
  for (const auto& r : R.results)
    if (r.supported && !r.block_invariant) R.invariant = false;
  R.pass = R.invariant && R.parity && R.fma_ok;
}

void write_variants_json(rapidjson::Writer<rapidjson::StringBuffer>& w, const Report& R) {
  w.Key("variants");
  w.StartArray();
  for (const auto& r : R.results) {
    w.StartObject();
    w.Key("variant");
    w.String(r.name);
    w.Key("supported");
    w.Bool(r.supported);
    if (r.supported) {
      w.Key("hash");
      w.String(hex64(r.hash));
      w.Key("block_invariant");
      w.Bool(r.block_invariant);
      if (!r.block_invariant) {
        w.Key("block_failure");
        w.String(r.partition_failure);
      }
      w.Key("nonfinite_blocks");
      w.Uint(r.nonfinite);
    }
    w.EndObject();
  }
  w.EndArray();
}

void write_checks_json(rapidjson::Writer<rapidjson::StringBuffer>& w, const Report& R) {
  w.Key("parity");
  w.StartObject();
  w.Key("variants");
  w.StartArray();
  for (const auto& n : R.parity_names) w.String(n);
  w.EndArray();
  w.Key("identical");
  w.Bool(R.parity);
  w.Key("first_difference");
  if (R.parity_bad) {
    w.StartObject();
    w.Key("variant");
    w.String(R.parity_bad->name);
    w.Key("index");
    w.Uint64(R.parity_diff.index);
    w.Key("scalar");
    w.Double(double(R.parity_diff.a));
    w.Key("value");
    w.Double(double(R.parity_diff.b));
    w.EndObject();
  } else {
    w.Null();
  }
  w.EndObject();
  w.Key("avx2fma");
  if (R.fma_run) {
    w.StartObject();
    w.Key("esr_db");
    if (std::isfinite(R.esr_db))
      w.Double(R.esr_db);
    else
      w.Null();
    w.Key("identical");
    w.Bool(R.fma_identical);
    w.Key("bound_db");
    w.Double(kFmaBoundDb);
    w.Key("ok");
    w.Bool(R.fma_ok);
    w.EndObject();
  } else {
    w.Null();
  }
}

void print_json(const Report& R) {
  rapidjson::StringBuffer sb;
  rapidjson::Writer<rapidjson::StringBuffer> w(sb);
  w.StartObject();
  w.Key("effect");
  w.String(R.path);
  w.Key("title");
  w.String(R.title);
  w.Key("hash");
  w.String("fnv1a64-float32le");
  w.Key("signal");
  w.StartObject();
  w.Key("rate");
  w.Double(R.rate);
  w.Key("seconds");
  w.Double(R.seconds);
  w.Key("samples");
  w.Uint64(R.samples);
  w.Key("hash");
  w.String(hex64(R.signal_hash));
  w.EndObject();
  w.Key("partitions");
  w.StartArray();
  for (const auto& p : R.parts) w.String(p.name);
  w.EndArray();
  write_variants_json(w, R);
  write_checks_json(w, R);
  w.Key("pass");
  w.Bool(R.pass);
  w.EndObject();
  std::printf("%s\n", sb.GetString());
}

void print_text(const Report& R) {
  // The title is the effect file's own text (docs/cli.md, "Untrusted text").
  std::printf("%s (%s)\n", terminal_text(R.title).c_str(), terminal_text(R.path).c_str());
  std::printf("signal   %s s at %.0f Hz (%zu samples): %s; hash %s\n", format_fixed(R.seconds, 2).c_str(), R.rate,
              R.samples, kTestSignalSummary, hex64(R.signal_hash).c_str());
  std::printf("blocks   512, 1, 65536, irregular (1 .. 1500); controls at their defaults\n");
  std::printf("hash     FNV-1a 64 of the float32 output, little-endian bytes\n\n");
  std::printf("%-9s %-18s %-16s %s\n", "variant", "output hash", "block-invariant", "non-finite blocks");
  for (const auto& r : R.results) {
    if (!r.supported) {
      std::printf("%-9s not supported by this CPU (skipped)\n", r.name.c_str());
      continue;
    }
    std::printf("%-9s %-18s %-16s %u\n", r.name.c_str(), hex64(r.hash).c_str(), r.block_invariant ? "yes" : "NO",
                r.nonfinite);
  }
  for (const auto& r : R.results)
    if (r.supported && !r.block_invariant) std::printf("  %s: %s\n", r.name.c_str(), r.partition_failure.c_str());
  std::string plist;
  for (const auto& n : R.parity_names) plist += (plist.empty() ? "" : ", ") + n;
  std::printf("\nparity (%s): %s\n", plist.c_str(),
              R.parity_names.size() < 2 ? (R.parity ? "only one parity variant on this CPU" : "?")
              : R.parity                ? "bit-identical"
                                        : ("DIFFER: " + R.parity_failure).c_str());
  if (R.fma_run) {
    if (R.fma_identical)
      std::printf("avx2fma vs scalar: bit-identical (ESR -inf dB; bound %.0f dB)\n", kFmaBoundDb);
    else
      std::printf("avx2fma vs scalar: ESR %.1f dB (bound %.0f dB)%s\n", R.esr_db, kFmaBoundDb,
                  R.fma_ok ? "" : " EXCEEDED");
  } else {
    std::printf("avx2fma: not supported by this CPU (skipped)\n");
  }
  std::printf("%s\n", R.pass ? "PASS" : "FAIL");
}

}  // namespace

int cmd_verify(const std::vector<std::string>& argv) {
  const Args a = parse_args(argv, {{"--help", false}, MAX_STREAM_OPTION,
                                   {"--seconds", true},
                                   {"--rate", true},
                                   {"--json", false},
                                   {"--write-signal", true},
                                   {"--force", false}});
  apply_stream_limit(a);
  if (a.has("--help")) {
    std::fputs(kHelp, stdout);
    return kExitOk;
  }
  if (a.positional.size() != 1)
    throw UsageError(a.positional.empty() ? "missing the effect FILE"
                                          : "expected one effect FILE, got " + std::to_string(a.positional.size()) +
                                                " arguments");
  Report R;
  R.seconds = a.has("--seconds") ? parse_number("--seconds", *a.last("--seconds"), 0.1, 600) : 3.0;
  R.rate = parse_rate_option(a);
  R.path = a.positional[0];
  const std::string* signal_out = a.last("--write-signal");
  if (signal_out) {
    refuse_same_file("--write-signal", *signal_out, {{"FILE", R.path}});
    check_overwrite(*signal_out, a.has("--force"));
  }
  const std::vector<unsigned char> bytes = read_effect_file(R.path);
  {
    Stream probe(bytes, R.rate != 0 ? R.rate : 48000, "scalar", R.path);
    const rapidjson::Document info = probe.info();
    if (R.rate == 0) R.rate = json_number(info, "model_rate", 48000);
    R.title = json_string(info, "title");
  }
  const std::vector<float> x = test_signal(R.rate, R.seconds);
  if (signal_out) write_signal(*signal_out, x, R.rate);
  R.samples = x.size();
  R.signal_hash = fnv1a64(x.data(), x.size());
  R.parts = partitions();
  for (const std::string& v : native_variants()) R.results.push_back(run_variant(v, bytes, R.rate, R.path, x, R.parts));
  check_parity(R);
  if (a.has("--json"))
    print_json(R);
  else
    print_text(R);
  return R.pass ? kExitOk : kExitCheckFailed;
}

}  // namespace cli
}  // namespace earshot
