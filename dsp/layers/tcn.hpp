// TCN block (Steinmetz & Reiss 2022, made causal):
//   y = act(FiLM(conv(x))) + r,  r = x (in = out), res(x) (1×1, no bias), or 0
// ---- description part (types.hpp): fields, figures, stream memory, display ----
#ifndef EARSHOT_LAYER_KERNELS
namespace earshot {

struct TcnType {
  static bool parse(LayerFields& f, LayerSpec& L) {
    if (!f.in("in", L) || !f.integer("out", L.out, 1, kMaxChannels) || !f.integer("kernel", L.kernel, 1, kMaxKernel) ||
        !f.integer("dilation", L.dilation, 1, kMaxDilation, false, 1) || !f.boolean("residual", L.residual, true))
      return false;
    L.act.fn = ActFn::leaky_relu;
    L.act.slope = 0.2f;
    if (const rapidjson::Value* a = f.member("activation")) {
      if (!a->IsObject()) return f.fail(f.where + ": field 'activation' must be an object {\"fn\": ...}");
      if (!f.activation(*a, L.act, f.where + " activation", "fn")) return false;
      if (!a->HasMember("slope")) L.act.slope = L.act.fn == ActFn::leaky_relu ? 0.2f : 0.01f;
    }
    if (!f.conv_params(L, "conv", L.out, L.in, L.kernel, L.bias)) return false;
    if (const rapidjson::Value* film = f.member("film")) {
      if (!film->IsObject()) return f.fail(f.where + ": field 'film' must be an object");
      L.has_film = true;
      if (!f.mlp(L, film, L.out, "film.")) return false;
    }
    return !(L.residual && L.in != L.out) || f.take(L, "res.weight", {L.out, L.in, 1});
  }
  static LayerCost cost(const LayerSpec& L) {
    LayerCost c;
    c.macs = int64_t(L.out) * L.in * L.kernel;
    if (L.residual && L.in != L.out) c.macs += int64_t(L.out) * L.in;
    c.receptive_field = int64_t(L.kernel - 1) * L.dilation;
    return c;
  }
  static double stream_bytes(const LayerSpec& L) {
    using namespace stream_memory;
    double b = history(L.in, L.kernel, L.dilation) + 2 * kPtr * L.in + kF * L.out * double(kChunk);
    if (L.has_film) b += film(L.film, L.out);
    return b;
  }
  template <class W>
  static void describe(const LayerSpec& L, W& w) {
    conv_describe(L, w);
  }
  static std::string detail(const LayerSpec& L) {
    return conv_detail(L) + (L.has_film ? ", FiLM" : "");
  }
};

}  // namespace earshot

// ---- kernel part: included once per variant, inside its namespace (variant_graph.cpp) ----
#else

template <class A>
struct TcnLayer : Layer {
  ConvUnit<A> conv, res;
  FilmGen film;
  bool has_film, residual, res_conv;
  ActSpec act;
  int in, out;
  std::vector<float> tmp;

  explicit TcnLayer(const LayerSpec& s)
      : has_film(s.has_film), residual(s.residual), res_conv(s.residual && s.in != s.out), act(s.act), in(s.in), out(s.out) {
    conv.init(s.param("conv.weight"), s.bias ? s.param("conv.bias") : nullptr, s.dilation);
    if (res_conv) res.init(s.param("res.weight"), nullptr, 1);
    if (has_film) film.init(s.film, out);
    tmp.assign(size_t(out) * kChunk, 0.0f);
  }
  void run(const float* x, float* y, int n, const Ctx& ctx) override {
    conv.run(x, y, n);
    if (has_film) {
      film.fill(ctx.ctl, n);
      film.template apply<A>(y, n);
    }
    for (int c = 0; c < out; ++c) activate<A>(act, y + size_t(c) * kChunk, y + size_t(c) * kChunk, n);
    if (!residual) return;
    const float* r = x;
    if (res_conv) {
      res.run(x, tmp.data(), n);
      r = tmp.data();
    }
    for (int c = 0; c < out; ++c) add_rows<A>(y + size_t(c) * kChunk, r + size_t(c) * kChunk, y + size_t(c) * kChunk, n);
  }
  void reset() override {
    conv.reset();
    if (has_film) film.reset();
  }
  void state(std::vector<float>& v) const override { conv.values(v); }
};
#endif  // EARSHOT_LAYER_KERNELS
