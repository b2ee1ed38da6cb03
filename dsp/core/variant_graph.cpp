// One variant of the processing code: this file is compiled once per
// instruction set, each time with EARSHOT_NS naming the variant's namespace,
// EARSHOT_ARCH its arch tag, EARSHOT_XSIMD whether xsimd batches are used and
// EARSHOT_FUSED whether multiply-add is fused (CMakeLists.txt). Every layer
// header is included inside that namespace so variants never share code.
#include <algorithm>
#include <chrono>
#include <cstring>
#include <memory>
#include <string>
#include <vector>

#include "cpu_variants.hpp"
#include "runner.hpp"

#if EARSHOT_XSIMD
#include <xsimd/xsimd.hpp>
#endif

#ifndef EARSHOT_NS
#error "define EARSHOT_NS, EARSHOT_ARCH and EARSHOT_VARIANT_NAME"
#endif

namespace earshot {
namespace EARSHOT_NS {

#include "simd.hpp"
#include "activations.hpp"

// [rows][cols] → [cols][rows]
inline std::vector<float> transpose(const Tensor& t) {
  const int rows = t.shape[0], cols = t.shape[1];
  std::vector<float> o(t.data.size());
  for (int r = 0; r < rows; ++r)
    for (int c = 0; c < cols; ++c) o[size_t(c) * rows + r] = t.data[size_t(r) * cols + c];
  return o;
}

#include "kernels.hpp"
#include "../layers/layer.hpp"
// Every layer type's kernel part, in table order (dsp/layers/registry.hpp).
#define EARSHOT_LAYER_KERNELS
#include "../layers/registry.hpp"
#undef EARSHOT_LAYER_KERNELS

using Arch = EARSHOT_ARCH;

class GraphRunner final : public Runner {
 public:
  explicit GraphRunner(std::shared_ptr<const Model> m) : model_(std::move(m)) {
    const Model& M = *model_;
    for (const LayerSpec& s : M.layers) {
      switch (s.type) {  // one case per row of EARSHOT_LAYER_TYPES (dsp/layers/registry.hpp)
#define EARSHOT_X(type, Name)                           \
  case LayerType::type:                                 \
    layers_.emplace_back(new Name##Layer<Arch>(s));     \
    break;
        EARSHOT_LAYER_TYPES(EARSHOT_X)
#undef EARSHOT_X
      }
    }
    const size_t rows = size_t(std::max<int>(M.max_channels, int(M.input_map.size())));
    a_.assign(rows * kChunk, 0.0f);
    b_.assign(rows * kChunk, 0.0f);
  }

  void process(const float* audio, const float* ctl, float* out, int n) override {
    const Model& M = *model_;
    for (size_t c = 0; c < M.input_map.size(); ++c) {
      const int src = M.input_map[c];
      const float* row = src < 0 ? audio : ctl + size_t(src) * kChunk;
      std::copy(row, row + n, a_.data() + c * kChunk);
    }
    ctx_.ctl = ctl;
    float* x = a_.data();
    float* y = b_.data();
    for (auto& L : layers_) {
      L->run(x, y, n, ctx_);
      std::swap(x, y);
    }
    if (M.input_skip)
      add_rows<Arch>(x, audio, out, n);
    else
      std::copy(x, x + n, out);
  }

  void reset() override {
    for (auto& L : layers_) L->reset();
  }
  void state_values(std::vector<float>& v) const override {
    for (auto& L : layers_) L->state(v);
  }
  const char* variant() const override { return EARSHOT_VARIANT_NAME; }

 private:
  std::shared_ptr<const Model> model_;
  std::vector<std::unique_ptr<Layer>> layers_;
  std::vector<float> a_, b_;  // ping-pong activations, [max_channels][kChunk]
  Ctx ctx_;
};

std::unique_ptr<Runner> make(std::shared_ptr<const Model> m) { return std::unique_ptr<Runner>(new GraphRunner(std::move(m))); }

#ifndef __EMSCRIPTEN__
// Multiply-adds per second of independent in-register chains (no memory
// traffic): the ceiling the dense kernels are measured against.
double peak_madd_rate(double seconds) {
  using O = Ops<Arch>;
  using V = typename O::V;
  constexpr int N = 12;  // enough independent chains to cover the add and multiply latencies
  V acc[N];
  for (int k = 0; k < N; ++k) acc[k] = O::set1(0.001f * float(k + 1));
  const V m = O::set1(0.999999f), c = O::set1(1e-6f);
  const long inner = 1 << 16;
  long rounds = 0;
  const double t0 = thread_seconds();
  double el = 0;
  do {
    for (long r = 0; r < inner; ++r)
      for (int k = 0; k < N; ++k) acc[k] = O::madd(acc[k], m, c);
    ++rounds;
    el = thread_seconds() - t0;
  } while (el < seconds);
  float sink[O::W];
  V s = acc[0];
  for (int k = 1; k < N; ++k) s = O::add(s, acc[k]);
  O::store(sink, s);
  volatile float keep = sink[0];
  (void)keep;
  return double(rounds) * inner * N * O::W / el;
}
#endif

}  // namespace EARSHOT_NS
}  // namespace earshot
