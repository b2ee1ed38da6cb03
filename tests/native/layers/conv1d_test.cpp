// conv1d: causal dilated convolution (van den Oord et al. 2016) against the
// double-precision reference, kernels 1/2/3/5 and dilations that are not powers of two.
#include "layer_test.hpp"

namespace testfx {
namespace {

Mat oracle(const Reference& r, const rapidjson::Value& L, const Mat& x, const Mat&) {
  const std::string n = layer_name(L);
  return r.conv(n + ".weight", n + ".bias", layer_bias(L), L.HasMember("dilation") ? L["dilation"].GetInt() : 1, x);
}

void cases(CaseList& list) {
  for (int k : {1, 2, 3, 5})
    for (int d : {1, 3, 7}) {
      if (k == 1 && d > 1) continue;
      list.add("conv1d k" + std::to_string(k) + " d" + std::to_string(d), 0, [k, d](Builder& b) {
        linear(b, 1, 3);
        conv(b, 3, 5, k, d);
        act(b, 5, "tanh");
        linear(b, 5, 1);
      });
    }
}

const LayerTestEntry entry("conv1d", oracle, cases);

}  // namespace
}  // namespace testfx

EARSHOT_LAYER_TEST("conv1d")
