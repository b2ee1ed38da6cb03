// earshot-resample-tool: runs the core's streaming resampler over raw audio,
// for tests/python/test_resampler.py (comparison with SciPy).
//
//   earshot-resample-tool [--block N] FROM TO < in.f32 > out.f32
//       reads little-endian float32 mono from stdin, writes the resampled
//       float32 to stdout, feeding the resampler N samples at a time
//       (default 4096).
//   earshot-resample-tool --taps FROM TO > taps.f32
//       writes the prototype FIR (float32, at L·FROM) and prints
//       "L=<up> M=<down> delay=<input samples>" on stderr.
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <string>
#include <vector>

#include "resampler.hpp"

namespace {

bool host_is_little_endian() {
  const std::uint32_t one = 1;
  unsigned char b[4];
  std::memcpy(b, &one, 4);
  return b[0] == 1;
}

void swap_bytes(float* v, size_t n) {
  for (size_t i = 0; i < n; ++i) {
    unsigned char b[4];
    std::memcpy(b, &v[i], 4);
    const unsigned char s[4] = {b[3], b[2], b[1], b[0]};
    std::memcpy(&v[i], s, 4);
  }
}

bool parse_int(const char* text, int& value) {
  char* end = nullptr;
  const long v = std::strtol(text, &end, 10);
  if (end == text || *end != '\0' || v < INT32_MIN || v > INT32_MAX) return false;
  value = static_cast<int>(v);
  return true;
}

int usage(const char* why) {
  std::fprintf(stderr,
               "earshot-resample-tool: %s\n"
               "usage: earshot-resample-tool [--block N] FROM TO  < in.f32 > out.f32\n"
               "       earshot-resample-tool --taps FROM TO > taps.f32\n",
               why);
  return 2;
}

}  // namespace

int main(int argc, char** argv) {
  bool taps = false;
  int block = 4096;
  std::vector<const char*> rates;
  for (int i = 1; i < argc; ++i) {
    if (std::strcmp(argv[i], "--taps") == 0) {
      taps = true;
    } else if (std::strcmp(argv[i], "--block") == 0) {
      if (i + 1 >= argc || !parse_int(argv[i + 1], block) || block < 1 || block > 1 << 20)
        return usage("--block needs a whole number 1 .. 1048576");
      ++i;
    } else {
      rates.push_back(argv[i]);
    }
  }
  if (rates.size() != 2) return usage("expected two rates, FROM and TO");
  int from = 0, to = 0;
  if (!parse_int(rates[0], from)) return usage((std::string("FROM is not a whole number: ") + rates[0]).c_str());
  if (!parse_int(rates[1], to)) return usage((std::string("TO is not a whole number: ") + rates[1]).c_str());

  earshot::Resampler rs;
  std::string error;
  if (!rs.init(from, to, error)) {
    std::fprintf(stderr, "earshot-resample-tool: %s\n", error.c_str());
    return 1;
  }
  const bool swap = !host_is_little_endian();

  if (taps) {
    std::vector<float> h = rs.prototype();
    std::fprintf(stderr, "L=%d M=%d delay=%.17g\n", rs.up(), rs.down(), rs.delay_in_input_samples());
    if (swap) swap_bytes(h.data(), h.size());
    if (std::fwrite(h.data(), sizeof(float), h.size(), stdout) != h.size()) {
      std::fprintf(stderr, "earshot-resample-tool: could not write the taps to stdout\n");
      return 1;
    }
    return 0;
  }

  // Whole input first, so a length that is not a whole number of float32
  // samples is reported instead of silently dropped.
  std::vector<unsigned char> bytes;
  unsigned char chunk[65536];
  for (;;) {
    const size_t got = std::fread(chunk, 1, sizeof chunk, stdin);
    bytes.insert(bytes.end(), chunk, chunk + got);
    if (got < sizeof chunk) break;
  }
  if (std::ferror(stdin)) {
    std::fprintf(stderr, "earshot-resample-tool: could not read stdin\n");
    return 1;
  }
  if (bytes.size() % 4 != 0) {
    std::fprintf(stderr, "earshot-resample-tool: stdin holds %zu bytes, not a whole number of float32 samples\n",
                 bytes.size());
    return 1;
  }
  std::vector<float> in(bytes.size() / 4);
  if (!in.empty()) std::memcpy(in.data(), bytes.data(), bytes.size());
  if (swap) swap_bytes(in.data(), in.size());

  std::vector<float> out(static_cast<size_t>(rs.max_output(block)));
  for (size_t at = 0; at < in.size(); at += static_cast<size_t>(block)) {
    const size_t n = in.size() - at < static_cast<size_t>(block) ? in.size() - at : static_cast<size_t>(block);
    const int made = rs.process(in.data() + at, static_cast<int>(n), out.data());
    if (swap) swap_bytes(out.data(), static_cast<size_t>(made));
    if (std::fwrite(out.data(), sizeof(float), static_cast<size_t>(made), stdout) != static_cast<size_t>(made)) {
      std::fprintf(stderr, "earshot-resample-tool: could not write to stdout\n");
      return 1;
    }
  }
  return 0;
}
