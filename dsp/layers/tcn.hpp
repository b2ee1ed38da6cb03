// TCN block (Steinmetz & Reiss 2022, made causal):
//   y = act(FiLM(conv(x))) + r,  r = x (in = out), res(x) (1×1, no bias), or 0
#pragma once

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
