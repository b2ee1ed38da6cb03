// Proves the stream's promises: block-size invariance (with control changes and
// resampling), control smoothing against the reference, no subnormal state after
// silence, the non-finite guard, refused bad values leave the stream intact,
// dry/wet and gains, and latency-aligned dry path when resampling.
#include <catch2/catch.hpp>
#include <cmath>
#include <cstdio>

#include "cases.hpp"
#include "reference.hpp"
#include "stream_util.hpp"

void earshot_test_state_values(const earshot_stream* s, std::vector<float>& out);

using namespace testfx;

namespace {

// The core's ramp (dsp/FORMAT.md, "Control smoothing"), replayed in float32.
Eigen::MatrixXd trajectory(int T, const std::vector<float>& start, const std::vector<ControlEvent>& ev, int steps) {
  Eigen::MatrixXd m(start.size(), T);
  for (size_t c = 0; c < start.size(); ++c) {
    float cur = start[c], target = start[c], inc = 0;
    int left = 0;
    size_t e = 0;
    for (int t = 0; t < T; ++t) {
      for (e = 0; e < ev.size(); ++e)
        if (ev[e].at == t && ev[e].index == int(c)) {
          target = ev[e].value;
          if (steps <= 0) {
            cur = target;
            left = 0;
          } else {
            inc = (target - cur) / float(steps);
            left = steps;
          }
        }
      if (left > 0) {
        --left;
        cur = left == 0 ? target : cur + inc;
      }
      m(Eigen::Index(c), t) = cur;
    }
  }
  return m;
}

Effect identity_effect(int rate) {
  Builder b(5, rate);
  linear(b, 1, 1, false);
  Effect fx = b.build();
  fx.tensors.begin()->second.values = {1.0f};
  return fx;
}

}  // namespace

TEST_CASE("any block partition gives bit-identical output, with control changes") {
  const int T = 12000;
  const std::vector<float> x = test_signal(T);
  const std::vector<ControlEvent> ev{{1000, 0, 0.9f}, {1500, 1, -0.5f}, {5001, 0, 0.1f}, {5002, 1, 1.0f}};
  for (double rate : {48000.0, 44100.0}) {
    for (const Case& c : all_cases(7.5f)) {
      CAPTURE(c.name, rate);
      const auto bytes = c.fx.bytes();
      const auto events = c.n_controls ? ev : std::vector<ControlEvent>{};
      auto whole = open(bytes, "", rate);
      REQUIRE(whole);
      const std::vector<float> ref = run(whole.get(), x, fixed(T), events);
      int trial = 0;
      for (auto blocks : {fixed(1), fixed(127), random_blocks(11, 700), random_blocks(12, 65536), random_blocks(13, 5)}) {
        CAPTURE(trial++);
        auto s = open(bytes, "", rate);
        const std::vector<float> y = run(s.get(), x, blocks, events);
        size_t at = 0;
        const bool same = identical(ref, y, &at);
        INFO("first difference at sample " << at);
        CHECK(same);
      }
    }
  }
}

TEST_CASE("mid-stream control changes follow the smoothed trajectory of the reference") {
  const int T = 9600;
  const std::vector<float> x = test_signal(T);
  const float ms = 10;
  const int steps = int(ms / 1000 * 48000 + 0.5);
  const std::vector<ControlEvent> ev{{1000, 0, 0.9f}, {1200, 1, -0.5f}, {1300, 0, 0.2f}, {6000, 1, 0.8f}};
  for (const Case& c : all_cases(ms)) {
    if (c.n_controls == 0) continue;
    CAPTURE(c.name);
    auto s = open(c.fx.bytes(), "", 48000);
    REQUIRE(s);
    const std::vector<float> y = run(s.get(), x, random_blocks(3, 300), ev);
    Reference ref(c.fx);
    const auto want = ref.run(x, trajectory(T, {0.3f, 0.4f}, ev, steps));
    const double e = esr_db(want, y);
    CAPTURE(e);
    CHECK(e <= -100.0);
    // And the change is audible: the same input with constant controls differs.
    auto s2 = open(c.fx.bytes(), "", 48000);
    const std::vector<float> y2 = run(s2.get(), x, fixed(512));
    CHECK_FALSE(identical(y, y2));
  }
}

TEST_CASE("recurrent state and filter memories hold no subnormals after loud input then silence") {
  // LSTM and GRU with zero biases: in silence the state decays geometrically
  // towards 0 and, without the guard, passes through the subnormal range.
  for (const char* type : {"lstm", "gru"}) {
    CAPTURE(type);
    Builder b(21);
    recurrent(b, type, 1, 8, 2);
    linear(b, 8, 1);
    Effect fx = b.build();
    for (auto& kv : fx.tensors)
      if (kv.first.find("bias") != std::string::npos)
        std::fill(kv.second.values.begin(), kv.second.values.end(), 0.0f);
    auto s = open(fx.bytes(), "", 48000);
    REQUIRE(s);
    std::vector<float> loud(4800, 0.9f), silence(48000, 0.0f), out(48000);
    for (size_t i = 0; i < loud.size(); ++i) loud[i] = (i % 100 < 50) ? 0.9f : -0.9f;
    earshot_process(s.get(), loud.data(), out.data(), int(loud.size()));
    std::vector<float> st;
    int zeros = 0;
    for (int k = 0; k < 48; ++k) {
      earshot_process(s.get(), silence.data(), out.data(), 1000);
      earshot_test_state_values(s.get(), st);
      REQUIRE(!st.empty());
      for (float v : st) {
        REQUIRE(std::fpclassify(v) != FP_SUBNORMAL);
        zeros += v == 0.0f;
      }
    }
    // The decay reached the flush threshold (so the guard was exercised).
    CHECK(zeros > 0);
  }
  // Convolution history fed a geometrically decaying input that crosses the
  // subnormal range (0.9^t reaches 1e-38 after ~830 samples).
  Builder b(22);
  conv(b, 1, 3, 3, 5);
  wavenet(b, 3, 4, 2, 3, {1, 2});
  linear(b, 2, 1);
  auto s = open(b.build().bytes(), "", 48000);
  REQUIRE(s);
  std::vector<float> in(2000), out(2000), st;
  float v = 1.0f;
  for (auto& e : in) {
    e = v;
    v *= 0.9f;
  }
  for (int t = 0; t < 2000; t += 10) {
    earshot_process(s.get(), in.data() + t, out.data() + t, 10);
    earshot_test_state_values(s.get(), st);
    for (float q : st) REQUIRE(std::fpclassify(q) != FP_SUBNORMAL);
  }
}

TEST_CASE("a non-finite result silences that block, resets the state and is counted") {
  const Case c = all_cases()[0];
  auto s = open(c.fx.bytes(), "", 48000);
  auto fresh = open(c.fx.bytes(), "", 48000);
  REQUIRE(s);
  std::vector<float> x = test_signal(1024), y(1024), z(1024);
  earshot_process(s.get(), x.data(), y.data(), 512);
  std::vector<float> bad(256, 0.1f);
  bad[17] = std::nanf("");
  std::vector<float> ybad(256, 1.0f);
  CHECK(earshot_nonfinite_count(s.get()) == 0);
  earshot_process(s.get(), bad.data(), ybad.data(), 256);
  CHECK(earshot_nonfinite_count(s.get()) == 1);
  for (float q : ybad) CHECK(q == 0.0f);
  bad[17] = INFINITY;
  earshot_process(s.get(), bad.data(), ybad.data(), 256);
  CHECK(earshot_nonfinite_count(s.get()) == 2);
  // After the reset the stream behaves like a fresh one.
  earshot_process(s.get(), x.data(), y.data(), 1024);
  earshot_process(fresh.get(), x.data(), z.data(), 1024);
  CHECK(identical(y, z));
}

TEST_CASE("refused control, mix and gain values leave the running stream untouched") {
  Case c;
  for (const Case& k : all_cases())
    if (k.name == "model tcn + film") c = k;
  REQUIRE(c.n_controls == 2);
  auto a = open(c.fx.bytes(), "", 48000), b = open(c.fx.bytes(), "", 48000);
  const std::vector<float> x = test_signal(4096);
  std::vector<float> ya(4096), yb(4096);
  earshot_process(a.get(), x.data(), ya.data(), 2048);
  earshot_process(b.get(), x.data(), yb.data(), 2048);
  CHECK(earshot_set_control(a.get(), 2, 0.5f) == EARSHOT_ERR_INDEX);
  CHECK(earshot_set_control(a.get(), -1, 0.5f) == EARSHOT_ERR_INDEX);
  CHECK(earshot_set_control(a.get(), 0, NAN) == EARSHOT_ERR_NOT_FINITE);
  CHECK(earshot_set_control(a.get(), 0, 1.5f) == EARSHOT_ERR_RANGE);
  CHECK(earshot_set_control(a.get(), 1, -1.01f) == EARSHOT_ERR_RANGE);
  CHECK(earshot_set_mix(a.get(), 2.0f) == EARSHOT_ERR_RANGE);
  CHECK(earshot_set_mix(a.get(), INFINITY) == EARSHOT_ERR_NOT_FINITE);
  CHECK(earshot_set_gain(a.get(), 30.0f, 0.0f) == EARSHOT_ERR_RANGE);
  CHECK(earshot_set_gain(a.get(), 0.0f, NAN) == EARSHOT_ERR_NOT_FINITE);
  CHECK(earshot_process(a.get(), x.data(), ya.data(), 0) == 0);
  CHECK(earshot_process(a.get(), x.data(), ya.data(), EARSHOT_MAX_BLOCK + 1) == 0);
  CHECK(earshot_process(nullptr, x.data(), ya.data(), 16) == 0);
  CHECK(std::string(earshot_status_text(EARSHOT_ERR_RANGE)).find("range") != std::string::npos);
  CHECK(earshot_control_index(a.get(), "tone") == 1);
  CHECK(earshot_control_index(a.get(), "nope") == -1);
  earshot_process(a.get(), x.data() + 2048, ya.data() + 2048, 2048);
  earshot_process(b.get(), x.data() + 2048, yb.data() + 2048, 2048);
  CHECK(identical(ya, yb));
  CHECK(earshot_get_control(a.get(), 0) == 0.3f);
}

TEST_CASE("dry/wet mix and gains") {
  const Case c = all_cases()[0];
  const std::vector<float> x = test_signal(4800);
  {
    auto s = open(c.fx.bytes(), "", 48000);
    REQUIRE(earshot_set_mix(s.get(), 0.0f) == EARSHOT_OK);
    earshot_reset(s.get());  // smoothers jump to their targets
    std::vector<float> y = run(s.get(), x, fixed(64));
    CHECK(identical(x, y));  // dry only, zero latency at the model rate
  }
  {
    auto s = open(c.fx.bytes(), "", 48000);
    auto w = open(c.fx.bytes(), "", 48000);
    REQUIRE(earshot_set_gain(s.get(), 0.0f, -6.0f) == EARSHOT_OK);
    earshot_reset(s.get());
    const std::vector<float> y = run(s.get(), x, fixed(64)), ref = run(w.get(), x, fixed(64));
    const double g = std::pow(10.0, -6.0 / 20);  // dB to amplitude: 10^(dB/20), common practice, no source
    for (size_t i = 0; i < x.size(); ++i) REQUIRE(std::fabs(y[i] - g * ref[i]) <= 1e-6 * std::fabs(ref[i]) + 1e-9);
  }
}

TEST_CASE("when resampling, the reported latency aligns the wet path with the dry path") {
  // Identity model at 48 kHz in a 44.1 kHz host: wet(t) ≈ x(t − latency).
  const Effect fx = identity_effect(48000);
  for (double host : {44100.0, 96000.0, 32000.0}) {
    CAPTURE(host);
    auto s = open(fx.bytes(), "", host);
    REQUIRE(s);
    const int L = earshot_latency(s.get());
    CAPTURE(L);
    CHECK(L > 0);
    const int T = int(host / 2);
    std::vector<float> x(static_cast<size_t>(T));
    for (int t = 0; t < T; ++t) x[size_t(t)] = float(0.5 * std::sin(2 * 3.14159265358979 * 1000 * t / host));
    const std::vector<float> y = run(s.get(), x, fixed(256));
    double e = 0, p = 0;
    for (int t = L + 2000; t < T; ++t) {
      e += (y[size_t(t)] - x[size_t(t - L)]) * (y[size_t(t)] - x[size_t(t - L)]);
      p += x[size_t(t - L)] * x[size_t(t - L)];
    }
    const double snr = 10 * std::log10(p / e);
    CAPTURE(snr);
    // A whole-sample latency cannot align a fractional delay exactly; the
    // residual is the sub-sample offset (≤ 0.5 sample at 1 kHz: ≥ ~20 dB).
    CHECK(snr > 20.0);
  }
}

TEST_CASE("when resampling, the dry path takes the wet path's round trip and lines up exactly") {
  // With the identity model the wet and dry round trips compute the same
  // samples, so any dry/wet mix gives the same output bit for bit.
  const Effect fx = identity_effect(48000);
  const std::vector<float> x = test_signal(20000, 44100);
  std::vector<std::vector<float>> outs;
  for (float mix : {0.0f, 0.37f, 1.0f}) {
    auto s = open(fx.bytes(), "", 44100);
    REQUIRE(earshot_set_mix(s.get(), mix) == EARSHOT_OK);
    earshot_reset(s.get());
    outs.push_back(run(s.get(), x, random_blocks(5, 900)));
  }
  // 0.37·d + 0.63·d rounds back to d only approximately: compare within 1 ulp-ish.
  CHECK(identical(outs[0], outs[2]));
  for (size_t i = 0; i < x.size(); ++i) REQUIRE(std::fabs(outs[1][i] - outs[0][i]) <= 1e-7f);
}
