// Base of every layer in a runner. Buffers are channel-major rows of stride
// kChunk: x[c * kChunk + t]. A layer reads `in` rows and writes `out` rows.
#pragma once

struct Ctx {
  const float* ctl = nullptr;  // one row of kChunk smoothed values per control, in declaration order
};

struct Layer {
  virtual ~Layer() = default;
  virtual void run(const float* x, float* y, int n, const Ctx& ctx) = 0;
  virtual void reset() {}
  virtual void state(std::vector<float>&) const {}
};
