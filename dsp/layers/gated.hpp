// The gated unit (van den Oord et al. 2016):
//
//   y[c] = tanh(x[c]) ⊙ sigmoid(x[C + c]),   c = 0 … C−1,  2C channels in, C out.
//
// gated_rows is also the gate of every WaveNet layer (wavenet.hpp).
// ---- description part (types.hpp): fields, figures, stream memory, display ----
#ifndef EARSHOT_LAYER_KERNELS
namespace earshot {

struct GatedType {
  static bool parse(LayerFields& f, LayerSpec& L) {
    if (!f.in("channels", L)) return false;
    if (L.in % 2) return f.fail(f.where + ": 'channels' must be even (tanh half and sigmoid half)");
    L.out = L.in / 2;
    return true;
  }
  static LayerCost cost(const LayerSpec&) { return {}; }
  static double stream_bytes(const LayerSpec&) { return 0; }
  template <class W>
  static void describe(const LayerSpec&, W&) {}
  static std::string detail(const LayerSpec&) { return ""; }
};

}  // namespace earshot

// ---- kernel part: included once per variant, inside its namespace (variant_graph.cpp) ----
#else

// y rows [0, C) from x rows [0, 2C): tanh of the first half times sigmoid of the second.
template <class A>
inline void gated_rows(const float* x, float* y, int C, int n) {
  using O = Ops<A>;
  using S = Ops<scalar_arch>;
  for (int c = 0; c < C; ++c) {
    const float* a = x + size_t(c) * kChunk;
    const float* b = x + size_t(C + c) * kChunk;
    float* o = y + size_t(c) * kChunk;
    int t = 0;
    // Two time vectors at once: four tanh chains in flight (tanh_n), the
    // same operations on every value as the one-vector loop below.
    const auto half = O::set1(0.5f);
    for (; t + 2 * O::W <= n; t += 2 * O::W) {
      typename O::V v[4] = {O::load(a + t), O::load(a + t + O::W), O::mul(half, O::load(b + t)),
                            O::mul(half, O::load(b + t + O::W))};
      tanh_n<A, 4>(v);
      O::store(o + t, O::mul(v[0], O::madd(half, v[2], half)));
      O::store(o + t + O::W, O::mul(v[1], O::madd(half, v[3], half)));
    }
    for (; t + O::W <= n; t += O::W)
      O::store(o + t, O::mul(tanh_v<A>(O::load(a + t)), sigmoid_v<A>(O::load(b + t))));
    for (; t < n; ++t) o[t] = S::mul(tanh_v<scalar_arch>(a[t]), sigmoid_v<scalar_arch>(b[t]));
  }
}

template <class A>
struct GatedLayer : Layer {
  int C;
  explicit GatedLayer(const LayerSpec& s) : C(s.in / 2) {}
  void run(const float* x, float* y, int n, const Ctx&) override { gated_rows<A>(x, y, C, n); }
};
#endif  // EARSHOT_LAYER_KERNELS
