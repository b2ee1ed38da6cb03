// film: y = γ ⊙ x + β with [γ; β] an MLP of the controls (Perez et al. 2018)
// against the double-precision reference, with and without a hidden layer.
#include "layer_test.hpp"

namespace testfx {
namespace {

Mat oracle(const Reference& r, const rapidjson::Value& L, const Mat& x, const Mat& controls) {
  return r.film(&L, layer_name(L) + ".", L["channels"].GetInt(), x, controls);
}

void cases(CaseList& list) {
  list.add("film 2 controls", 2, [](Builder& b) { linear(b, 1, 4); film(b, 4, {5}, 2); act(b, 4, "tanh"); linear(b, 4, 1); });
  list.add("film no hidden", 2, [](Builder& b) { linear(b, 1, 3); film(b, 3, {}, 2); linear(b, 3, 1); });
}

const LayerTestEntry entry("film", oracle, cases);

}  // namespace
}  // namespace testfx

EARSHOT_LAYER_TEST("film")
