// Causal dilated Conv1d: y[t] = b + Σ_k W[:,:,k]·x[t − (K−1−k)·d], the input
// history kept per channel (History). Same as PyTorch Conv1d with left zero
// padding (K−1)·d.
// ---- description part (types.hpp): fields, figures, stream memory, display ----
#ifndef EARSHOT_LAYER_KERNELS
namespace earshot {

struct Conv1dType {
  static bool parse(LayerFields& f, LayerSpec& L) {
    if (!f.in("in", L) || !f.integer("out", L.out, 1, kMaxChannels) || !f.integer("kernel", L.kernel, 1, kMaxKernel) ||
        !f.integer("dilation", L.dilation, 1, kMaxDilation, false, 1))
      return false;
    return f.conv_params(L, "", L.out, L.in, L.kernel, L.bias);
  }
  static LayerCost cost(const LayerSpec& L) {
    LayerCost c;
    c.macs = int64_t(L.out) * L.in * L.kernel;
    c.receptive_field = int64_t(L.kernel - 1) * L.dilation;
    return c;
  }
  static double stream_bytes(const LayerSpec& L) {
    return stream_memory::history(L.in, L.kernel, L.dilation) + stream_memory::kPtr * L.in;
  }
  template <class W>
  static void describe(const LayerSpec& L, W& w) {
    conv_describe(L, w);
  }
  static std::string detail(const LayerSpec& L) {
    return conv_detail(L) + (L.bias ? "" : ", no bias");
  }
};

}  // namespace earshot

// ---- kernel part: included once per variant, inside its namespace (variant_graph.cpp) ----
#else

template <class A>
struct Conv1dLayer : Layer {
  ConvUnit<A> conv;
  explicit Conv1dLayer(const LayerSpec& s) { conv.init(s.param("weight"), s.bias ? s.param("bias") : nullptr, s.dilation); }
  void run(const float* x, float* y, int n, const Ctx&) override { conv.run(x, y, n); }
  void reset() override { conv.reset(); }
  void state(std::vector<float>& v) const override { conv.values(v); }
};
#endif  // EARSHOT_LAYER_KERNELS
