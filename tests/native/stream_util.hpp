// Running a stream through the C ABI in tests: blocks, control events, variants.
#pragma once
#include <functional>
#include <memory>
#include <random>
#include <string>
#include <vector>

#include "earshot/earshot.h"
#include "effect_builder.hpp"

namespace testfx {

struct StreamDeleter {
  void operator()(earshot_stream* s) const { earshot_destroy(s); }
};
using StreamPtr = std::unique_ptr<earshot_stream, StreamDeleter>;

inline StreamPtr open(const std::vector<unsigned char>& bytes, const std::string& variant, double rate,
                      std::string* error = nullptr) {
  char err[512] = {0};
  StreamPtr s(earshot_create(bytes.data(), bytes.size(), rate, variant.c_str(), err, sizeof err));
  if (error) *error = err;
  return s;
}

struct ControlEvent {
  int at;       // sample position (host rate) where the new target takes effect
  int index;
  float value;
};

// Processes x in blocks whose sizes come from next_block (called repeatedly),
// applying control events at their positions (a block is cut at each event).
inline std::vector<float> run(earshot_stream* s, const std::vector<float>& x, const std::function<int()>& next_block,
                              const std::vector<ControlEvent>& events = {}) {
  std::vector<float> y(x.size());
  size_t e = 0;
  int t = 0;
  const int n = int(x.size());
  while (t < n) {
    while (e < events.size() && events[e].at <= t) {
      earshot_set_control(s, events[e].index, events[e].value);
      ++e;
    }
    int b = std::max(1, next_block());
    b = std::min(b, n - t);
    if (e < events.size()) b = std::min(b, events[e].at - t);
    earshot_process(s, x.data() + t, y.data() + t, b);
    t += b;
  }
  return y;
}

inline std::function<int()> fixed(int b) {
  return [b] { return b; };
}

inline std::function<int()> random_blocks(uint32_t seed, int max_block) {
  auto rng = std::make_shared<std::mt19937>(seed);
  return [rng, max_block] {
    std::uniform_int_distribution<int> small(1, 16), big(1, max_block), pick(0, 3);
    return pick(*rng) == 0 ? small(*rng) : big(*rng);
  };
}

inline bool identical(const std::vector<float>& a, const std::vector<float>& b, size_t* first = nullptr) {
  if (a.size() != b.size()) return false;
  for (size_t i = 0; i < a.size(); ++i)
    if (std::memcmp(&a[i], &b[i], 4) != 0) {
      if (first) *first = i;
      return false;
    }
  return true;
}

// The parity variants this CPU runs, always including scalar.
std::vector<std::string> parity_variants();

}  // namespace testfx
