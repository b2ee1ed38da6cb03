// Integrated loudness per ITU-R BS.1770-4 (K-weighting, 400 ms gating blocks
// with 75 % overlap, absolute gate −70 LKFS, relative gate −10 LU), computed
// so that native builds and WebAssembly give bit-identical results: double
// precision throughout, only + − × ÷ and integer conversions (-ffp-contract=off),
// no libm anywhere on the path — the filter design uses detmath::sin_pi and the
// final log10 is our own (log10_det below).
//
// The C ABI entry points are earshot_loudness, earshot_loudness_lkfs and
// earshot_loudness_match (dsp/include/earshot/earshot.h); docs/listening.md
// describes the measurement. This header exposes the pieces for the tests.
#pragma once
#include <cstddef>

#include "earshot/earshot.h"

namespace earshot {
namespace loudness {

// One second-order section, a0 = 1:
//   H(z) = (b0 + b1 z⁻¹ + b2 z⁻²) / (1 + a1 z⁻¹ + a2 z⁻²)
struct Biquad {
  double b0, b1, b2, a1, a2;
};

// The two K-weighting stages: the high-shelf pre-filter (head model) and the
// RLB high-pass.
struct KWeighting {
  Biquad shelf, highpass;
};

// K-weighting for any sample rate, from the analog-prototype parameters that
// reproduce the Recommendation's 48 kHz coefficients (bilinear transform with
// the corner prewarped: K = tan(π·f0/rate)). rate > 0.
KWeighting k_weighting(double rate);

// log10 with + − × ÷ only; x > 0 finite → log10(x), x == 0 → −inf,
// x < 0 or NaN → NaN, +inf → +inf. Error against std::log10 is stated and
// asserted in tests/native/loudness_test.cpp.
double log10_det(double x);

// 10^(x/20) with + − × ÷ only (exact scaling by powers of two), |x| <= 600.
double db_to_gain_det(double db);

// Gating block geometry at a rate: step = round(rate/10) samples (100 ms),
// block = 4·step (400 ms). Blocks start at j·step and must lie wholly inside
// the clip, so a clip of n frames has floor((n − block)/step) + 1 blocks when
// n >= block and none otherwise.
struct Blocks {
  size_t step, length, count;
};
Blocks blocks_for(double rate, size_t frames);

// Status codes are earshot.h's EARSHOT_OK / EARSHOT_ERR_*.
// weights: nullptr for the default layout (default_weight), else one per channel.
// On success *lkfs is the integrated loudness, or −inf when no block passes
// the absolute gate (silence, or a clip shorter than 400 ms).
int integrated(const float* interleaved, size_t frames, int channels, double rate, const double* weights,
               double* lkfs);

// Mean square z_j of every gating block (channel-weighted sum of the
// K-weighted mean squares) into out[0 .. count-1]; the same arithmetic as
// integrated(). For tests. Returns a status code; out must hold
// blocks_for(rate, frames).count values.
int block_powers(const float* interleaved, size_t frames, int channels, double rate, const double* weights,
                 double* out);

// Default channel weight G_i (BS.1770-4 Table 3) by channel count and index:
//   1–3 channels: all 1.0 (mono; L R; L R C)
//   4: L R Ls Rs      → 1, 1, 1.41, 1.41
//   5: L R C Ls Rs    → 1, 1, 1, 1.41, 1.41
//   6: L R C LFE Ls Rs (WAV order) → 1, 1, 1, 0, 1.41, 1.41 (LFE not measured)
// Other counts have no default: returns a negative value.
double default_weight(int channels, int index);

// 10^((−70 + 0.691)/10): the absolute gate in the mean-square domain, the
// correctly rounded double of 10^−6.9309 (50-digit decimal arithmetic gives
// 1.17246530458229639595e-7).
constexpr double kAbsoluteGatePower = 1.1724653045822964e-07;

constexpr int kMaxChannels = 32;
constexpr double kRateMin = EARSHOT_MIN_RATE, kRateMax = EARSHOT_MAX_RATE;

}  // namespace loudness
}  // namespace earshot
