// FiLM (Perez et al. 2018): y = γ ⊙ x + β, with [γ; β] computed from the
// controls by a small MLP (FilmGen), re-evaluated only when the controls move.
#pragma once

template <class A>
struct FilmLayer : Layer {
  FilmGen gen;
  int C;
  explicit FilmLayer(const LayerSpec& s) : C(s.in) { gen.init(s.film, C); }
  void run(const float* x, float* y, int n, const Ctx& ctx) override {
    gen.fill(ctx.ctl, n);
    if (x != y)
      for (int c = 0; c < C; ++c) std::copy(x + size_t(c) * kChunk, x + size_t(c) * kChunk + n, y + size_t(c) * kChunk);
    gen.template apply<A>(y, n);
  }
  void reset() override { gen.reset(); }
};
