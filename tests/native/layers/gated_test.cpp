// gated: tanh of the first half times sigmoid of the second (van den Oord et al.
// 2016) against the double-precision reference.
#include "layer_test.hpp"

namespace testfx {
namespace {

Mat oracle(const Reference&, const rapidjson::Value&, const Mat& x, const Mat&) { return Reference::gated(x); }

void cases(CaseList& list) {
  list.add("gated 6-3", 0, [](Builder& b) { linear(b, 1, 6); b.layer("gated", "\"channels\":6"); linear(b, 3, 1); });
}

const LayerTestEntry entry("gated", oracle, cases);

}  // namespace
}  // namespace testfx

EARSHOT_LAYER_TEST("gated")
