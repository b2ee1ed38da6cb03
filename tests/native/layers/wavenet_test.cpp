// wavenet: the gated residual stack of van den Oord et al. 2016 (input 1×1,
// per layer dilated conv → gated → 1×1 residual and 1×1 skip, skips summed)
// against the double-precision reference.
#include "layer_test.hpp"

namespace testfx {
namespace {

Mat oracle(const Reference& r, const rapidjson::Value& L, const Mat& x, const Mat&) {
  const std::string name = layer_name(L);
  const bool bias = layer_bias(L);
  Mat h = r.conv(name + ".input.weight", name + ".input.bias", bias, 1, x);
  Mat s;
  const auto& dil = L["dilations"];
  for (unsigned l = 0; l < dil.Size(); ++l) {
    const std::string p = name + ".layers." + std::to_string(l);
    const Mat g = Reference::gated(r.conv(p + ".conv.weight", p + ".conv.bias", bias, dil[l].GetInt(), h));
    h = h + r.conv(p + ".res.weight", p + ".res.bias", bias, 1, g);
    const Mat sk = r.conv(p + ".skip.weight", p + ".skip.bias", bias, 1, g);
    s = l == 0 ? sk : Mat(s + sk);
  }
  return s;
}

void cases(CaseList& list) {
  // The feed-forward WaveNet family (Damskägg et al. 2019): stack and linear head.
  list.add("wavenet k3 five layers", 0, [](Builder& b) {
    wavenet(b, 1, 6, 5, 3, {1, 2, 5, 7, 12});
    linear(b, 5, 1);
  });
}

const LayerTestEntry entry("wavenet", oracle, cases);

}  // namespace
}  // namespace testfx

EARSHOT_LAYER_TEST("wavenet")
