// WaveNet-style gated residual stack (van den Oord et al. 2016; the
// feed-forward form of Damskägg et al. 2019):
//   x = input(x)                         1×1, in → C
//   per layer l: z = conv_l(x)           causal, C → 2C, kernel K, dilation d_l
//                g = tanh(z[0:C]) ⊙ σ(z[C:2C])
//                x = x + res_l(g)        1×1, C → C
//                s = s + skip_l(g)       1×1, C → S
//   output s (S channels)
#pragma once

template <class A>
struct WavenetLayer : Layer {
  struct Level {
    ConvUnit<A> conv, res, skip;
  };
  int C, S;
  ConvUnit<A> input;
  std::vector<Level> levels;
  std::vector<float> x, z, g, tmp;  // [C], [2C], [C], [max(C,S)] rows of kChunk

  explicit WavenetLayer(const LayerSpec& s) : C(s.channels), S(s.skip) {
    auto p = [&](const std::string& k) { return s.param(k); };
    input.init(p("input.weight"), s.bias ? p("input.bias") : nullptr, 1);
    levels.resize(s.dilations.size());
    for (size_t l = 0; l < levels.size(); ++l) {
      const std::string q = "layers." + std::to_string(l);
      levels[l].conv.init(p(q + ".conv.weight"), s.bias ? p(q + ".conv.bias") : nullptr, s.dilations[l]);
      levels[l].res.init(p(q + ".res.weight"), s.bias ? p(q + ".res.bias") : nullptr, 1);
      levels[l].skip.init(p(q + ".skip.weight"), s.bias ? p(q + ".skip.bias") : nullptr, 1);
    }
    x.assign(size_t(C) * kChunk, 0.0f);
    z.assign(size_t(2 * C) * kChunk, 0.0f);
    g.assign(size_t(C) * kChunk, 0.0f);
    tmp.assign(size_t(std::max(C, S)) * kChunk, 0.0f);
  }

  void run(const float* xin, float* y, int n, const Ctx&) override {
    input.run(xin, x.data(), n);
    for (size_t l = 0; l < levels.size(); ++l) {
      levels[l].conv.run(x.data(), z.data(), n);
      gated_rows<A>(z.data(), g.data(), C, n);
      levels[l].res.run(g.data(), tmp.data(), n);
      for (int c = 0; c < C; ++c) add_rows<A>(&x[size_t(c) * kChunk], &tmp[size_t(c) * kChunk], &x[size_t(c) * kChunk], n);
      if (l == 0) {
        levels[l].skip.run(g.data(), y, n);
      } else {
        levels[l].skip.run(g.data(), tmp.data(), n);
        for (int c = 0; c < S; ++c) add_rows<A>(y + size_t(c) * kChunk, &tmp[size_t(c) * kChunk], y + size_t(c) * kChunk, n);
      }
    }
  }
  void reset() override {
    for (auto& L : levels) L.conv.reset();
  }
  void state(std::vector<float>& v) const override {
    for (auto& L : levels) L.conv.values(v);
  }
};
