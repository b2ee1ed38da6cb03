// Linear layer: y = W x + b per sample (a 1×1 convolution). W: [out][in].
// ---- description part (types.hpp): fields, figures, stream memory, display ----
#ifndef EARSHOT_LAYER_KERNELS
namespace earshot {

struct LinearType {
  static bool parse(LayerFields& f, LayerSpec& L) {
    if (!f.in("in", L) || !f.integer("out", L.out, 1, kMaxChannels)) return false;
    return f.take(L, "weight", {L.out, L.in}) && (!L.bias || f.take(L, "bias", {L.out}));
  }
  static LayerCost cost(const LayerSpec& L) {
    LayerCost c;
    c.macs = int64_t(L.out) * L.in;
    return c;
  }
  static double stream_bytes(const LayerSpec& L) { return stream_memory::kPtr * L.in; }
  template <class W>
  static void describe(const LayerSpec&, W&) {}
  static std::string detail(const LayerSpec& L) { return L.bias ? "" : "no bias"; }
};

}  // namespace earshot

// ---- kernel part: included once per variant, inside its namespace (variant_graph.cpp) ----
#else

template <class A>
struct LinearLayer : Layer {
  ConvUnit<A> conv;
  explicit LinearLayer(const LayerSpec& s) {
    conv.init(s.param("weight"), s.bias ? s.param("bias") : nullptr, 1);
  }
  void run(const float* x, float* y, int n, const Ctx&) override { conv.run(x, y, n); }
};
#endif  // EARSHOT_LAYER_KERNELS
