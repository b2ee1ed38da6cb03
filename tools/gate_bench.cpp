// The gate activation alone: nanoseconds per 8-wide vector of tanh_n<avx2, N>
// (dsp/core/activations.hpp) over a 256-float row kept in L1, for N = 1, 2,
// 4 and 8, and of the division alone, best of 7 runs. docs/benchmarks.md
// uses it to say what the recurrent gate passes cost against their bound.
//
// Build and run (one command; from the repository's root):
//   g++ -std=c++17 -O3 -mavx2 -mno-avx256-split-unaligned-load
//       -mno-avx256-split-unaligned-store -ffp-contract=off -DEARSHOT_NS=v_gb
//       -DEARSHOT_XSIMD=1 -DEARSHOT_FUSED=0 -Idsp/core -Idsp/include
//       tools/gate_bench.cpp -o build/gate_bench && build/gate_bench
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <vector>

#include <xsimd/xsimd.hpp>

#include "model.hpp"
namespace earshot {
namespace v_gb {
#include "simd.hpp"
#include "activations.hpp"
}  // namespace v_gb
}  // namespace earshot
using namespace earshot::v_gb;
using A = xsimd::avx2;
using O = Ops<A>;

template <int N>
__attribute__((noinline)) void tanh_pass(float* x, int n) {
  for (int t = 0; t + N * O::W <= n; t += N * O::W) {
    O::V v[N];
    for (int k = 0; k < N; ++k) v[k] = O::load(x + t + k * O::W);
    tanh_n<A, N>(v);
    for (int k = 0; k < N; ++k) O::store(x + t + k * O::W, v[k]);
  }
}

__attribute__((noinline)) void div_pass(float* x, int n) {
  for (int t = 0; t + 4 * O::W <= n; t += 4 * O::W) {
    O::V v[4];
    for (int k = 0; k < 4; ++k) v[k] = O::div(O::set1(1.0f), O::load(x + t + k * O::W));
    for (int k = 0; k < 4; ++k) O::store(x + t + k * O::W, v[k]);
  }
}

// Best time per vector of f over a row of n floats, refilled with values in
// −0.4 … 0.56 before each run (repeated tanh shrinks them slowly, never to
// subnormals; the operations do not depend on the values).
template <class F>
double ns_per_vector(F f, int n) {
  std::vector<float> a(static_cast<size_t>(n));
  double best = 1e9;
  for (int r = 0; r < 7; ++r) {
    for (int i = 0; i < n; ++i) a[size_t(i)] = 0.01f * float(i % 97) - 0.4f;
    const auto t0 = std::chrono::steady_clock::now();
    for (int it = 0; it < 20000; ++it) f(a.data(), n);
    const double s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    best = std::min(best, s / 20000.0 / double(n / O::W));
  }
  return best * 1e9;
}

int main() {
  const int n = 256;
  std::printf("ns per 8-wide vector: tanh N=1 %.3f, N=2 %.3f, N=4 %.3f, N=8 %.3f; division alone %.3f\n",
              ns_per_vector(tanh_pass<1>, n), ns_per_vector(tanh_pass<2>, n), ns_per_vector(tanh_pass<4>, n),
              ns_per_vector(tanh_pass<8>, n), ns_per_vector(div_pass, n));
}
