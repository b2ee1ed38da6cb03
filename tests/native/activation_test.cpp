// Measures the accuracy of the core's own tanh, sigmoid and softsign against
// double-precision std::tanh / std::exp over the input range, and checks the
// bounds stated in dsp/ACCURACY.md.
#include <catch2/catch.hpp>
#include <cmath>
#include <cstdio>

#include "model.hpp"

namespace earshot {
#define EARSHOT_NS v_accuracy_test
namespace v_accuracy_test {
#include "simd.hpp"
#include "activations.hpp"
}  // namespace v_accuracy_test
}  // namespace earshot

using namespace earshot::v_accuracy_test;

namespace {
struct Err {
  double abs = 0, rel = 0, at = 0;
};
template <class F, class R>
Err sweep(F f, R ref, double lo, double hi, int n) {
  Err e;
  for (int i = 0; i <= n; ++i) {
    const float x = float(lo + (hi - lo) * i / n);
    const double want = ref(double(x));
    const double got = f(x);
    const double a = std::fabs(got - want);
    if (a > e.abs) {
      e.abs = a;
      e.at = x;
    }
    if (want != 0) e.rel = std::max(e.rel, a / std::fabs(want));
  }
  return e;
}
}  // namespace

TEST_CASE("activation approximations meet their documented accuracy") {
  const int n = 4000000;
  const Err t = sweep([](float x) { return tanh_v<scalar_arch>(x); }, [](double x) { return std::tanh(x); }, -12, 12, n);
  const Err s = sweep([](float x) { return sigmoid_v<scalar_arch>(x); },
                      [](double x) { return 1 / (1 + std::exp(-x)); }, -24, 24, n);
  const Err ss = sweep([](float x) { return softsign_v<scalar_arch>(x); },
                       [](double x) { return x / (1 + std::fabs(x)); }, -100, 100, n);
  const Err tiny = sweep([](float x) { return tanh_v<scalar_arch>(x); }, [](double x) { return std::tanh(x); }, -1e-3, 1e-3, n / 10);
  std::printf("tanh     max abs %.3g (at %g), max rel %.3g over [-12, 12]\n", t.abs, t.at, t.rel);
  std::printf("tanh     max rel %.3g over [-1e-3, 1e-3]\n", tiny.rel);
  std::printf("sigmoid  max abs %.3g (at %g) over [-24, 24]\n", s.abs, s.at);
  std::printf("softsign max abs %.3g over [-100, 100]\n", ss.abs);
  // Bounds in dsp/ACCURACY.md (float32 spacing near 1 is 6e-8: a few ulps).
  CHECK(t.abs <= 4e-7);
  CHECK(tiny.rel <= 1e-6);
  CHECK(s.abs <= 2.5e-7);
  CHECK(ss.abs <= 1.2e-7);
  // Symmetry and saturation: tanh is odd and reaches exactly ±1.
  for (float x : {0.1f, 0.5f, 1.0f, 3.0f, 7.0f}) CHECK(tanh_v<scalar_arch>(-x) == -tanh_v<scalar_arch>(x));
  CHECK(tanh_v<scalar_arch>(20.0f) == 1.0f);
  CHECK(tanh_v<scalar_arch>(-20.0f) == -1.0f);
}
