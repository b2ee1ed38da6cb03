// MUSHRA anchors (ITU-R BS.1534-3): low-pass filtered copies of the reference,
// the 3.5 kHz "low anchor" and the 7 kHz "mid anchor".
//
// Filter: linear-phase FIR, Kaiser-windowed sinc, odd length N = 2M + 1,
// applied centred (tap M on the current sample), so the anchor has the
// reference's length and no delay — it stays sample-aligned with the
// reference and the other stimuli. Designed with detmath only (sin_pi, I0),
// filtered in double with a fixed summation order and -ffp-contract=off, so
// native and WebAssembly output is bit-identical.
//
// Mask. For the 3.5 kHz anchor the Recommendation asks (as quoted in
// docs/listening.md): fc = 3.5 kHz, pass-band ripple within ±0.1 dB, at least
// 25 dB attenuation at 4 kHz and at least 50 dB at 4.5 kHz. We read fc as
// the pass-band edge. For any pass-band edge fp we scale that mask with fp
// (our own choice, no source — the Recommendation gives a mask only for
// 3.5 kHz): ±0.1 dB on 0 … fp, ≥ 25 dB from 8/7·fp, ≥ 50 dB from 9/7·fp,
// i.e. 8 kHz and 9 kHz for the 7 kHz anchor.
//
// Design (Oppenheim & Schafer, Discrete-Time Signal Processing, 3rd ed.,
// §7.6, Kaiser's formulas): stop-band edge fs = 8/7·fp, cut-off midway,
// A = 70 dB → β = 0.1102·(A − 8.7), N − 1 = (A − 8)/(2.285·Δω) rounded up to
// an even number, Δω = 2π(fs − fp)/rate; DC gain normalised to 1. Measured
// response: tests/native/anchors_test.cpp, tests/python/test_loudness.py (see
// docs/listening.md for the figures).
#pragma once
#include <cstddef>

namespace earshot {
namespace anchors {

constexpr double kLowAnchorHz = 3500;   // BS.1534-3 low anchor
constexpr double kMidAnchorHz = 7000;   // BS.1534-3 mid anchor
constexpr double kDesignAttenuationDb = 70;
constexpr double kPassbandMinHz = 1000, kPassbandMaxHz = 20000;
constexpr int kMaxTaps = 16385;

// Number of taps for (rate, passband edge), or a negative earshot status code
// when the arguments are out of range (rate a whole number of Hz in
// 8000 … 384000; 1000 <= fp <= 20000 and 9/7·fp <= rate/2).
int tap_count(double rate, double passband_hz);

// Writes the taps into taps[0 .. count-1] (capacity >= count); returns the
// count or a negative status code.
int design(double rate, double passband_hz, double* taps, int capacity);

// Filters an interleaved clip (in and out may be the same buffer). Returns a
// status code; out is untouched on failure.
int lowpass(const float* in, float* out, size_t frames, int channels, double rate, double passband_hz);

}  // namespace anchors
}  // namespace earshot
