// Base of every layer in a runner. Buffers are channel-major rows of stride
// kChunk: x[c * kChunk + t]. A layer reads `in` rows and writes `out` rows.
//
// Lockstep: a runner of several lanes (streams of one effect, e.g. the two
// channels of a stereo file) keeps one object per lane of most layer types.
// A type whose kernel gains from sharing its weight loads among lanes (the
// recurrent ones) instead has a constructor (const LayerSpec&, int lanes),
// keeps every lane's state and overrides run_lanes; GraphRunner
// (variant_graph.cpp) builds it that way. Each lane's result stays
// bit-identical to the lane run alone.
#pragma once

struct Ctx {
  const float* ctl = nullptr;  // one row of kChunk smoothed values per control, in declaration order
};

struct Layer {
  virtual ~Layer() = default;
  virtual void run(const float* x, float* y, int n, const Ctx& ctx) = 0;
  // Every lane at once (lockstep types only): x[l], y[l] are lane l's rows.
  virtual void run_lanes(const float* const* x, float* const* y, int n, const Ctx& ctx) {
    run(x[0], y[0], n, ctx);
  }
  virtual void reset() {}
  virtual void state(std::vector<float>&) const {}
};
