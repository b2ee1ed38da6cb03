// Streaming rational resampler: bridges the host's sample rate and the
// effect's. Polyphase windowed-sinc (Kaiser), linear phase, causal.
//
//   from_rate → to_rate reduces (by their gcd) to up/down = L/M. Conceptually
//   the input is zero-stuffed to L·from_rate, filtered by the prototype FIR h
//   (N = 2·K·L + 1 taps, centred on tap K·L) and every M-th sample is kept:
//       y[k] = Σ_i h[k·M − i·L] · x[i]
//   which is scipy.signal.upfirdn(h, x, L, M) truncated to ceil(n·L/M)
//   outputs. Each output is one dot product of T = 2K+1 taps (one polyphase
//   branch) over the newest T inputs, accumulated in float in a fixed order,
//   so output is bit-identical on every platform (with -ffp-contract=off) and
//   independent of how the input is split into blocks.
//
// Design (detmath only, in double, then rounded to float): cutoff midway
// between the passband edge 0.90 and the stopband edge 1.00 of the lower of the
// two Nyquist frequencies; Kaiser window for a 100 dB design target
// (β = 0.1102·(A − 8.7); length from Kaiser's formula N − 1 = (A − 8)/(2.285·Δω),
// Oppenheim & Schafer, Discrete-Time Signal Processing, 3rd ed., §7.6),
// rounded up so the centre falls on a whole input sample; DC gain
// normalised to L; taps with |h| < 1.5e-8 set to 0 (see Subnormals).
//
// Measured (tests/native/resampler_test.cpp and tests/python/test_resampler.py
// assert these; dsp/RESAMPLER.md has the table over all 176 accepted ordered
// pairs of the common rates 8000 … 384000):
//   passband 0 … 0.90·Nyquist_low:  ripple within ±0.0001 dB (worst 0.000094)
//   transition 0.90 … 1.00·Nyquist_low (e.g. 19 845 … 22 050 Hz for 44.1 ↔ 48 kHz)
//   stopband ≥ 1.00·Nyquist_low:    attenuation ≥ 99.5 dB (worst 99.62, 11025 → 8000)
//   latency: K input samples (an integer), K ≈ 64·max(L,M)/L:
//            1.47 ms at 44.1 → 48 kHz (K = 65), 1.46 ms at 48 → 44.1 kHz (K = 70),
//            about 64/min(from, to) seconds in general, 8 ms when one side is 8 kHz
//   1 kHz sine, 44.1 → 48 kHz, against the ideal delayed sine: SNR 118.4 dB
//   (the same with double arithmetic: the filter, not float, sets it)
//   against SciPy resample_poly with the same taps: max abs diff ≈ 1e-6
//
// Cost per output: T multiply-adds (T ≈ 131 when upsampling, ≈ 128·M/L + 3
// when downsampling). Memory: L·T + 2·T floats, plus the N-tap prototype.
//
// Subnormals: every value written into the history is flushed to 0 when
// |v| < 1e-30, and no stored nonzero tap is below 1.5e-8 in magnitude, so no
// product in the dot products is subnormal (1.5e-38 > FLT_MIN ≈ 1.18e-38) and
// silence after loud input decays to exact zeros. WebAssembly cannot flush
// subnormals itself. (A floor of 1e-7 was tried first: it cut the window tails
// of large decimation filters and cost 4 dB of stopband at 384 → 8 kHz.)
//
// from_rate == to_rate is an exact pass-through with zero delay.
#pragma once
#include <string>
#include <vector>

#include "earshot/earshot.h"

namespace earshot {

class Resampler {
 public:
  static constexpr int kRateMin = EARSHOT_MIN_RATE;
  static constexpr int kRateMax = EARSHOT_MAX_RATE;
  static constexpr int kMaxFactor = 2048;          // largest L or M accepted
  static constexpr double kDesignStopbandDb = 100.0;
  static constexpr double kPassbandEdge = 0.90;    // fraction of the lower Nyquist
  static constexpr double kStopbandEdge = 1.00;
  static constexpr float kHistoryFloor = 1e-30f;   // smaller inputs are stored as 0
  static constexpr float kTapFloor = 1.5e-8f;      // smaller taps are stored as 0

  // Designs the filter and allocates everything; clears the stream state.
  // Rates in Hz, each kRateMin … kRateMax. Refuses (with a message naming both
  // rates) when the reduced ratio needs L or M above kMaxFactor. On failure
  // the resampler keeps its previous configuration and state.
  bool init(int from_rate, int to_rate, std::string& error);

  // Bytes init() keeps for these rates (held), and the temporaries it needs
  // on top while it designs the filter (design), computed without allocating;
  // both 0 when init would refuse the rates. They bound a stream's memory
  // before it is built.
  static void bytes_needed(int from_rate, int to_rate, double& held, double& design);

  // Upper bound on what process() returns for n_in inputs, from any state:
  // ceil(n_in·L/M). 0 before init.
  int max_output(int n_in) const;

  // Consumes n inputs, writes the outputs due and returns their count
  // (<= max_output(n)). No allocation. in and out must not overlap (except
  // for the pass-through, where they may be the same buffer). Returns 0 when
  // not initialised or an argument is bad.
  int process(const float* in, int n, float* out);

  // Clears history and phase: the next input is treated as input 0.
  void reset();

  // Group delay of the filter, in input samples (K; 0 for the pass-through).
  // An input impulse at input sample i appears centred at output time
  // (i + delay)·to_rate/from_rate.
  double delay_in_input_samples() const;

  // The designed FIR at L·from_rate, float, N taps, sum ≈ L.
  const std::vector<float>& prototype() const { return prototype_; }
  int up() const { return up_; }
  int down() const { return down_; }
  int taps_per_phase() const { return taps_; }
  int from_rate() const { return from_rate_; }
  int to_rate() const { return to_rate_; }

  // Test accessor: the raw history buffer (2·T floats, each input stored twice).
  const std::vector<float>& history_for_tests() const { return history_; }

 private:
  int from_rate_ = 0;
  int to_rate_ = 0;
  int up_ = 0;          // L
  int down_ = 0;        // M
  int half_ = 0;        // K: centre tap is K·L, delay K input samples
  int taps_ = 0;        // T = 2K+1 taps per polyphase branch
  bool identity_ = false;
  std::vector<float> prototype_;  // h[0 … N−1]
  std::vector<float> bank_;       // L rows of T taps, row p = h[p + (T−1−j)·L] for j = 0 … T−1
  std::vector<float> history_;    // 2·T: input written at pos and pos+T
  int pos_ = 0;                   // next write slot in [0, T); window = history_[pos_ … pos_+T−1]
  int phase_ = 0;                 // up-rate offset of the next output past the newest input
};

}  // namespace earshot
