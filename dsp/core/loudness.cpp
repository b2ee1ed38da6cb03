// Integrated loudness per ITU-R BS.1770-4; see loudness.hpp for the contract
// and docs/listening.md for the measurement as a user sees it.
//
// Per channel i the signal goes through the K-weighting (two biquads, double
// precision, zero initial state). The clip is cut into steps of 100 ms; each
// gating block j is four consecutive steps (400 ms, 75 % overlap), and
//   z_j = Σ_i G_i · (Σ_{t in block j} y_i[t]²) / block_length
//   l_j = −0.691 + 10·log10(z_j)
// Gating (BS.1770-4 §2.8, eq. 5–7):
//   J_a = { j : l_j > −70 }                 absolute gate
//   Γ_r = −0.691 + 10·log10(mean_{J_a} z_j) − 10
//   J_r = { j in J_a : l_j > Γ_r }          relative gate
//   L_K = −0.691 + 10·log10(mean_{J_r} z_j)
// Both gates are compared in the mean-square domain, which is the same test
// without a logarithm per block: l_j > −70 ⇔ z_j > 10^(−6.9309), and
// l_j > Γ_r ⇔ z_j > mean_{J_a} z_j / 10. The only logarithm is the last one.
//
// No allocation: the blocks are produced twice by a scanner with a ring of four
// step sums (once for the absolute-gate mean, once for the relative gate)
// rather than stored, so there is no failure mode for long clips.
#include "loudness.hpp"

#include <cstdint>
#include <cstring>
#include <limits>

#include "detmath.hpp"
#include "earshot/earshot.h"

namespace earshot {
namespace loudness {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// ln 2 split so that k·kLn2Hi is exact for |k| < 2^11 (kLn2Hi has 32 low zero
// bits) and kLn2Hi + kLn2Lo = ln 2 to about 1e-26. These are fdlibm's ln2_hi
// and ln2_lo, recalled from memory and checked in tests/native/loudness_test.cpp.
constexpr double kLn2Hi = 6.93147180369123816490e-01;
constexpr double kLn2Lo = 1.90821492927058770002e-10;
constexpr double kInvLn10 = 0.43429448190325182765;  // 1/ln 10, rounded to double
constexpr double kLn10Over20 = 0.11512925464970228420;  // ln(10)/20

uint64_t bits_of(double x) {
  uint64_t b;
  std::memcpy(&b, &x, sizeof b);
  return b;
}
double double_of(uint64_t b) {
  double x;
  std::memcpy(&x, &b, sizeof x);
  return x;
}

// 2^k for −1022 <= k <= 1023, exactly.
double pow2(int k) { return double_of(uint64_t(k + 1023) << 52); }

// Analog-prototype parameters of the two stages, solved from the 48 kHz
// coefficients of BS.1770-4 Table 1 and Table 2. Source: "ITU-R BS.1770-1
// filter specifications (unofficial)", 15 January 2011
// (scribd.com/document/49991813), which gives for the pre-filter
// Vh = 1.584864701130855 (≈ +4 dB), Vb = 1.258720930232562, Vl = 1,
// Q = 0.7071752369554196, fc = 1681.974450955533 Hz, and for the RLB filter
// (Vh = 1, Vb = Vl = 0) Q = 0.5003270373238773, fc = 38.13547087602444 Hz,
// with Ω = tan(π·fc/fs). tests/native/loudness_test.cpp checks that these
// reproduce the published 48 kHz coefficients.
constexpr double kShelfVh = 1.584864701130855;
constexpr double kShelfVb = 1.258720930232562;
constexpr double kShelfQ = 0.7071752369554196;
constexpr double kShelfFc = 1681.974450955533;
constexpr double kHighpassQ = 0.5003270373238773;
constexpr double kHighpassFc = 38.13547087602444;

// tan(π·r) for 0 < r < 1/2, as sin(πr)/cos(πr) with cos(πr) = sin(π(1/2 − r)).
double tan_pi(double r) { return detmath::sin_pi(r) / detmath::sin_pi(0.5 - r); }

// Transposed direct form II, double state.
struct Section {
  Biquad c;
  double s1 = 0, s2 = 0;
  double run(double x) {
    const double y = c.b0 * x + s1;
    s1 = c.b1 * x - c.a1 * y + s2;
    s2 = c.b2 * x - c.a2 * y;
    return y;
  }
};

// Produces the gating blocks' mean squares z_j in order, one per next() call.
class BlockScanner {
 public:
  BlockScanner(const float* x, size_t frames, int channels, double rate, const double* weights)
      : x_(x), channels_(channels), geo_(blocks_for(rate, frames)) {
    const KWeighting k = k_weighting(rate);
    for (int c = 0; c < channels; ++c) {
      shelf_[c].c = k.shelf;
      highpass_[c].c = k.highpass;
      weight_[c] = weights[c];
    }
  }

  size_t count() const { return geo_.count; }

  // z of the next block; call exactly count() times.
  double next() {
    // Block j covers steps j .. j+3; the first call fills steps 0..3.
    while (steps_done_ < next_block_ + 4) {
      ring_[steps_done_ % 4] = step_sum();
      ++steps_done_;
    }
    const size_t j = next_block_++;
    const double sum = (ring_[j % 4] + ring_[(j + 1) % 4]) + (ring_[(j + 2) % 4] + ring_[(j + 3) % 4]);
    return sum / double(geo_.length);
  }

 private:
  // Σ_i G_i Σ_t y_i[t]² over the next step of frames.
  double step_sum() {
    double acc[kMaxChannels] = {};
    const float* p = x_ + pos_ * size_t(channels_);
    for (size_t t = 0; t < geo_.step; ++t) {
      for (int c = 0; c < channels_; ++c) {
        const double y = highpass_[c].run(shelf_[c].run(double(*p++)));
        acc[c] += y * y;
      }
    }
    pos_ += geo_.step;
    double s = 0;
    for (int c = 0; c < channels_; ++c) s += weight_[c] * acc[c];
    return s;
  }

  const float* x_;
  int channels_;
  Blocks geo_;
  Section shelf_[kMaxChannels], highpass_[kMaxChannels];
  double weight_[kMaxChannels] = {};
  double ring_[4] = {};   // step sums, indexed by step number mod 4
  size_t pos_ = 0;        // frames consumed
  size_t steps_done_ = 0;
  size_t next_block_ = 0;
};

bool whole_rate(double rate) {
  return rate >= kRateMin && rate <= kRateMax && double(int64_t(rate)) == rate;
}

// Checks every argument and sample; fills w with the channel weights.
int check(const float* x, size_t frames, int channels, double rate, const double* weights, double* w) {
  if (channels < 1 || channels > kMaxChannels) return EARSHOT_ERR_ARGUMENT;
  if (frames > 0 && !x) return EARSHOT_ERR_ARGUMENT;
  if (!(rate - rate == 0)) return EARSHOT_ERR_NOT_FINITE;
  if (!whole_rate(rate)) return EARSHOT_ERR_RANGE;
  for (int c = 0; c < channels; ++c) {
    if (weights) {
      if (!(weights[c] - weights[c] == 0)) return EARSHOT_ERR_NOT_FINITE;
      if (!(weights[c] >= 0 && weights[c] <= 10)) return EARSHOT_ERR_RANGE;
      w[c] = weights[c];
    } else {
      w[c] = default_weight(channels, c);
      if (w[c] < 0) return EARSHOT_ERR_ARGUMENT;  // no default layout for this count
    }
  }
  // x − x is 0 for finite x and NaN otherwise; the flags sum exactly.
  float flag = 0;
  const size_t n = frames * size_t(channels);
  for (size_t i = 0; i < n; ++i) flag += x[i] - x[i];
  if (flag != 0) return EARSHOT_ERR_NOT_FINITE;
  return EARSHOT_OK;
}

}  // namespace

KWeighting k_weighting(double rate) {
  KWeighting k;
  {
    const double K = tan_pi(kShelfFc / rate);
    const double KK = K * K, KQ = K / kShelfQ;
    const double a0 = 1.0 + KQ + KK;
    k.shelf.b0 = (kShelfVh + kShelfVb * KQ + KK) / a0;
    k.shelf.b1 = 2.0 * (KK - kShelfVh) / a0;
    k.shelf.b2 = (kShelfVh - kShelfVb * KQ + KK) / a0;
    k.shelf.a1 = 2.0 * (KK - 1.0) / a0;
    k.shelf.a2 = (1.0 - KQ + KK) / a0;
  }
  {
    // The published RLB numerator is exactly 1, −2, 1 (BS.1770-4 Table 2), not
    // normalised to unit gain at high frequencies; we keep that form at every
    // rate (common practice, no source) and derive only the poles.
    const double K = tan_pi(kHighpassFc / rate);
    const double KK = K * K, KQ = K / kHighpassQ;
    const double a0 = 1.0 + KQ + KK;
    k.highpass.b0 = 1.0;
    k.highpass.b1 = -2.0;
    k.highpass.b2 = 1.0;
    k.highpass.a1 = 2.0 * (KK - 1.0) / a0;
    k.highpass.a2 = (1.0 - KQ + KK) / a0;
  }
  return k;
}

double log10_det(double x) {
  if (x != x || x < 0) return kNaN;
  if (x == 0) return -kInf;
  if (x == kInf) return kInf;
  int e = 0;
  if (x < 2.2250738585072014e-308) {  // subnormal: scale into the normal range, exactly
    x *= 18014398509481984.0;          // 2^54
    e = -54;
  }
  const uint64_t b = bits_of(x);
  e += int((b >> 52) & 0x7ff) - 1023;
  double m = double_of((b & 0x000fffffffffffffull) | (uint64_t(1023) << 52));  // [1, 2)
  if (m > 1.4142135623730951) {  // keep m in [√½, √2] so |z| <= 0.1716
    m *= 0.5;
    ++e;
  }
  // ln m = 2·atanh(z), z = (m − 1)/(m + 1) = f/(2 + f); m − 1 is exact (Sterbenz).
  const double f = m - 1.0;
  const double z = f / (2.0 + f);
  const double s = z * z;  // <= 0.02944
  // 1 + s/3 + s²/5 + … through s^13 (s^14/29 < 1e-22).
  double p = 1.0 / 29.0;
  for (int k = 13; k >= 1; --k) p = 1.0 / double(2 * k + 1) + s * p;
  p = p * s;  // s/3 + s²/5 + …
  const double ln_m = 2.0 * z + 2.0 * z * p;
  const double ed = double(e);
  const double ln_x = (ed * kLn2Hi + ln_m) + ed * kLn2Lo;
  return ln_x * kInvLn10;
}

double db_to_gain_det(double db) {
  if (!(db >= -600 && db <= 600)) return kNaN;
  const double y = db * kLn10Over20;  // |y| <= 69.1
  const double kd = y * 1.4426950408889634;  // / ln 2
  const int k = kd >= 0 ? int(kd + 0.5) : -int(0.5 - kd);
  const double r = (y - double(k) * kLn2Hi) - double(k) * kLn2Lo;  // |r| <= 0.35
  double term = 1.0, sum = 1.0;
  for (int i = 1; i <= 22; ++i) {  // r^23/23! < 1e-31
    term = term * r / double(i);
    sum += term;
  }
  return sum * pow2(k);
}

Blocks blocks_for(double rate, size_t frames) {
  Blocks b;
  b.step = size_t(rate / 10.0 + 0.5);
  b.length = 4 * b.step;
  b.count = frames >= b.length ? (frames - b.length) / b.step + 1 : 0;
  return b;
}

double default_weight(int channels, int index) {
  if (index < 0 || index >= channels) return -1;
  switch (channels) {
    case 1:
    case 2:
    case 3: return 1.0;
    case 4: return index < 2 ? 1.0 : 1.41;
    case 5: return index < 3 ? 1.0 : 1.41;
    case 6: return index < 3 ? 1.0 : index == 3 ? 0.0 : 1.41;
    default: return -1;
  }
}

int block_powers(const float* x, size_t frames, int channels, double rate, const double* weights, double* out) {
  double w[kMaxChannels];
  const int st = check(x, frames, channels, rate, weights, w);
  if (st != EARSHOT_OK) return st;
  BlockScanner scan(x, frames, channels, rate, w);
  if (scan.count() > 0 && !out) return EARSHOT_ERR_ARGUMENT;
  for (size_t j = 0; j < scan.count(); ++j) out[j] = scan.next();
  return EARSHOT_OK;
}

int integrated(const float* x, size_t frames, int channels, double rate, const double* weights, double* lkfs) {
  if (!lkfs) return EARSHOT_ERR_ARGUMENT;
  double w[kMaxChannels];
  const int st = check(x, frames, channels, rate, weights, w);
  if (st != EARSHOT_OK) return st;

  double sum_a = 0;
  size_t n_a = 0;
  {
    BlockScanner scan(x, frames, channels, rate, w);
    for (size_t j = 0; j < scan.count(); ++j) {
      const double z = scan.next();
      if (z > kAbsoluteGatePower) {
        sum_a += z;
        ++n_a;
      }
    }
  }
  if (n_a == 0) {
    *lkfs = -kInf;
    return EARSHOT_OK;
  }
  const double relative_gate = (sum_a / double(n_a)) / 10.0;  // Γ_r − (−0.691), as a power
  double sum_r = 0;
  size_t n_r = 0;
  {
    BlockScanner scan(x, frames, channels, rate, w);
    for (size_t j = 0; j < scan.count(); ++j) {
      const double z = scan.next();
      if (z > kAbsoluteGatePower && z > relative_gate) {
        sum_r += z;
        ++n_r;
      }
    }
  }
  // n_r >= 1: the largest z_j is at least the J_a mean, which exceeds a tenth of it.
  *lkfs = -0.691 + 10.0 * log10_det(sum_r / double(n_r));
  return EARSHOT_OK;
}

}  // namespace loudness
}  // namespace earshot

using namespace earshot;

extern "C" {

int earshot_loudness(const float* interleaved, size_t frames, int channels, double rate, const double* weights,
                     double* lkfs) {
  return loudness::integrated(interleaved, frames, channels, rate, weights, lkfs);
}

double earshot_loudness_lkfs(const float* interleaved, size_t frames, int channels, double rate) {
  double v = 0;
  if (loudness::integrated(interleaved, frames, channels, rate, nullptr, &v) != EARSHOT_OK)
    return std::numeric_limits<double>::quiet_NaN();
  return v;
}

int earshot_loudness_match(float* interleaved, size_t frames, int channels, double rate, const double* weights,
                           double target_lkfs, double* gain_db) {
  if (!(target_lkfs - target_lkfs == 0)) return EARSHOT_ERR_NOT_FINITE;
  if (!(target_lkfs >= -70 && target_lkfs <= 0)) return EARSHOT_ERR_RANGE;
  double now = 0;
  const int st = loudness::integrated(interleaved, frames, channels, rate, weights, &now);
  if (st != EARSHOT_OK) return st;
  if (!(now > -1e300)) return EARSHOT_ERR_RANGE;  // silent: nothing to match
  const double db = target_lkfs - now;
  const float g = float(loudness::db_to_gain_det(db));
  const size_t n = frames * size_t(channels);
  for (size_t i = 0; i < n; ++i) interleaved[i] *= g;
  if (gain_db) *gain_db = db;
  return EARSHOT_OK;
}

}  // extern "C"
