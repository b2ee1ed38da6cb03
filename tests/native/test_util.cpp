// Shared test helpers (signal generator).
#include <cmath>

#include "effect_builder.hpp"

namespace testfx {
std::vector<float> test_signal(int n, double rate, uint32_t seed) {
  std::mt19937 rng(seed);
  std::normal_distribution<double> g(0.0, 0.15);
  std::vector<float> x(static_cast<size_t>(n));
  const double pi = 3.14159265358979323846;
  for (int t = 0; t < n; ++t) {
    const double s = t / rate;
    const double tone = 0.3 * std::exp(-3.0 * std::fmod(s, 0.5)) * std::sin(2 * pi * 220 * s);
    const double sweep = 0.15 * std::sin(2 * pi * (50 * s + 2000 * s * s));
    const double burst = (int(s * 8) % 3 == 0) ? g(rng) : 0.0;
    x[size_t(t)] = float(0.5 * (tone + sweep + burst));
  }
  return x;
}
}  // namespace testfx

#include "cpu_variants.hpp"
#include "stream_util.hpp"

namespace testfx {
std::vector<std::string> parity_variants() {
  std::vector<std::string> v;
  for (const char* n : {"scalar", "sse4", "avx2"})
    if (earshot::variant_supported(n)) v.push_back(n);
  return v;
}
}  // namespace testfx
