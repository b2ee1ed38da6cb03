// Proves the MUSHRA anchor filters: linear phase (symmetric taps, odd length), unit DC gain, the BS.1534 mask for the 3.5 kHz anchor and the scaled mask for the 7 kHz anchor at the common rates (response evaluated directly in double), zero delay against the reference, channel independence, in-place use, and a clear status for every bad argument.
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdio>
#include <random>
#include <vector>

#include "anchors.hpp"
#include "earshot/earshot.h"

namespace {

constexpr double kPi = 3.141592653589793238463;

std::vector<double> taps(double rate, double fp) {
  const int n = earshot_anchor_taps(rate, fp, nullptr, 0);
  REQUIRE(n > 0);
  std::vector<double> h(static_cast<size_t>(n));
  REQUIRE(earshot_anchor_taps(rate, fp, h.data(), n) == n);
  return h;
}

// |H(e^{jω})| of a symmetric FIR, evaluated as a zero-phase sum in double:
// A(ω) = h[M] + 2·Σ_{k=1..M} h[M+k]·cos(ωk).
double amplitude(const std::vector<double>& h, double f, double rate) {
  const size_t m = (h.size() - 1) / 2;
  const double w = 2 * kPi * f / rate;
  double a = h[m];
  for (size_t k = 1; k <= m; ++k) a += 2 * h[m + k] * std::cos(w * double(k));
  return std::abs(a);
}

double db(double a) { return 20 * std::log10(std::max(a, 1e-30)); }

struct Response {
  double pass_lo = 1e9, pass_hi = -1e9;  // dB over 0 .. fp
  double at_25 = -1e9;                   // max dB over [8/7 fp, 9/7 fp)
  double at_50 = -1e9;                   // max dB over [9/7 fp, Nyquist]
};

Response measure(const std::vector<double>& h, double rate, double fp) {
  Response r;
  const double step = 2.0;  // Hz; far finer than the ripple period (rate/N ≈ 115 Hz at 48 kHz)
  for (double f = 0; f <= fp; f += step) {
    const double g = db(amplitude(h, f, rate));
    r.pass_lo = std::min(r.pass_lo, g);
    r.pass_hi = std::max(r.pass_hi, g);
  }
  for (double f = fp * 8 / 7; f < fp * 9 / 7; f += step) r.at_25 = std::max(r.at_25, db(amplitude(h, f, rate)));
  for (double f = fp * 9 / 7; f <= rate / 2; f += step) r.at_50 = std::max(r.at_50, db(amplitude(h, f, rate)));
  return r;
}

}  // namespace

TEST_CASE("anchor filters meet the BS.1534 mask at the common rates", "[anchors]") {
  // ITU-R BS.1534 (3.5 kHz low-pass anchor, as quoted in docs/listening.md):
  // pass-band ripple within ±0.1 dB, at least 25 dB attenuation at 4 kHz and
  // at least 50 dB at 4.5 kHz. For 7 kHz the same mask scaled by 2 (8 and
  // 9 kHz) is our own choice (dsp/core/anchors.hpp).
  for (double fp : {earshot::anchors::kLowAnchorHz, earshot::anchors::kMidAnchorHz}) {
    for (double rate : {32000.0, 44100.0, 48000.0, 88200.0, 96000.0}) {
      const std::vector<double> h = taps(rate, fp);
      const Response r = measure(h, rate, fp);
      std::printf("anchor %4.0f Hz @ %6.0f Hz: %5zu taps, pass band %+.4f .. %+.4f dB, "
                  "max %.1f dB on [%.0f, %.0f) Hz, max %.1f dB above %.0f Hz\n",
                  fp, rate, h.size(), r.pass_lo, r.pass_hi, r.at_25, fp * 8 / 7, fp * 9 / 7, r.at_50, fp * 9 / 7);
      CAPTURE(fp, rate);
      CHECK(r.pass_lo >= -0.1);
      CHECK(r.pass_hi <= 0.1);
      CHECK(r.at_25 <= -25.0);
      CHECK(r.at_50 <= -50.0);
    }
  }
}

TEST_CASE("anchor taps are linear phase with unit DC gain", "[anchors]") {
  for (double rate : {44100.0, 48000.0, 192000.0}) {
    const std::vector<double> h = taps(rate, 3500);
    REQUIRE(h.size() % 2 == 1);
    for (size_t k = 0; k < h.size(); ++k) CHECK(h[k] == h[h.size() - 1 - k]);  // exact symmetry
    double sum = 0;
    for (double v : h) sum += v;
    CHECK(std::abs(sum - 1.0) < 1e-14);
  }
  // Length grows as the transition narrows relative to the rate (Kaiser's formula).
  CHECK(earshot_anchor_taps(48000, 3500, nullptr, 0) > earshot_anchor_taps(48000, 7000, nullptr, 0));
  CHECK(earshot_anchor_taps(96000, 3500, nullptr, 0) > earshot_anchor_taps(48000, 3500, nullptr, 0));
}

TEST_CASE("anchors stay time-aligned with the reference", "[anchors]") {
  const double rate = 48000;
  SECTION("an impulse comes out centred on the same sample, shaped by the taps") {
    const std::vector<double> h = taps(rate, 3500);
    const size_t m = (h.size() - 1) / 2;
    std::vector<float> x(4000, 0.0f), y(4000);
    x[1500] = 1.0f;
    REQUIRE(earshot_anchor(x.data(), y.data(), x.size(), 1, rate, 3500) == EARSHOT_OK);
    size_t peak = 0;
    for (size_t t = 0; t < y.size(); ++t)
      if (std::abs(y[t]) > std::abs(y[peak])) peak = t;
    CHECK(peak == 1500);
    for (size_t k = 0; k < h.size(); ++k) CHECK(y[1500 - m + k] == float(h[k]));
    CHECK(y[1500 - m - 1] == 0.0f);
    CHECK(y[1500 + m + 1] == 0.0f);
  }
  SECTION("a 500 Hz sine passes unchanged in phase and level") {
    const size_t n = 48000;
    std::vector<float> x(n), y(n);
    for (size_t t = 0; t < n; ++t) x[t] = float(0.5 * std::sin(2 * kPi * 500 * double(t) / rate));
    REQUIRE(earshot_anchor(x.data(), y.data(), n, 1, rate, 3500) == EARSHOT_OK);
    double err = 0;
    for (size_t t = 1000; t < n - 1000; ++t) err = std::max(err, double(std::abs(y[t] - x[t])));
    // Pass-band ripple ±0.003 dB at 0.5 amplitude ≈ 1.7e-4; float rounding below that.
    CHECK(err < 3e-4);
  }
}

TEST_CASE("anchor processing: channels are independent, in place equals out of place", "[anchors]") {
  const double rate = 44100;
  const size_t n = 9000;
  std::mt19937 g(3);
  std::uniform_real_distribution<float> u(-1, 1);
  std::vector<float> st(n * 2), left(n), right(n);
  for (size_t t = 0; t < n; ++t) {
    st[2 * t] = left[t] = u(g);
    st[2 * t + 1] = right[t] = u(g);
  }
  std::vector<float> out(n * 2), lo(n), ro(n);
  REQUIRE(earshot_anchor(st.data(), out.data(), n, 2, rate, 7000) == EARSHOT_OK);
  REQUIRE(earshot_anchor(left.data(), lo.data(), n, 1, rate, 7000) == EARSHOT_OK);
  REQUIRE(earshot_anchor(right.data(), ro.data(), n, 1, rate, 7000) == EARSHOT_OK);
  for (size_t t = 0; t < n; ++t) {
    CHECK(out[2 * t] == lo[t]);
    CHECK(out[2 * t + 1] == ro[t]);
  }
  REQUIRE(earshot_anchor(st.data(), st.data(), n, 2, rate, 7000) == EARSHOT_OK);
  CHECK(st == out);
}

TEST_CASE("anchor bad arguments get a status naming the fault", "[anchors]") {
  std::vector<float> x(100, 0.0f), y(100);
  CHECK(earshot_anchor_taps(44100.5, 3500, nullptr, 0) == EARSHOT_ERR_RANGE);
  CHECK(earshot_anchor_taps(7999, 3500, nullptr, 0) == EARSHOT_ERR_RANGE);
  CHECK(earshot_anchor_taps(NAN, 3500, nullptr, 0) == EARSHOT_ERR_NOT_FINITE);
  CHECK(earshot_anchor_taps(48000, 999, nullptr, 0) == EARSHOT_ERR_RANGE);
  CHECK(earshot_anchor_taps(16000, 7000, nullptr, 0) == EARSHOT_ERR_RANGE);  // 9 kHz above Nyquist
  CHECK(earshot_anchor_taps(18000, 7000, nullptr, 0) > 0);                    // 9 kHz = Nyquist: fits
  const int n = earshot_anchor_taps(48000, 3500, nullptr, 0);
  std::vector<double> h(static_cast<size_t>(n));
  CHECK(earshot_anchor_taps(48000, 3500, h.data(), n - 1) == EARSHOT_ERR_ARGUMENT);
  CHECK(earshot_anchor(nullptr, y.data(), 100, 1, 48000, 3500) == EARSHOT_ERR_ARGUMENT);
  CHECK(earshot_anchor(x.data(), nullptr, 100, 1, 48000, 3500) == EARSHOT_ERR_ARGUMENT);
  CHECK(earshot_anchor(x.data(), y.data(), 100, 0, 48000, 3500) == EARSHOT_ERR_ARGUMENT);
  CHECK(earshot_anchor(x.data(), y.data(), 100, 1, 48000, 30000) == EARSHOT_ERR_RANGE);
  x[50] = NAN;
  y[0] = 7.0f;
  CHECK(earshot_anchor(x.data(), y.data(), 100, 1, 48000, 3500) == EARSHOT_ERR_NOT_FINITE);
  CHECK(y[0] == 7.0f);  // untouched on failure
  CHECK(earshot_anchor(x.data(), y.data(), 0, 1, 48000, 3500) == EARSHOT_OK);  // empty clip
}
