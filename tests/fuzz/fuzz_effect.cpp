// libFuzzer harness: the effect loader and the stream, through the C ABI only
// (dsp/include/earshot/earshot.h), as a page or host reaches them with an
// uploaded file.
//
// Input layout: byte 0 picks the host rate, byte 1 the variant, bytes 2..9
// drive the control/mix/gain/reset calls and the block sizes; the rest is the
// effect file. Each execution processes at most kMaxSamples samples so the
// fuzzer keeps thousands of executions per second. Byte 0 below 240 means
// 48 kHz, the rate of most models: designing a resampler takes milliseconds (13 ms for
// 44.1 kHz, 31 ms for 22.05 kHz on the development machine) against
// microseconds for loading and processing, and depends on the rate pair only,
// so the other rates are taken for one input in sixteen.
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <cstring>

#include "earshot/earshot.h"

namespace {

constexpr size_t kHeader = 10;
constexpr int kMaxSamples = 512;  // per execution, all blocks together

// Host rates in Hz other than 48 kHz: both directions of the resampler, a
// near-unity ratio it refuses (47999/48000), and the range's edges.
constexpr double kOtherRates[] = {44100.0, 96000.0, 22050.0, 8000.0, 192000.0, 47999.0, 32000.0, 384000.0};
const char* const kVariants[] = {nullptr, "scalar", "sse4", "avx2", "avx2fma", "bogus"};

float value_of(uint8_t b) {
  switch (b & 7) {
    case 0: return NAN;
    case 1: return INFINITY;
    case 2: return -1e30f;
    default: return (float(b) - 128.0f) / 32.0f;  // -4 .. +4
  }
}

struct Signal {
  float x[kMaxSamples];
  Signal() {
    for (int i = 0; i < kMaxSamples; ++i) x[i] = float(std::sin(0.001 * i * i)) * 0.5f;  // a chirp
    x[0] = 1.0f;    // an impulse
    x[100] = 8.0f;  // far over full scale
  }
};

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  if (size < kHeader) return 0;
  const uint8_t* h = data;
  const double rate = h[0] < 240 ? 48000.0 : kOtherRates[h[0] % (sizeof kOtherRates / sizeof kOtherRates[0])];
  const char* variant = kVariants[h[1] % (sizeof kVariants / sizeof kVariants[0])];
  char error[256];
  error[0] = '\0';
  earshot_stream* s = earshot_create(data + kHeader, size - kHeader, rate, variant, error, sizeof error);
  if (!s) {
    if (error[0] == '\0') __builtin_trap();  // every rejection names its fault
    return 0;
  }
  (void)earshot_info(s);
  (void)earshot_variant(s);
  (void)earshot_latency(s);
  const int controls = earshot_control_count(s);
  (void)earshot_control_index(s, "drive");

  static const Signal in;
  static float out[kMaxSamples];
  int done = 0;
  for (int step = 0; step < 8 && done < kMaxSamples; ++step) {
    const uint8_t b = h[2 + step];
    switch (b >> 5) {
      case 0:
        // index == controls is one past the end: must be refused, not written.
        earshot_set_control(s, b % (controls + 1), value_of(h[2 + (step + 1) % 8]));
        (void)earshot_get_control(s, b % (controls + 1));
        break;
      case 1: earshot_set_mix(s, value_of(b)); break;
      case 2: earshot_set_gain(s, value_of(b) * 10.0f, value_of(h[2 + (step + 3) % 8]) * 10.0f); break;
      case 3: earshot_reset(s); break;
      default: break;
    }
    static const int kBlocks[] = {1, 3, 17, 64, 128, 129, 500, 1024};
    int n = kBlocks[b & 7];
    if (n > kMaxSamples - done) n = kMaxSamples - done;
    const int got = earshot_process(s, in.x + done, out + done, n);
    if (got != n) __builtin_trap();  // a valid block must be processed
    done += n;
  }
  (void)earshot_nonfinite_count(s);
  earshot_destroy(s);
  return 0;
}
