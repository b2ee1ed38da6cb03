// Element-wise activation over every channel (identity, tanh, sigmoid, relu,
// leaky_relu, softsign, hardtanh; dsp/core/activations.hpp).
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
