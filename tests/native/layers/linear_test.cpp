// linear: y = W x + b against the double-precision reference (a 1×1 convolution).
#include "layer_test.hpp"

namespace testfx {
namespace {

Mat oracle(const Reference& r, const rapidjson::Value& L, const Mat& x, const Mat&) {
  const std::string n = layer_name(L);
  return r.conv(n + ".weight", n + ".bias", layer_bias(L), 1, x);
}

void cases(CaseList& list) {
  list.add("linear 1-5-1", 0, [](Builder& b) { linear(b, 1, 5); act(b, 5, "tanh"); linear(b, 5, 1); });
  list.add("linear no bias", 0, [](Builder& b) { linear(b, 1, 3, false); act(b, 3, "softsign"); linear(b, 3, 1, false); });
}

const LayerTestEntry entry("linear", oracle, cases);

}  // namespace
}  // namespace testfx

EARSHOT_LAYER_TEST("linear")
