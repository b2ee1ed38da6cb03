// gru: the equations of PyTorch's nn.GRU documentation (gate order r, z, n)
// against the double-precision reference, one and two levels.
#include "layer_test.hpp"

namespace testfx {
namespace {

Mat oracle(const Reference& r, const rapidjson::Value& L, const Mat& x, const Mat&) {
  const int H = L["hidden"].GetInt();
  return recurrent_oracle(r, L, x, 3, [H](const Vec& gi, const Vec& gh, Vec& h, Vec&) {
    const Vec rr = (gi.segment(0, H) + gh.segment(0, H)).unaryExpr([](double v) { return Reference::sigm(v); });
    const Vec z = (gi.segment(H, H) + gh.segment(H, H)).unaryExpr([](double v) { return Reference::sigm(v); });
    const Vec n = (gi.segment(2 * H, H) + rr.cwiseProduct(gh.segment(2 * H, H))).array().tanh().matrix();
    h = (Vec::Ones(H) - z).cwiseProduct(n) + z.cwiseProduct(h);
  });
}

void cases(CaseList& list) { recurrent_cases(list, "gru"); }

const LayerTestEntry entry("gru", oracle, cases);

}  // namespace
}  // namespace testfx

EARSHOT_LAYER_TEST("gru")
