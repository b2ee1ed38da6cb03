// Element-wise activation over every channel (tanh, sigmoid, relu, leaky_relu,
// softsign, hardtanh), and the gated unit y = tanh(x[0:C]) ⊙ sigmoid(x[C:2C]).
#pragma once

template <class A>
struct ActivationLayer : Layer {
  ActSpec act;
  int ch;
  explicit ActivationLayer(const LayerSpec& s) : act(s.act), ch(s.in) {}
  void run(const float* x, float* y, int n, const Ctx&) override {
    for (int c = 0; c < ch; ++c) activate<A>(act, x + size_t(c) * kChunk, y + size_t(c) * kChunk, n);
  }
};

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
