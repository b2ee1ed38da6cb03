// Deterministic double-precision math for set-up time (filter design).
//
// glibc's and Emscripten's libm differ in the last bits, and a filter
// designed from them would differ too, so nothing here calls libm. Every
// function uses only IEEE 754 + − × ÷ and integer <-> double conversions,
// which are correctly rounded on every target (x86-64 SSE2, WebAssembly f64),
// so the results are bit-identical natively and in WebAssembly as long as the
// build keeps -ffp-contract=off (no fused multiply-add).
//
// Accuracy, measured against glibc's std::sin and libstdc++'s
// std::cyl_bessel_i (tests/native/resampler_test.cpp, which asserts these):
//   sin(x)        |x| <= 1e5:    abs error <= 3e-16 (measured 2.2e-16, 1 ulp of 1)
//   sin_pi(r)     |r| <= 1e4:    abs error <= 3e-16 against sin(π·fmod(r, 2)) in
//                                long double (measured 2.2e-16); exactly 0 at integers
//   bessel_i0(x)  0 <= x <= 40:  relative error <= 5e-15 against std::cyl_bessel_i
//                                (measured 4.8e-15; against a long double series
//                                it is 2.8e-15, so part of that is std's own error)
//   exp(x)        |x| <= 40:     relative error <= 6e-15 against glibc's std::exp
//                                (measured 4.9e-15; 1.9e-15 over |x| <= 20)
// sqrt is not needed: the Kaiser window only ever asks for I0(β·√t), and the
// I0 series is a series in x², so bessel_i0_of_square(β²·t) avoids the root.
#pragma once
#include <cmath>
#include <limits>

namespace earshot {
namespace detmath {

// π and π/2 split for Cody–Waite argument reduction. P1..P3 carry 31, 32 and
// 28 significant bits, so k·Pi is exact for |k| < 2^21; P1+P2+P3+P3T equals
// π/2 to within 1e-48 (checked with 100 decimal digits of π). The split is the
// one fdlibm uses (pio2_1, pio2_2, pio2_3, pio2_3t), recalled from memory and
// verified as stated.
constexpr double kPi = 3.14159265358979311600e+00;
constexpr double kTwoOverPi = 6.36619772367581382433e-01;
constexpr double kPio2P1 = 1.57079632673412561417e+00;
constexpr double kPio2P2 = 6.07710050630396597660e-11;
constexpr double kPio2P3 = 2.02226624871116645580e-21;
constexpr double kPio2P3T = 8.47842766036889956997e-32;

// Round to nearest integer, halves away from zero; |x| < 2^62.
inline long long round_to_ll(double x) {
  return x >= 0.0 ? static_cast<long long>(x + 0.5) : -static_cast<long long>(0.5 - x);
}

// Taylor series of sin on |y| <= π/4 + tiny, in nested form, through y^17
// (the first omitted term is below 1e-19·|y|).
inline double sin_kernel(double y) {
  const double z = y * y;
  double s = 1.0;
  for (int n = 17; n >= 3; n -= 2) s = 1.0 - z / static_cast<double>((n - 1) * n) * s;
  return y * s;
}

// Taylor series of cos on |y| <= π/4 + tiny, through y^18.
inline double cos_kernel(double y) {
  const double z = y * y;
  double c = 1.0;
  for (int n = 18; n >= 2; n -= 2) c = 1.0 - z / static_cast<double>((n - 1) * n) * c;
  return c;
}

// sin(x). Stated accuracy for |x| <= 1e5; the reduction stays exact up to
// |x| ≈ 3e6 (|k| < 2^21) and degrades gracefully beyond. Returns NaN for
// NaN, infinities and |x| >= 1e15 (outside any use at set-up time).
inline double sin(double x) {
  if (!(x < 1.0e15 && x > -1.0e15)) return std::numeric_limits<double>::quiet_NaN();
  const long long k = round_to_ll(x * kTwoOverPi);
  const double kd = static_cast<double>(k);
  // x − k·P1 is exact (Sterbenz); the later terms are exact products.
  double y = x - kd * kPio2P1;
  y = y - kd * kPio2P2;
  y = y - kd * kPio2P3;
  y = y - kd * kPio2P3T;
  switch (k & 3) {
    case 0: return sin_kernel(y);
    case 1: return cos_kernel(y);
    case 2: return -sin_kernel(y);
    default: return -cos_kernel(y);
  }
}

// sin(π·r). The reduction of r modulo 2 is exact (r and the even integer
// subtracted share the grid of r's last bit), so sin_pi is exactly 0 at every
// integer r and accurate for large r as long as r itself is exact.
inline double sin_pi(double r) {
  if (r - r != 0.0) return r - r;                               // NaN or ±inf: NaN
  if (r >= 4503599627370496.0 || r <= -4503599627370496.0) return 0.0;  // |r| >= 2^52 is an integer
  double t = r - 2.0 * static_cast<double>(round_to_ll(r * 0.5));  // exact, in [-1, 1]
  if (t > 0.5) t = 1.0 - t;                                          // sin(π(1−t)) = sin(πt), exact
  else if (t < -0.5) t = -1.0 - t;
  // Now |t| <= 1/2.
  if (t >= -0.25 && t <= 0.25) return sin_kernel(kPi * t);
  const double u = 0.5 - (t < 0.0 ? -t : t);  // exact (Sterbenz), in [0, 1/4]
  const double c = cos_kernel(kPi * u);       // sin(π|t|) = cos(π(1/2 − |t|))
  return t < 0.0 ? -c : c;
}

// Modified Bessel function of the first kind, order 0, from the square of its
// argument: I0(√q) = Σ_k (q/4)^k / (k!)², q >= 0 (Abramowitz & Stegun 9.6.12).
// All terms are positive, so the sum has no cancellation; it stops when a term
// no longer changes the sum's last bit.
inline double bessel_i0_of_square(double q) {
  const double a = 0.25 * q;
  double term = 1.0;
  double sum = 1.0;
  for (int k = 1; k < 1000; ++k) {
    term = term * a / static_cast<double>(k * k);
    const double next = sum + term;
    if (next == sum) break;
    sum = next;
  }
  return sum;
}

inline double bessel_i0(double x) { return bessel_i0_of_square(x * x); }

// e^x by range reduction to r = x − n·ln 2, |r| ≤ ln 2 / 2, and its Taylor
// series (24 terms reach double precision there); the 2^n scaling (ldexp) is
// exact. Used for dB → gain in the stream and for the CLI's test signal;
// |x| ≤ 40 there. tests/native/resampler_test.cpp checks it against std::exp.
inline double exp(double x) {
  const double ln2 = 0.69314718055994530942;
  const double k = x / ln2;
  const int n = int(k >= 0 ? k + 0.5 : k - 0.5);
  const double r = x - n * ln2;
  double term = 1, sum = 1;
  for (int i = 1; i < 24; ++i) {
    term = term * r / i;
    sum += term;
  }
  return std::ldexp(sum, n);
}

}  // namespace detmath
}  // namespace earshot
