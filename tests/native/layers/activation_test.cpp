// activation: each element-wise function of dsp/FORMAT.md against its textbook
// definition in double precision (std::tanh, std::exp; common practice, no source).
#include "layer_test.hpp"

namespace testfx {
namespace {

Mat oracle(const Reference&, const rapidjson::Value& L, const Mat& x, const Mat&) {
  return Reference::act_mat(L, "fn", x, 0.01);
}

void cases(CaseList& list) {
  for (const char* fn : {"tanh", "sigmoid", "relu", "leaky_relu", "softsign", "hardtanh"})
    list.add(std::string("activation ") + fn, 0, [fn](Builder& b) {
      linear(b, 1, 4);
      act(b, 4, fn, std::string(fn) == "hardtanh" ? ",\"min\":-0.3,\"max\":0.5" : (std::string(fn) == "leaky_relu" ? ",\"slope\":0.1" : ""));
      linear(b, 4, 1);
    });
}

const LayerTestEntry entry("activation", oracle, cases);

}  // namespace
}  // namespace testfx

EARSHOT_LAYER_TEST("activation")
