// Proves the streaming resampler is block-size invariant, bounded by max_output, meets its documented filter figures, resamples a sine to within its stated SNR, rejects bad rates and keeps subnormals out of its history; and that detmath agrees with std::.
#include <catch2/catch.hpp>

#include <unsupported/Eigen/FFT>

#include <algorithm>
#include <cmath>
#include <complex>
#include <cstring>
#include <random>
#include <string>
#include <vector>

#include "detmath.hpp"
#include "resampler.hpp"

using earshot::Resampler;

namespace {

// Documented figures (dsp/core/resampler.hpp, dsp/RESAMPLER.md).
constexpr double kRippleDb = 0.0001;    // passband 0 … 0.90 of the lower Nyquist, ±
constexpr double kStopbandDb = 99.5;    // from the lower Nyquist up
constexpr double kSineSnrDb = 115.0;    // 1 kHz sine, 44.1 → 48 kHz (measured 118.4 dB)

Resampler make(int from, int to) {
  Resampler r;
  std::string err;
  if (!r.init(from, to, err)) FAIL(err);
  return r;
}

std::vector<float> noise(size_t n, unsigned seed) {
  std::mt19937 g(seed);
  std::uniform_real_distribution<float> u(-1.0f, 1.0f);
  std::vector<float> x(n);
  for (float& v : x) v = u(g);
  return x;
}

// Runs x through r in blocks of the given sizes (cycled), returns all output.
std::vector<float> run_blocks(Resampler& r, const std::vector<float>& x, const std::vector<int>& sizes) {
  std::vector<float> y;
  std::vector<float> buf;
  size_t at = 0, k = 0;
  while (at < x.size()) {
    int n = sizes[k++ % sizes.size()];
    if (static_cast<size_t>(n) > x.size() - at) n = static_cast<int>(x.size() - at);
    buf.assign(static_cast<size_t>(r.max_output(n)) + 16, 0.0f);
    const int made = r.process(x.data() + at, n, buf.data());
    REQUIRE(made <= r.max_output(n));
    y.insert(y.end(), buf.begin(), buf.begin() + made);
    at += static_cast<size_t>(n);
  }
  return y;
}

// scipy.signal.resample_poly's output length for n inputs: ceil(n·up/down)
// (scipy 1.10.1, signal/_signaltools.py, resample_poly: n_out).
long long scipy_output_length(long long n, int L, int M) { return (n * L + M - 1) / M; }

}  // namespace

TEST_CASE("resampler: any partition of the input gives bit-identical output", "[resampler]") {
  const auto rates = GENERATE(table<int, int>({{44100, 48000}, {48000, 44100}, {96000, 48000},
                                               {48000, 96000}, {8000, 384000}, {384000, 8000},
                                               {22050, 48000}, {48000, 48000}}));
  const int from = std::get<0>(rates), to = std::get<1>(rates);
  CAPTURE(from, to);
  Resampler r = make(from, to);
  const std::vector<float> x = noise(30000, 7);
  const std::vector<float> whole = run_blocks(r, x, {static_cast<int>(x.size())});
  REQUIRE(static_cast<long long>(whole.size()) == scipy_output_length(30000, r.up(), r.down()));
  std::mt19937 g(11);
  for (int trial = 0; trial < 4; ++trial) {
    CAPTURE(trial);
    std::vector<int> sizes;
    std::uniform_int_distribution<int> pick(1, trial == 0 ? 3 : 2000);
    for (int i = 0; i < 200; ++i) sizes.push_back(pick(g));
    r.reset();
    const std::vector<float> part = run_blocks(r, x, sizes);
    REQUIRE(part.size() == whole.size());
    CHECK(std::memcmp(part.data(), whole.data(), whole.size() * sizeof(float)) == 0);
  }
}

TEST_CASE("resampler: process never exceeds max_output, and the bound is reached", "[resampler]") {
  const auto rates = GENERATE(table<int, int>({{44100, 48000}, {48000, 44100}, {96000, 48000},
                                               {8000, 384000}, {384000, 8000}, {255875, 256000}}));
  const int from = std::get<0>(rates), to = std::get<1>(rates);
  CAPTURE(from, to);
  Resampler r = make(from, to);
  const std::vector<float> x = noise(5000, 3);
  std::vector<float> out(static_cast<size_t>(r.max_output(5000)));
  std::mt19937 g(5);
  std::uniform_int_distribution<int> pick(1, 700);
  bool reached = false;
  long long total_in = 0, total_out = 0;
  for (int i = 0; i < 300; ++i) {
    const int n = pick(g);
    const int made = r.process(x.data(), n, out.data());
    CAPTURE(i, n, made);
    REQUIRE(made >= 0);
    REQUIRE(made <= r.max_output(n));
    if (made == r.max_output(n)) reached = true;
    total_in += n;
    total_out += made;
    // From reset, the running count equals SciPy's output length.
    REQUIRE(total_out == scipy_output_length(total_in, r.up(), r.down()));
  }
  CHECK(reached);
  CHECK(r.max_output(0) == 0);
  CHECK(r.max_output(-3) == 0);
}

TEST_CASE("resampler: prototype meets the documented passband ripple and stopband attenuation", "[resampler]") {
  // The frequency response is the DTFT H(f) = Σ h[n]·e^{−j2πfn} (Oppenheim &
  // Schafer, eq. 2.131), sampled by Eigen's FFT (kissfft) of the zero-padded
  // taps in double at ≥ 8 points per 1/N; spot bins are checked against the
  // direct sum, and the five highest stopband bins are refined by the direct
  // sum on a grid of 1/40 bin around each (an 8N grid alone misses sidelobe
  // peaks by up to 0.7 dB).
  const auto rates = GENERATE(table<int, int>({{44100, 48000}, {48000, 44100}, {48000, 96000},
                                               {96000, 48000}, {22050, 48000}, {8000, 384000},
                                               {384000, 8000}, {352800, 11025}, {11025, 8000},
                                               {255875, 256000}}));
  const int from = std::get<0>(rates), to = std::get<1>(rates);
  CAPTURE(from, to);
  Resampler r = make(from, to);
  const std::vector<float>& h = r.prototype();
  const int L = r.up(), M = r.down(), D = L > M ? L : M;
  const size_t N = h.size();
  REQUIRE(N == static_cast<size_t>(2 * r.delay_in_input_samples() * L + 1));
  // Linear phase: a type I FIR is symmetric (Oppenheim & Schafer §5.7.3).
  size_t asymmetric = 0;
  for (size_t n = 0; n < N / 2; ++n) asymmetric += (h[n] != h[N - 1 - n]);
  CHECK(asymmetric == 0);

  size_t nfft = 1;
  while (nfft < 8 * N) nfft *= 2;
  std::vector<double> padded(nfft, 0.0);
  for (size_t n = 0; n < N; ++n) padded[n] = h[n];
  std::vector<std::complex<double>> H;
  Eigen::FFT<double> fft;
  fft.fwd(H, padded);
  REQUIRE(H.size() == nfft);

  // Direct DTFT at f cycles/sample, the phasor advanced by multiplication.
  auto dtft = [&](double f) {
    const std::complex<double> step = std::polar(1.0, -2.0 * M_PI * f);
    std::complex<double> p = 1.0, acc = 0.0;
    for (size_t n = 0; n < N; ++n) {
      acc += static_cast<double>(h[n]) * p;
      p *= step;
    }
    return acc;
  };
  for (size_t bin : {size_t(0), nfft / (4 * D), nfft / (2 * D) + 7, nfft / 3})
    CHECK(std::abs(H[bin] - dtft(static_cast<double>(bin) / nfft)) < 1e-9 * L);

  double pass_max = -1e9, pass_min = 1e9, stop_max = 0.0;
  const double stop_edge = Resampler::kStopbandEdge / (2.0 * D);  // cycles per up-rate sample
  std::vector<std::pair<double, size_t>> stop_bins;
  for (size_t k = 0; k <= nfft / 2; ++k) {
    const double f = static_cast<double>(k) / nfft;
    const double mag = std::abs(H[k]) / L;  // unit gain in the passband
    if (f <= Resampler::kPassbandEdge / (2.0 * D)) {
      const double db = 20.0 * std::log10(mag);
      pass_max = std::max(pass_max, db);
      pass_min = std::min(pass_min, db);
    } else if (f >= stop_edge) {
      stop_max = std::max(stop_max, mag);
      stop_bins.emplace_back(mag, k);
    }
  }
  const size_t top = std::min<size_t>(5, stop_bins.size());
  std::partial_sort(stop_bins.begin(), stop_bins.begin() + top, stop_bins.end(),
                    [](const auto& a, const auto& b) { return a.first > b.first; });
  for (size_t i = 0; i < top; ++i) {
    for (int j = -40; j <= 40; ++j) {
      const double f = (static_cast<double>(stop_bins[i].second) + j / 40.0) / nfft;
      if (f >= stop_edge && f <= 0.5) stop_max = std::max(stop_max, std::abs(dtft(f)) / L);
    }
  }
  const double stop_db = -20.0 * std::log10(stop_max);
  CAPTURE(pass_max, pass_min, stop_db);
  CHECK(pass_max <= kRippleDb);
  CHECK(pass_min >= -kRippleDb);
  CHECK(stop_db >= kStopbandDb);
}

TEST_CASE("detmath: sin, sin_pi, I0 and exp agree with std:: to the documented accuracy", "[resampler][detmath]") {
  std::mt19937_64 g(1);
  SECTION("sin against std::sin (glibc), |x| <= 1e5: abs error <= 3e-16") {
    std::uniform_real_distribution<double> u(-1e5, 1e5);
    double worst = 0.0;
    for (int i = 0; i < 400000; ++i) {
      double x = u(g);
      if (i % 4 == 0) x *= 1e-5;  // dense near zero too
      worst = std::max(worst, std::fabs(earshot::detmath::sin(x) - std::sin(x)));
    }
    CAPTURE(worst);
    CHECK(worst <= 3e-16);
    CHECK(earshot::detmath::sin(0.0) == 0.0);
    CHECK(std::isnan(earshot::detmath::sin(INFINITY)));
  }
  SECTION("sin_pi against std::sin(π·fmod(r, 2)) in long double, |r| <= 1e4: abs error <= 3e-16") {
    // fmod is exact (C11 7.12.10.1), so the reference argument carries no
    // reduction error of its own.
    std::uniform_real_distribution<double> u(-1e4, 1e4);
    const long double pi = 3.141592653589793238462643383279502884L;
    double worst = 0.0;
    for (int i = 0; i < 400000; ++i) {
      double r = u(g);
      if (i % 4 == 0) r *= 1e-4;
      const long double ref = std::sin(pi * static_cast<long double>(std::fmod(r, 2.0)));
      worst = std::max(worst, std::fabs(earshot::detmath::sin_pi(r) - static_cast<double>(ref)));
    }
    CAPTURE(worst);
    CHECK(worst <= 3e-16);
    for (int k = -50; k <= 50; ++k) CHECK(earshot::detmath::sin_pi(k) == 0.0);  // sin(kπ) = 0
    CHECK(earshot::detmath::sin_pi(0.5) == 1.0);
    CHECK(earshot::detmath::sin_pi(-1.5) == 1.0);
  }
  SECTION("bessel_i0 against std::cyl_bessel_i(0, x), 0 <= x <= 40: relative error <= 5e-15") {
    double worst = 0.0;
    for (int i = 0; i <= 40000; ++i) {
      const double x = i * 0.001;
      const double ref = std::cyl_bessel_i(0.0, x);
      worst = std::max(worst, std::fabs(earshot::detmath::bessel_i0(x) - ref) / ref);
    }
    CAPTURE(worst);
    CHECK(worst <= 5e-15);
    CHECK(earshot::detmath::bessel_i0(0.0) == 1.0);
    // I0(β·√t) from the square, as the Kaiser window uses it.
    CHECK(earshot::detmath::bessel_i0_of_square(9.0 * 0.5) ==
          Approx(std::cyl_bessel_i(0.0, 3.0 * std::sqrt(0.5))).epsilon(5e-15));
  }
  SECTION("exp against glibc's std::exp, |x| <= 40: relative error <= 6e-15") {
    double worst = 0.0;
    for (int i = -40000; i <= 40000; ++i) {
      const double x = i * 0.001;
      const double ref = std::exp(x);
      worst = std::max(worst, std::fabs(earshot::detmath::exp(x) - ref) / ref);
    }
    // Measured 4.9e-15 (at x = 35.466): the reduction by one double ln 2 loses
    // about n ulp for e^x = 2^n·e^r; 1.9e-15 over |x| <= 20.
    CAPTURE(worst);
    CHECK(worst <= 6e-15);
    CHECK(earshot::detmath::exp(0.0) == 1.0);
    CHECK(earshot::detmath::exp(std::log(2.0) * 10) == Approx(1024.0).epsilon(1e-15));
  }
}

TEST_CASE("resampler: a 1 kHz sine at 44.1 kHz comes out as the ideal 1 kHz sine at 48 kHz", "[resampler]") {
  // Ideal: y(t) = A·sin(2π·1000·(t − K/44100)), the input delayed by the
  // filter's group delay of K input samples, evaluated with std::sin.
  Resampler r = make(44100, 48000);
  const double A = 0.5, f0 = 1000.0;
  const int n = 44100;
  std::vector<float> x(n);
  for (int i = 0; i < n; ++i) x[i] = static_cast<float>(A * std::sin(2.0 * M_PI * f0 * i / 44100.0));
  const std::vector<float> y = run_blocks(r, x, {128, 77, 1024});
  const double delay_s = r.delay_in_input_samples() / 44100.0;
  // Skip the start-up transient (two filter lengths) and stop before the end.
  double sig = 0.0, err = 0.0;
  for (size_t k = 2000; k < y.size(); ++k) {
    const double ideal = A * std::sin(2.0 * M_PI * f0 * (static_cast<double>(k) / 48000.0 - delay_s));
    sig += ideal * ideal;
    err += (y[k] - ideal) * (y[k] - ideal);
  }
  const double snr_db = 10.0 * std::log10(sig / err);
  CAPTURE(snr_db);
  CHECK(snr_db >= kSineSnrDb);
}

TEST_CASE("resampler: identity is an exact pass-through with zero delay", "[resampler]") {
  Resampler r = make(48000, 48000);
  CHECK(r.up() == 1);
  CHECK(r.down() == 1);
  CHECK(r.delay_in_input_samples() == 0.0);
  CHECK(r.max_output(999) == 999);
  std::vector<float> x = noise(1000, 9);
  std::vector<float> y(1000);
  REQUIRE(r.process(x.data(), 1000, y.data()) == 1000);
  CHECK(std::memcmp(x.data(), y.data(), 1000 * sizeof(float)) == 0);
  std::vector<float> z = x;
  REQUIRE(r.process(z.data(), 1000, z.data()) == 1000);  // in place
  CHECK(std::memcmp(x.data(), z.data(), 1000 * sizeof(float)) == 0);
}

TEST_CASE("resampler: bad rates are refused with a message naming both rates", "[resampler]") {
  const auto rates = GENERATE(table<int, int, const char*>({{7999, 48000, "7999"},
                                                            {48000, 384001, "384001"},
                                                            {0, 44100, "0 Hz"},
                                                            {-44100, 48000, "-44100"},
                                                            {44100, 44101, "2048"},
                                                            {11025, 192000, "2560"}}));
  const int from = std::get<0>(rates), to = std::get<1>(rates);
  CAPTURE(from, to);
  Resampler r = make(44100, 48000);
  std::vector<float> x = noise(500, 1), before(600), after(600);
  const int n_before = r.process(x.data(), 500, before.data());
  r.reset();
  std::string err;
  CHECK_FALSE(r.init(from, to, err));
  INFO(err);
  CHECK(err.find(std::to_string(from) + " Hz") != std::string::npos);
  CHECK(err.find(std::to_string(to) + " Hz") != std::string::npos);
  CHECK(err.find(std::get<2>(rates)) != std::string::npos);
  // The refused init left the previous configuration working.
  CHECK(r.up() == 160);
  CHECK(r.down() == 147);
  REQUIRE(r.process(x.data(), 500, after.data()) == n_before);
  CHECK(std::memcmp(before.data(), after.data(), n_before * sizeof(float)) == 0);
  // Not initialised at all: nothing is produced.
  Resampler blank;
  CHECK(blank.process(x.data(), 500, after.data()) == 0);
  CHECK(blank.max_output(500) == 0);
}

TEST_CASE("resampler: no subnormal ever enters the history; silence decays to exact zeros", "[resampler]") {
  const auto rates = GENERATE(table<int, int>({{44100, 48000}, {96000, 48000}, {384000, 8000}}));
  const int from = std::get<0>(rates), to = std::get<1>(rates);
  CAPTURE(from, to);
  Resampler r = make(from, to);
  // Every nonzero tap times the smallest stored input stays normal in float.
  size_t small = 0;
  for (float t : r.prototype())
    if (t != 0.0f && !(std::fabs(t) * Resampler::kHistoryFloor >= 1.17549435e-38f)) ++small;  // FLT_MIN, IEEE 754 binary32
  CHECK(small == 0);

  std::vector<float> x = noise(5000, 2);
  // A slow exponential decay from full scale down through the subnormal range,
  // then explicit tiny and subnormal values, then silence.
  float v = 1.0f;
  for (int i = 0; i < 11000; ++i, v *= 0.99f) x.push_back(v * (i % 2 ? 1.0f : -1.0f));
  for (float t : {1e-29f, 5e-30f, 1e-31f, 1e-38f, 1e-40f, -1e-44f, 2e-30f}) x.push_back(t);
  const size_t loud_end = x.size();
  x.resize(x.size() + 3 * static_cast<size_t>(r.taps_per_phase()), 0.0f);

  std::vector<float> out(static_cast<size_t>(r.max_output(1)));
  std::vector<float> tail;
  size_t bad = 0;  // history entries that are subnormal or nonzero below the floor, summed over every step
  for (size_t i = 0; i < x.size(); ++i) {
    const int made = r.process(&x[i], 1, out.data());
    for (float h : r.history_for_tests())
      if (std::fpclassify(h) == FP_SUBNORMAL || (h != 0.0f && std::fabs(h) < Resampler::kHistoryFloor)) ++bad;
    if (i >= loud_end + static_cast<size_t>(r.taps_per_phase())) tail.insert(tail.end(), out.begin(), out.begin() + made);
  }
  CHECK(bad == 0);
  size_t nonzero = 0;
  for (float h : r.history_for_tests()) nonzero += (h != 0.0f);
  CHECK(nonzero == 0);
  REQUIRE(!tail.empty());
  size_t tail_nonzero = 0;
  for (float y : tail) tail_nonzero += (y != 0.0f);
  CHECK(tail_nonzero == 0);
}
