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

// N vectors of outputs at o from N of the tanh half at a and N of the
// sigmoid half at b: one tanh_n over all 2N, so 2N chains are in flight.
template <class A, int N>
inline void gated_group(const float* a, const float* b, float* o) {
  using O = Ops<A>;
  typename O::V v[2 * N];
  for (int k = 0; k < N; ++k) v[k] = O::load(a + k * O::W);
  for (int k = 0; k < N; ++k) v[N + k] = sigmoid_arg<A>(O::load(b + k * O::W));
  tanh_n<A, 2 * N>(v);
  for (int k = 0; k < N; ++k) O::store(o + k * O::W, O::mul(v[k], sigmoid_from_tanh<A>(v[N + k])));
}

// y rows [0, C) from x rows [0, 2C): tanh of the first half times sigmoid of
// the second; two time vectors at a time, then one, then a scalar tail (the
// same operations on every value).
template <class A>
inline void gated_rows(const float* x, float* y, int C, int n) {
  constexpr int W = Ops<A>::W;
  for (int c = 0; c < C; ++c) {
    const float* a = x + size_t(c) * kChunk;
    const float* b = x + size_t(C + c) * kChunk;
    float* o = y + size_t(c) * kChunk;
    int t = 0;
    for (; t + 2 * W <= n; t += 2 * W) gated_group<A, 2>(a + t, b + t, o + t);
    for (; t + W <= n; t += W) gated_group<A, 1>(a + t, b + t, o + t);
    for (; t < n; ++t) gated_group<scalar_arch, 1>(a + t, b + t, o + t);
  }
}

template <class A>
struct GatedLayer : Layer {
  int C;
  explicit GatedLayer(const LayerSpec& s) : C(s.in / 2) {}
  void run(const float* x, float* y, int n, const Ctx&) override { gated_rows<A>(x, y, C, n); }
};
#endif  // EARSHOT_LAYER_KERNELS
