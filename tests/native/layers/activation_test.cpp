// activation: each element-wise function of dsp/FORMAT.md against its textbook
// definition in double precision (std::tanh, std::exp; common practice, no source).
#include <cstring>

#include "layer_test.hpp"
#include "stream_util.hpp"

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

// Signed zeros at hardtanh's bounds. min and max are defined as
// select(a < b, a, b) and select(a > b, a, b) (dsp/core/simd.hpp), so a bound
// of +0 meets an input of −0 as "not less, not greater" and the bound wins:
// hardtanh(−0) with min 0 is +0, and with max 0 too. The vector variants
// compute min and max with MINPS/MAXPS (x86) and f32x4.pmin/pmax
// (WebAssembly, tests/node/parity.test.mjs); operands the other way round
// would give −0. The first effect (bounds ±1) checks that −0 reaches the
// output as −0, so the other two can fail.
TEST_CASE("hardtanh at signed-zero bounds: the bound wins, in every variant", "[layers]") {
  using testfx::Builder;
  const auto bits = [](float f) {
    uint32_t u;
    std::memcpy(&u, &f, 4);
    return u;
  };
  struct Bounds {
    const char* fields;
    uint32_t neg_zero_out;  // the output's bits for an input of −0
  } cases[] = {{",\"min\":-1,\"max\":1", 0x80000000u}, {",\"min\":0,\"max\":1", 0u}, {",\"min\":-1,\"max\":0", 0u}};
  // −0 and +0 in every lane position of a vector and of the scalar tail.
  std::vector<float> x(37);
  for (size_t i = 0; i < x.size(); ++i) x[i] = i % 3 ? -0.0f : 0.0f;
  for (const auto& c : cases) {
    Builder b(1);
    testfx::act(b, 1, "hardtanh", c.fields);
    const auto bytes = b.build().bytes();
    for (const auto& v : testfx::parity_variants()) {
      auto s = testfx::open(bytes, v, 48000);
      REQUIRE(s);
      const auto y = testfx::run(s.get(), x, testfx::fixed(int(x.size())));
      for (size_t i = 0; i < x.size(); ++i) {
        INFO(v << " hardtanh" << c.fields << " sample " << i);
        CHECK(bits(y[i]) == (i % 3 ? c.neg_zero_out : 0u));
      }
    }
  }
}
