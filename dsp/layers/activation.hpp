// Element-wise activation over every channel (identity, tanh, sigmoid, relu,
// leaky_relu, softsign, hardtanh; dsp/core/activations.hpp).
// ---- description part (types.hpp): fields, figures, stream memory, display ----
#ifndef EARSHOT_LAYER_KERNELS
namespace earshot {

struct ActivationType {
  static bool parse(LayerFields& f, LayerSpec& L) {
    if (!f.in("channels", L) || !f.activation(f.object(), L.act, f.where, "fn")) return false;
    L.out = L.in;
    return true;
  }
  static LayerCost cost(const LayerSpec&) { return {}; }
  static double stream_bytes(const LayerSpec&) { return 0; }
  template <class W>
  static void describe(const LayerSpec&, W&) {}
  static std::string detail(const LayerSpec& L) { return activation_text(L.act); }
};

}  // namespace earshot

// ---- kernel part: included once per variant, inside its namespace (variant_graph.cpp) ----
#else

template <class A>
struct ActivationLayer : Layer {
  ActSpec act;
  int ch;
  explicit ActivationLayer(const LayerSpec& s) : act(s.act), ch(s.in) {}
  void run(const float* x, float* y, int n, const Ctx&) override {
    for (int c = 0; c < ch; ++c) activate<A>(act, x + size_t(c) * kChunk, y + size_t(c) * kChunk, n);
  }
};
#endif  // EARSHOT_LAYER_KERNELS
