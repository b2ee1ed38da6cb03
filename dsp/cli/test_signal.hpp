// The standard test signal of `earshot verify` and `earshot bench`, and the
// output hash `verify` prints. Defined once here; docs/cli.md describes it.
//
// At sample rate R (Hz) and length N = round(seconds · R) samples:
//   sweep  logarithmic sine sweep from 20 Hz up by K whole octaves, K the
//          largest ≤ 10 with 20 · 2^K ≤ 0.45 · R, over the first 80 % of the
//          signal, 10 ms linear fades at both ends;
//   tone   a decaying tone (220 Hz plus its third harmonic at half amplitude,
//          envelope e^(−t / 150 ms)), struck every 0.5 s from t = 0, over the
//          first 90 %;
//   noise  uniform white noise bursts of 30 ms every 250 ms from t = 0.1 s,
//          over the first 90 % (64-bit LCG, Knuth's MMIX constants, seed 1);
//   mix    0.5 · sweep + 0.35 · tone + 0.25 · noise, scaled so the peak
//          magnitude is exactly 10^(−6/20) (−6 dBFS); the last 10 % is silence.
//
// Only + − × ÷, floor and exact scaling by powers of two are used (no libm
// sin/exp, whose last bits differ between C libraries), so every platform that
// computes IEEE double arithmetic without contraction gets the same bits.
#pragma once
#include <cmath>
#include <cstdint>
#include <cstring>
#include <vector>

#include "../core/detmath.hpp"

namespace earshot {
namespace cli {

namespace signal_detail {

// sin(2π·p) for a phase p in cycles, p ∈ [0, 1): folded to |x| ≤ π/2, then the
// Taylor series to x^23 (remainder below 1e-20).
inline double sin_cycles(double p) {
  const double pi = 3.14159265358979323846;
  double x = (p > 0.5 ? p - 1.0 : p) * (2.0 * pi);
  if (x > pi / 2) x = pi - x;
  if (x < -pi / 2) x = -pi - x;
  const double x2 = x * x;
  double term = x, sum = x;
  for (int i = 3; i <= 23; i += 2) {
    term = -term * x2 / double((i - 1) * i);
    sum += term;
  }
  return sum;
}

inline double wrap(double p) { return p - std::floor(p); }

}  // namespace signal_detail

// Description for reports (the figures are filled in by the caller).
constexpr const char* kTestSignalSummary =
    "log sweep from 20 Hz, decaying 220 Hz tones every 0.5 s, 30 ms noise bursts every 250 ms, "
    "last 10% silent, peak -6 dBFS";

// Highest sweep frequency at rate R: 20 · 2^K Hz.
inline double test_signal_sweep_top(double rate) {
  double top = 20;
  for (int k = 0; k < 10 && top * 2 <= 0.45 * rate; ++k) top *= 2;
  return top;
}

inline std::vector<float> test_signal(double rate, double seconds) {
  using namespace signal_detail;
  const int64_t n = int64_t(seconds * rate + 0.5);
  std::vector<double> s(size_t(n > 0 ? n : 0), 0.0);
  const int64_t n_sweep = n * 8 / 10, n_active = n * 9 / 10;

  // Sweep: the frequency grows by a constant ratio per sample.
  const double top = test_signal_sweep_top(rate);
  int octaves = 0;
  for (double f = 20; f < top; f *= 2) ++octaves;
  const double ratio = n_sweep > 1 ? detmath::exp(octaves * 0.69314718055994530942 / double(n_sweep - 1)) : 1.0;
  const int64_t fade = int64_t(0.010 * rate + 0.5);
  double inc = 20.0 / rate, phase = 0;
  for (int64_t i = 0; i < n_sweep; ++i) {
    double g = 1;
    if (fade > 0 && i < fade) g = double(i) / double(fade);
    if (fade > 0 && n_sweep - 1 - i < fade) g = double(n_sweep - 1 - i) / double(fade);
    s[size_t(i)] += 0.5 * g * sin_cycles(phase);
    phase = wrap(phase + inc);
    inc *= ratio;
  }

  // Tones: restruck every 0.5 s with phase 0 and envelope 1.
  const int64_t period = int64_t(0.5 * rate + 0.5);
  const double decay = detmath::exp(-1.0 / (0.150 * rate));
  double env = 1, p1 = 0, p3 = 0;
  for (int64_t i = 0; i < n_active; ++i) {
    if (period > 0 && i % period == 0) env = 1, p1 = 0, p3 = 0;
    s[size_t(i)] += 0.35 * env * (sin_cycles(p1) + 0.5 * sin_cycles(p3));
    p1 = wrap(p1 + 220.0 / rate);
    p3 = wrap(p3 + 660.0 / rate);
    env *= decay;
  }

  // Noise bursts.
  const int64_t burst = int64_t(0.030 * rate + 0.5), every = int64_t(0.250 * rate + 0.5),
                first = int64_t(0.100 * rate + 0.5);
  uint64_t state = 1;
  for (int64_t i = first; i < n_active; ++i) {
    if (every <= 0 || (i - first) % every >= burst) continue;
    state = state * 6364136223846793005ull + 1442695040888963407ull;
    const double u = double(state >> 11) * (1.0 / 9007199254740992.0);  // [0, 1), 53 bits
    s[size_t(i)] += 0.25 * (2.0 * u - 1.0);
  }

  double peak = 0;
  for (double v : s) peak = std::fmax(peak, std::fabs(v));
  const double scale = peak > 0 ? detmath::exp(-6.0 / 20.0 * 2.30258509299404568402) / peak : 0.0;
  std::vector<float> out(s.size());
  for (size_t i = 0; i < s.size(); ++i) out[i] = float(s[i] * scale);
  return out;
}

// FNV-1a, 64-bit (offset basis 14695981039346656037, prime 1099511628211),
// over the little-endian bytes of each float32 sample in order.
inline uint64_t fnv1a64(const float* x, size_t n, uint64_t h = 14695981039346656037ull) {
  for (size_t i = 0; i < n; ++i) {
    uint32_t u;
    std::memcpy(&u, &x[i], 4);
    for (int b = 0; b < 4; ++b) {
      h ^= (u >> (8 * b)) & 0xffu;
      h *= 1099511628211ull;
    }
  }
  return h;
}

}  // namespace cli
}  // namespace earshot
