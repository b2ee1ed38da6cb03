// MUSHRA anchor filters; the design and its mask are described in anchors.hpp.
#include "anchors.hpp"

#include <cstdint>
#include <memory>
#include <new>

#include "detmath.hpp"
#include "earshot/earshot.h"

namespace earshot {
namespace anchors {
namespace {

constexpr int kMaxChannels = 32;

int check(double rate, double passband_hz) {
  if (!(rate - rate == 0) || !(passband_hz - passband_hz == 0)) return EARSHOT_ERR_NOT_FINITE;
  if (!(rate >= EARSHOT_MIN_RATE && rate <= EARSHOT_MAX_RATE) || double(int64_t(rate)) != rate) return EARSHOT_ERR_RANGE;
  if (!(passband_hz >= kPassbandMinHz && passband_hz <= kPassbandMaxHz)) return EARSHOT_ERR_RANGE;
  if (passband_hz * 9.0 / 7.0 > rate / 2.0) return EARSHOT_ERR_RANGE;  // mask must fit below Nyquist
  return EARSHOT_OK;
}

// Half-length M (N = 2M + 1) from Kaiser's formula.
int half_length(double rate, double passband_hz) {
  const double stop = passband_hz * 8.0 / 7.0;
  const double dw = 2.0 * detmath::kPi * (stop - passband_hz) / rate;
  const double n1 = (kDesignAttenuationDb - 8.0) / (2.285 * dw);  // N − 1
  const double half = n1 / 2.0;
  int m = int(half);
  if (double(m) < half) ++m;  // ceil for positive values
  return m;
}

}  // namespace

int tap_count(double rate, double passband_hz) {
  const int st = check(rate, passband_hz);
  if (st != EARSHOT_OK) return st;
  const int n = 2 * half_length(rate, passband_hz) + 1;
  return n <= kMaxTaps ? n : EARSHOT_ERR_RANGE;
}

int design(double rate, double passband_hz, double* taps, int capacity) {
  const int n = tap_count(rate, passband_hz);
  if (n < 0) return n;
  if (!taps || capacity < n) return EARSHOT_ERR_ARGUMENT;
  const int m = (n - 1) / 2;
  const double stop = passband_hz * 8.0 / 7.0;
  const double fc = 0.5 * (passband_hz + stop) / rate;  // cut-off, cycles per sample
  const double a = kDesignAttenuationDb;
  const double beta = 0.1102 * (a - 8.7);
  const double i0_beta = detmath::bessel_i0_of_square(beta * beta);
  double sum = 0;
  for (int k = 0; k < n; ++k) {
    const int d = k - m;
    // Ideal low-pass 2fc·sinc(2fc·d), sinc(u) = sin(πu)/(πu).
    double h;
    if (d == 0) {
      h = 2.0 * fc;
    } else {
      const double u = 2.0 * fc * double(d);
      h = detmath::sin_pi(u) / (detmath::kPi * double(d));
    }
    const double r = double(d) / double(m);
    h *= detmath::bessel_i0_of_square(beta * beta * (1.0 - r * r)) / i0_beta;
    taps[k] = h;
    sum += h;
  }
  for (int k = 0; k < n; ++k) taps[k] /= sum;
  return n;
}

int lowpass(const float* in, float* out, size_t frames, int channels, double rate, double passband_hz) {
  if (channels < 1 || channels > kMaxChannels) return EARSHOT_ERR_ARGUMENT;
  if (frames > 0 && (!in || !out)) return EARSHOT_ERR_ARGUMENT;
  const int n = tap_count(rate, passband_hz);
  if (n < 0) return n;
  const size_t total = frames * size_t(channels);
  float flag = 0;  // x − x is 0 for finite x, NaN otherwise
  for (size_t i = 0; i < total; ++i) flag += in[i] - in[i];
  if (flag != 0) return EARSHOT_ERR_NOT_FINITE;
  if (frames == 0) return EARSHOT_OK;

  std::unique_ptr<double[]> h(new (std::nothrow) double[size_t(n)]);
  const size_t m = size_t(n - 1) / 2;
  const size_t padded = frames + 2 * m;
  std::unique_ptr<double[]> buf(new (std::nothrow) double[padded]);
  if (!h || !buf) return EARSHOT_ERR_ARGUMENT;
  design(rate, passband_hz, h.get(), n);
  const size_t ch = size_t(channels);
  for (size_t c = 0; c < ch; ++c) {
    // buf[i] = x[i − M], zero outside the clip; out[t] = Σ_k h[k]·x[t + M − k]
    // = Σ_k h[k]·buf[t + k] because h is symmetric.
    for (size_t i = 0; i < m; ++i) buf[i] = 0;
    for (size_t t = 0; t < frames; ++t) buf[m + t] = double(in[t * ch + c]);
    for (size_t i = m + frames; i < padded; ++i) buf[i] = 0;
    for (size_t t = 0; t < frames; ++t) {
      const double* x = buf.get() + t;
      double acc = 0;
      for (int k = 0; k < n; ++k) acc += h[size_t(k)] * x[k];
      out[t * ch + c] = float(acc);
    }
  }
  return EARSHOT_OK;
}

}  // namespace anchors
}  // namespace earshot

extern "C" {

int earshot_anchor_taps(double rate, double passband_hz, double* taps, int capacity) {
  if (!taps) return earshot::anchors::tap_count(rate, passband_hz);
  return earshot::anchors::design(rate, passband_hz, taps, capacity);
}

int earshot_anchor(const float* in, float* out, size_t frames, int channels, double rate, double passband_hz) {
  return earshot::anchors::lowpass(in, out, frames, channels, rate, passband_hz);
}

}  // extern "C"
