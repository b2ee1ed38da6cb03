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
#include <type_traits>
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

#include "kernels.hpp"
#include "../layers/layer.hpp"
// Every layer type's kernel part, in table order (dsp/layers/registry.hpp).
#define EARSHOT_LAYER_KERNELS
#include "../layers/registry.hpp"
#undef EARSHOT_LAYER_KERNELS

using Arch = EARSHOT_ARCH;

// A layer of the graph for every lane: one lockstep object holding every
// lane's state (a type with a (spec, lanes) constructor, layer.hpp), or one
// object per lane.
struct Stage {
  std::vector<std::unique_ptr<Layer>> objects;
  bool lockstep = false;
};

template <class L>
Stage make_stage(const LayerSpec& s, int lanes) {
  Stage st;
  if constexpr (std::is_constructible<L, const LayerSpec&, int>::value) {
    st.objects.emplace_back(new L(s, lanes));
    st.lockstep = true;
  } else {
    for (int l = 0; l < lanes; ++l) st.objects.emplace_back(new L(s));
  }
  return st;
}

class GraphRunner final : public Runner {
 public:
  GraphRunner(std::shared_ptr<const Model> m, int lanes) : model_(std::move(m)), lanes_(lanes) {
    const Model& M = *model_;
    for (const LayerSpec& s : M.layers) {
      switch (s.type) {  // one case per row of EARSHOT_LAYER_TYPES (dsp/layers/registry.hpp)
#define EARSHOT_X(type, Name)                                   \
  case LayerType::type:                                         \
    stages_.push_back(make_stage<Name##Layer<Arch>>(s, lanes)); \
    break;
        EARSHOT_LAYER_TYPES(EARSHOT_X)
#undef EARSHOT_X
      }
    }
    const size_t rows = size_t(std::max<int>(M.max_channels, int(M.input_map.size())));
    a_.assign(size_t(lanes) * rows * kChunk, 0.0f);
    b_.assign(size_t(lanes) * rows * kChunk, 0.0f);
    for (int l = 0; l < lanes; ++l) {
      pa_[l] = a_.data() + size_t(l) * rows * kChunk;
      pb_[l] = b_.data() + size_t(l) * rows * kChunk;
    }
  }

  void process(const float* const* audio, const float* ctl, float* const* out, int n) override {
    const Model& M = *model_;
    for (int l = 0; l < lanes_; ++l)
      for (size_t c = 0; c < M.input_map.size(); ++c) {
        const int src = M.input_map[c];
        const float* row = src < 0 ? audio[l] : ctl + size_t(src) * kChunk;
        std::copy(row, row + n, pa_[l] + c * kChunk);
      }
    ctx_.ctl = ctl;
    float** x = pa_;
    float** y = pb_;
    for (auto& st : stages_) {
      if (st.lockstep)
        st.objects[0]->run_lanes(x, y, n, ctx_);
      else
        for (int l = 0; l < lanes_; ++l) st.objects[size_t(l)]->run(x[l], y[l], n, ctx_);
      std::swap(x, y);
    }
    for (int l = 0; l < lanes_; ++l) {
      if (M.input_skip)
        add_rows<Arch>(x[l], audio[l], out[l], n);
      else
        std::copy(x[l], x[l] + n, out[l]);
    }
  }

  int lanes() const override { return lanes_; }
  void reset() override {
    for (auto& st : stages_)
      for (auto& L : st.objects) L->reset();
  }
  // Lane after lane for a runner of stages with one object per lane; a
  // lockstep object lists its lanes itself, in the same order.
  void state_values(std::vector<float>& v) const override {
    for (int l = 0; l < lanes_; ++l)
      for (auto& st : stages_) {
        if (st.lockstep) {
          std::vector<float> all;
          st.objects[0]->state(all);
          const size_t per = all.size() / size_t(lanes_);
          v.insert(v.end(), all.begin() + long(per * size_t(l)), all.begin() + long(per * size_t(l + 1)));
        } else {
          st.objects[size_t(l)]->state(v);
        }
      }
  }
  const char* variant() const override { return EARSHOT_VARIANT_NAME; }

 private:
  std::shared_ptr<const Model> model_;
  int lanes_;
  std::vector<Stage> stages_;
  std::vector<float> a_, b_;  // ping-pong activations, per lane [max_channels][kChunk]
  float* pa_[kMaxLanes] = {};
  float* pb_[kMaxLanes] = {};
  Ctx ctx_;
};

std::unique_ptr<Runner> make(std::shared_ptr<const Model> m, int lanes) {
  return std::unique_ptr<Runner>(new GraphRunner(std::move(m), lanes));
}

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
