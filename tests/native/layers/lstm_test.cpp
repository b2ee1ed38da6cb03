// lstm: the equations of PyTorch's nn.LSTM documentation (gate order i, f, g, o)
// against the double-precision reference, one and two levels.
#include "layer_test.hpp"

namespace testfx {
namespace {

Mat oracle(const Reference& r, const rapidjson::Value& L, const Mat& x, const Mat&) {
  const int H = L["hidden"].GetInt();
  return recurrent_oracle(r, L, x, 4, [H](const Vec& gi, const Vec& gh, Vec& h, Vec& c) {
    const Vec z = gi + gh;  // i, f, g, o
    const Vec i = z.segment(0, H).unaryExpr([](double v) { return Reference::sigm(v); });
    const Vec f = z.segment(H, H).unaryExpr([](double v) { return Reference::sigm(v); });
    const Vec g = z.segment(2 * H, H).array().tanh().matrix();
    const Vec o = z.segment(3 * H, H).unaryExpr([](double v) { return Reference::sigm(v); });
    c = f.cwiseProduct(c) + i.cwiseProduct(g);
    h = o.cwiseProduct(c.array().tanh().matrix());
  });
}

void cases(CaseList& list) { recurrent_cases(list, "lstm"); }

const LayerTestEntry entry("lstm", oracle, cases);

}  // namespace
}  // namespace testfx

EARSHOT_LAYER_TEST("lstm")
