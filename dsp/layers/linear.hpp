// Linear layer: y = W x + b per sample (a 1×1 convolution). W: [out][in].
#pragma once

template <class A>
struct LinearLayer : Layer {
  ConvUnit<A> conv;
  explicit LinearLayer(const LayerSpec& s) {
    conv.init(s.param("weight"), s.bias ? s.param("bias") : nullptr, 1);
  }
  void run(const float* x, float* y, int n, const Ctx&) override { conv.run(x, y, n); }
};
