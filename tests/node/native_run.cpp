// Native side of the WebAssembly parity tests and of tools/wasm-bench.mjs:
// runs the same command script the JS side runs (tests/node/script.mjs)
// through the C ABI of build/<dir>/libearshot.so, so native and WASM reach the
// core through the same door. Built on demand by tests/node/native.mjs.
//
//   native_run script FILE       run a command script (below), print results
//   native_run errors FILE...    try to load each effect file, print one line each
//   native_run bench FILE RATE VARIANT SECONDS BLOCK REPEATS
//                                time earshot_process, print the best wall time
//   native_run loudness AUDIO.f32 CHANNELS RATE
//                                earshot_loudness (default weights): "status S lkfs L"
//   native_run anchor AUDIO.f32 CHANNELS RATE PASSBAND_HZ OUT.f32
//                                earshot_anchor: "status S", output written on success
//
// Script commands, one per line:
//   create PATH RATE VARIANT [C]  load the effect (VARIANT "-" = default); with C,
//                                 a stream of C channels (earshot_create_channels)
//   input PATH                    raw little-endian float32 input samples
//                                 (C channels: interleaved frames)
//   process N                     the next N input frames, appended to the output
//                                 (C channels: by earshot_process_channels, interleaved)
//   control INDEX VALUE | mix W | gain IN OUT | reset
//   output PATH                   write the output so far as raw float32
// Values are decimal; a float32 printed by JS with enough digits is parsed
// back to the same float. Each setter prints "status LINE CODE".
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <fstream>
#include <iostream>
#include <sstream>
#include <string>
#include <vector>

#include "earshot/earshot.h"

namespace {

std::vector<unsigned char> read_file(const std::string& path) {
  std::ifstream f(path, std::ios::binary);
  if (!f) {
    std::fprintf(stderr, "native_run: cannot read %s\n", path.c_str());
    std::exit(2);
  }
  return std::vector<unsigned char>((std::istreambuf_iterator<char>(f)), std::istreambuf_iterator<char>());
}

earshot_stream* create(const std::vector<unsigned char>& bytes, double rate, const std::string& variant,
                       std::string& error, int channels = -1) {
  char err[1024];
  err[0] = 0;
  const char* v = variant == "-" ? nullptr : variant.c_str();
  earshot_stream* s = channels < 0 ? earshot_create(bytes.data(), bytes.size(), rate, v, err, sizeof err)
                                    : earshot_create_channels(bytes.data(), bytes.size(), rate, v, channels, 0, err, sizeof err);
  error = err;
  return s;
}

int run_script(const std::string& path) {
  std::ifstream f(path);
  if (!f) {
    std::fprintf(stderr, "native_run: cannot read script %s\n", path.c_str());
    return 2;
  }
  earshot_stream* s = nullptr;
  int channels = -1;  // -1: a mono stream through earshot_process
  std::vector<float> in, out;
  std::vector<std::vector<float>> planar_in, planar_out;
  size_t pos = 0;
  std::string line;
  int lineno = 0;
  while (std::getline(f, line)) {
    ++lineno;
    std::istringstream ls(line);
    std::string cmd;
    if (!(ls >> cmd)) continue;
    if (cmd == "create") {
      std::string p, variant;
      double rate;
      ls >> p >> rate >> variant;
      if (!(ls >> channels)) channels = -1;
      std::string error;
      s = create(read_file(p), rate, variant, error, channels);
      if (!s) {
        std::printf("error %s\n", error.c_str());
        return 0;
      }
      continue;
    }
    if (cmd == "input") {
      std::string p;
      ls >> p;
      const auto b = read_file(p);
      in.resize(b.size() / 4);
      std::memcpy(in.data(), b.data(), in.size() * 4);
      continue;
    }
    if (!s) {
      std::fprintf(stderr, "native_run: line %d: '%s' before create\n", lineno, cmd.c_str());
      return 2;
    }
    if (cmd == "process") {
      int n;
      ls >> n;
      const size_t C = size_t(channels < 0 ? 1 : channels);
      if ((pos + size_t(n)) * C > in.size()) {
        std::fprintf(stderr, "native_run: line %d: input exhausted\n", lineno);
        return 2;
      }
      out.resize((pos + size_t(n)) * C);
      if (channels < 0) {
        if (earshot_process(s, in.data() + pos, out.data() + pos, n) != n) {
          std::fprintf(stderr, "native_run: line %d: earshot_process refused %d samples\n", lineno, n);
          return 2;
        }
      } else {
        planar_in.resize(C);
        planar_out.resize(C);
        const float* ins[EARSHOT_MAX_CHANNELS];
        float* outs[EARSHOT_MAX_CHANNELS];
        for (size_t c = 0; c < C; ++c) {
          planar_in[c].resize(size_t(n));
          planar_out[c].resize(size_t(n));
          for (size_t t = 0; t < size_t(n); ++t) planar_in[c][t] = in[(pos + t) * C + c];
          ins[c] = planar_in[c].data();
          outs[c] = planar_out[c].data();
        }
        if (earshot_process_channels(s, ins, outs, n) != n) {
          std::fprintf(stderr, "native_run: line %d: earshot_process_channels refused %d frames\n", lineno, n);
          return 2;
        }
        for (size_t c = 0; c < C; ++c)
          for (size_t t = 0; t < size_t(n); ++t) out[(pos + t) * C + c] = planar_out[c][t];
      }
      pos += size_t(n);
    } else if (cmd == "control") {
      int i;
      std::string v;
      ls >> i >> v;
      std::printf("status %d %d\n", lineno, earshot_set_control(s, i, float(std::strtod(v.c_str(), nullptr))));
    } else if (cmd == "mix") {
      std::string v;
      ls >> v;
      std::printf("status %d %d\n", lineno, earshot_set_mix(s, float(std::strtod(v.c_str(), nullptr))));
    } else if (cmd == "gain") {
      std::string a, b;
      ls >> a >> b;
      std::printf("status %d %d\n", lineno,
                  earshot_set_gain(s, float(std::strtod(a.c_str(), nullptr)), float(std::strtod(b.c_str(), nullptr))));
    } else if (cmd == "reset") {
      earshot_reset(s);
    } else if (cmd == "output") {
      std::string p;
      ls >> p;
      std::ofstream o(p, std::ios::binary);
      o.write(reinterpret_cast<const char*>(out.data()), std::streamsize(out.size() * 4));
    } else {
      std::fprintf(stderr, "native_run: line %d: unknown command '%s'\n", lineno, cmd.c_str());
      return 2;
    }
  }
  if (s) {
    std::printf("variant %s\n", earshot_variant(s));
    std::printf("latency %d\n", earshot_latency(s));
    std::printf("nonfinite %u\n", earshot_nonfinite_count(s));
    std::printf("info %s\n", earshot_info(s));
    earshot_destroy(s);
  }
  return 0;
}

int run_errors(int argc, char** argv) {
  for (int i = 0; i < argc; ++i) {
    std::string error;
    earshot_stream* s = create(read_file(argv[i]), 48000, "-", error);
    if (s) {
      std::printf("ok\n");
      earshot_destroy(s);
    } else {
      std::printf("error %s\n", error.c_str());
    }
  }
  return 0;
}

int run_bench(char** argv) {
  const auto bytes = read_file(argv[0]);
  const double rate = std::atof(argv[1]);
  const std::string variant = argv[2];
  const double seconds = std::atof(argv[3]);
  const int block = std::atoi(argv[4]);
  const int repeats = std::atoi(argv[5]);
  const size_t n = size_t(seconds * rate);
  // The same test signal as tools/wasm-bench.mjs: a 220 Hz sine at −12 dBFS
  // plus a small deterministic hash noise, so no path meets only zeros.
  std::vector<float> in(n), out(n);
  uint32_t h = 12345;
  for (size_t i = 0; i < n; ++i) {
    h = h * 1664525u + 1013904223u;
    const double phase = double(i % 48000) / 48000.0;  // exact period: no libm drift worries
    const double tri = 4 * std::fabs(phase * 220 - std::floor(phase * 220 + 0.5)) - 1;
    in[i] = float(0.25 * tri + 0.01 * (double(h >> 8) / 16777216.0 - 0.5));
  }
  std::string error;
  earshot_stream* s = create(bytes, rate, variant, error);
  if (!s) {
    std::printf("error %s\n", error.c_str());
    return 0;
  }
  double best = 1e30;
  for (int r = 0; r < repeats; ++r) {
    earshot_reset(s);
    const auto t0 = std::chrono::steady_clock::now();
    for (size_t off = 0; off < n; off += size_t(block)) {
      const int k = int(std::min<size_t>(size_t(block), n - off));
      earshot_process(s, in.data() + off, out.data() + off, k);
    }
    const double el = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    if (el < best) best = el;
  }
  double sum = 0;
  for (float v : out) sum += double(v);
  std::printf("variant %s\nseconds %.9f\nchecksum %.9g\n", earshot_variant(s), best, sum);
  earshot_destroy(s);
  return 0;
}

std::vector<float> read_f32(const std::string& path) {
  const auto b = read_file(path);
  std::vector<float> v(b.size() / 4);
  std::memcpy(v.data(), b.data(), v.size() * 4);
  return v;
}

int run_loudness(char** argv) {
  const auto x = read_f32(argv[0]);
  const int ch = std::atoi(argv[1]);
  double lkfs = 0;
  const int st = earshot_loudness(x.data(), x.size() / size_t(ch), ch, std::atof(argv[2]), nullptr, &lkfs);
  std::printf("status %d lkfs %.17g\n", st, lkfs);
  return 0;
}

int run_anchor(char** argv) {
  auto x = read_f32(argv[0]);
  const int ch = std::atoi(argv[1]);
  std::vector<float> y(x.size());
  const int st = earshot_anchor(x.data(), y.data(), x.size() / size_t(ch), ch, std::atof(argv[2]), std::atof(argv[3]));
  std::printf("status %d\n", st);
  if (st == EARSHOT_OK) {
    std::ofstream o(argv[4], std::ios::binary);
    o.write(reinterpret_cast<const char*>(y.data()), std::streamsize(y.size() * 4));
  }
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc >= 3 && std::string(argv[1]) == "script") return run_script(argv[2]);
  if (argc >= 3 && std::string(argv[1]) == "errors") return run_errors(argc - 2, argv + 2);
  if (argc == 8 && std::string(argv[1]) == "bench") return run_bench(argv + 2);
  if (argc == 5 && std::string(argv[1]) == "loudness") return run_loudness(argv + 2);
  if (argc == 7 && std::string(argv[1]) == "anchor") return run_anchor(argv + 2);
  std::fprintf(stderr,
               "usage: native_run script FILE | errors FILE... | bench FILE RATE VARIANT SECONDS BLOCK REPEATS |\n"
               "       loudness AUDIO CHANNELS RATE | anchor AUDIO CHANNELS RATE PASSBAND OUT\n");
  return 2;
}
