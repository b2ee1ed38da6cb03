// tcn: the causal TCN block (Steinmetz & Reiss 2022, made causal): dilated conv,
// optional FiLM, activation, residual; against the double-precision reference.
#include "layer_test.hpp"

namespace testfx {
namespace {

Mat oracle(const Reference& r, const rapidjson::Value& L, const Mat& x, const Mat& controls) {
  const std::string name = layer_name(L);
  const int out = L["out"].GetInt(), in = L["in"].GetInt();
  Mat y = r.conv(name + ".conv.weight", name + ".conv.bias", layer_bias(L),
                 L.HasMember("dilation") ? L["dilation"].GetInt() : 1, x);
  if (L.HasMember("film")) y = r.film(&L["film"], name + ".film.", out, y, controls);
  if (L.HasMember("activation")) {
    const auto& a = L["activation"];
    const std::string fn = a["fn"].GetString();
    y = Reference::act_mat(a, "fn", y, fn == "leaky_relu" ? 0.2 : 0.01);
  } else {
    y = y.unaryExpr([](double v) { return v > 0 ? v : 0.2 * v; });
  }
  if (!L.HasMember("residual") || L["residual"].GetBool()) y += in == out ? x : r.conv(name + ".res.weight", "", false, 1, x);
  return y;
}

void cases(CaseList& list) {
  list.add("tcn no film no residual", 0, [](Builder& b) {
    const std::string n = b.layer("tcn", "\"in\":1,\"out\":4,\"kernel\":3,\"dilation\":2,\"residual\":false");
    b.tensor(n + ".conv.weight", {4, 1, 3}, 0.5f);
    b.tensor(n + ".conv.bias", {4}, 0.1f);
    linear(b, 4, 1);
  });
  list.add("tcn film leaky residual", 2, [](Builder& b) {
    tcn(b, 1, 6, 5, 1, true, 2);
    tcn(b, 6, 6, 3, 7, true, 2);
    linear(b, 6, 1);
  });
}

const LayerTestEntry entry("tcn", oracle, cases);

}  // namespace
}  // namespace testfx

EARSHOT_LAYER_TEST("tcn")
