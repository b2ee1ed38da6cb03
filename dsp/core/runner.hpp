// The per-variant part of a stream: the layer graph with its state, compiled
// once per instruction set (variant_graph.cpp). The engine (engine.cpp) feeds it
// model-rate audio and per-sample control values in chunks of at most kChunk.
#pragma once
#include <memory>
#include <string>
#include <vector>

#include "model.hpp"

namespace earshot {

// Samples per internal chunk. The result never depends on it: every output
// sample is computed with the same operations in the same order whatever the
// chunk boundaries (tested by block-size invariance).
constexpr int kChunk = 128;

// Most streams a runner computes in lockstep (EARSHOT_MAX_CHANNELS).
constexpr int kMaxLanes = 8;

class Runner {
 public:
  virtual ~Runner() = default;
  // One call for every lane (a stream of the same effect and settings, e.g.
  // one channel of a stereo file): audio[l][0..n) model-rate input of lane l;
  // ctl: n_controls rows of kChunk values (the smoothed control value at each
  // sample), shared by the lanes; out[l][0..n). n <= kChunk. Each lane's
  // output is bit-identical to a runner of one lane fed that lane alone.
  virtual void process(const float* const* audio, const float* ctl, float* const* out, int n) = 0;
  virtual int lanes() const = 0;
  virtual void reset() = 0;
  // Every stored state value (recurrent state, convolution history), for tests.
  virtual void state_values(std::vector<float>& out) const = 0;
  virtual const char* variant() const = 0;
};

// Builds the runner of the named variant for `lanes` (1..kMaxLanes) lockstep
// streams; null with `error` set when the name is unknown here or the CPU
// cannot run it.
std::unique_ptr<Runner> make_runner(std::shared_ptr<const Model> model, const std::string& variant, int lanes,
                                    std::string& error);

// The variant make_runner uses for an empty name.
std::string default_variant();

}  // namespace earshot
