// Causal dilated Conv1d: y[t] = b + Σ_k W[:,:,k]·x[t − (K−1−k)·d], the input
// history kept per channel (History). Same as PyTorch Conv1d with left zero
// padding (K−1)·d.
#pragma once

template <class A>
struct Conv1dLayer : Layer {
  ConvUnit<A> conv;
  explicit Conv1dLayer(const LayerSpec& s) { conv.init(s.param("weight"), s.bias ? s.param("bias") : nullptr, s.dilation); }
  void run(const float* x, float* y, int n, const Ctx&) override { conv.run(x, y, n); }
  void reset() override { conv.reset(); }
  void state(std::vector<float>& v) const override { conv.values(v); }
};
