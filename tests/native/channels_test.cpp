// Streams of several channels (earshot_create_channels): each channel's output
// is bit-identical to a mono stream with the same settings fed that channel
// alone, in every variant, with and without resampling, with any block
// partition, control, mix and gain changes; the lockstep recurrent kernels
// share weight loads among channels but keep each channel's sums. Also: the
// non-finite guard over all channels, and bad arguments.
#include <catch2/catch.hpp>
#include <algorithm>
#include <cmath>
#include <fstream>
#include <iterator>

#include "cases.hpp"
#include "cpu_variants.hpp"
#include "stream_util.hpp"

using namespace testfx;

namespace {

StreamPtr open_channels(const std::vector<unsigned char>& bytes, const std::string& variant, double rate, int channels,
                        std::string* error = nullptr) {
  char err[512] = {0};
  StreamPtr s(earshot_create_channels(bytes.data(), bytes.size(), rate, variant.c_str(), channels, 0, err, sizeof err));
  if (error) *error = err;
  return s;
}

// Settings applied at sample positions (host rate) to a mono or a multichannel stream alike.
struct Event {
  int at;
  int kind;  // 0 control, 1 mix, 2 gains
  int index;
  float a, b;
};

void apply(earshot_stream* s, const Event& e) {
  if (e.kind == 0) REQUIRE(earshot_set_control(s, e.index, e.a) == EARSHOT_OK);
  if (e.kind == 1) REQUIRE(earshot_set_mix(s, e.a) == EARSHOT_OK);
  if (e.kind == 2) REQUIRE(earshot_set_gain(s, e.a, e.b) == EARSHOT_OK);
}

// Runs planar channels x through s in blocks from next_block, cut at events.
std::vector<std::vector<float>> run_channels(earshot_stream* s, const std::vector<std::vector<float>>& x,
                                             const std::function<int()>& next_block, const std::vector<Event>& ev) {
  const int C = int(x.size()), n = int(x[0].size());
  std::vector<std::vector<float>> y(static_cast<size_t>(C), std::vector<float>(static_cast<size_t>(n)));
  std::vector<const float*> in(static_cast<size_t>(C));
  std::vector<float*> out(static_cast<size_t>(C));
  size_t e = 0;
  int t = 0;
  while (t < n) {
    while (e < ev.size() && ev[e].at <= t) apply(s, ev[e++]);
    int b = std::min(std::max(1, next_block()), n - t);
    if (e < ev.size()) b = std::min(b, ev[e].at - t);
    for (int c = 0; c < C; ++c) {
      in[size_t(c)] = x[size_t(c)].data() + t;
      out[size_t(c)] = y[size_t(c)].data() + t;
    }
    REQUIRE(earshot_process_channels(s, in.data(), out.data(), b) == b);
    t += b;
  }
  return y;
}

// Channel c: the test signal shifted and scaled, so no two channels agree.
std::vector<std::vector<float>> channel_signals(int C, int T) {
  const std::vector<float> base = test_signal(T + 997 * C);
  std::vector<std::vector<float>> x(static_cast<size_t>(C));
  for (int c = 0; c < C; ++c) {
    x[size_t(c)].assign(base.begin() + 997 * c, base.begin() + 997 * c + T);
    for (float& v : x[size_t(c)]) v *= 1.0f - 0.2f * float(c);
  }
  return x;
}

std::vector<Event> events_for(int n_controls) {
  std::vector<Event> ev{{700, 1, 0, 0.6f, 0}, {2100, 2, 0, -4.0f, 3.0f}};
  if (n_controls) {
    ev.push_back({1000, 0, 0, 0.9f, 0});
    ev.push_back({4001, 0, n_controls - 1, 0.2f, 0});
  }
  std::sort(ev.begin(), ev.end(), [](const Event& a, const Event& b) { return a.at < b.at; });
  return ev;
}

void check_against_mono(const std::vector<unsigned char>& bytes, const std::string& v, double rate, int C,
                        int n_controls, int T, uint32_t seed) {
  const auto x = channel_signals(C, T);
  const auto ev = events_for(n_controls);
  auto multi = open_channels(bytes, v, rate, C);
  REQUIRE(multi);
  CHECK(earshot_channels(multi.get()) == C);
  const auto y = run_channels(multi.get(), x, random_blocks(seed, 900), ev);
  for (int c = 0; c < C; ++c) {
    CAPTURE(c);
    auto mono = open(bytes, v, rate);
    REQUIRE(mono);
    const auto z = run_channels(mono.get(), {x[size_t(c)]}, fixed(T), ev)[0];
    size_t at = 0;
    const bool same = identical(z, y[size_t(c)], &at);
    INFO("first difference at sample " << at);
    CHECK(same);
  }
  CHECK(earshot_nonfinite_count(multi.get()) == 0);
}

}  // namespace

TEST_CASE("each channel of a multichannel stream equals a mono stream fed that channel", "[channels]") {
  for (const Case& c : all_cases(3)) {
    const auto bytes = c.fx.bytes();
    for (double rate : {48000.0, 44100.0})
      for (const std::string& v : parity_variants())
        for (int C : {2, 3}) {
          CAPTURE(c.name, rate, v, C);
          check_against_mono(bytes, v, rate, C, c.n_controls, 6000, uint32_t(C * 7 + int(rate) % 13));
        }
  }
}

TEST_CASE("the bundled effects: stereo and eight channels equal mono, in every variant", "[channels]") {
  for (const char* name : {"lstm", "gru", "wavenet", "tcn"}) {
    std::ifstream f(std::string(EARSHOT_SOURCE_DIR) + "/demos/effects/" + name + ".nfx", std::ios::binary);
    REQUIRE(f);
    const std::vector<unsigned char> bytes((std::istreambuf_iterator<char>(f)), std::istreambuf_iterator<char>());
    std::vector<std::string> variants = parity_variants();
    if (earshot::variant_supported("avx2fma")) variants.push_back("avx2fma");
    for (const std::string& v : variants)
      for (int C : {2, 8}) {
        CAPTURE(name, v, C);
        check_against_mono(bytes, v, 48000, C, 2, 9000, 5);
      }
  }
}

TEST_CASE("a non-finite value in one channel silences every channel, resets and counts once", "[channels]") {
  const Case c = all_cases()[0];
  const auto bytes = c.fx.bytes();
  auto s = open_channels(bytes, "", 48000, 2);
  auto fresh = open_channels(bytes, "", 48000, 2);
  REQUIRE(s);
  auto x = channel_signals(2, 512);
  std::vector<float> a(512, 1.0f), b(512, 1.0f);
  const float* in[2] = {x[0].data(), x[1].data()};
  float* out[2] = {a.data(), b.data()};
  REQUIRE(earshot_process_channels(s.get(), in, out, 512) == 512);
  x[1][40] = std::nanf("");
  REQUIRE(earshot_process_channels(s.get(), in, out, 512) == 512);
  CHECK(earshot_nonfinite_count(s.get()) == 1);
  for (int i = 0; i < 512; ++i) {
    CHECK(a[size_t(i)] == 0.0f);
    CHECK(b[size_t(i)] == 0.0f);
  }
  // After the reset the stream behaves like a fresh one.
  x = channel_signals(2, 512);
  const float* in2[2] = {x[0].data(), x[1].data()};
  std::vector<float> a2(512), b2(512);
  float* out2[2] = {a2.data(), b2.data()};
  REQUIRE(earshot_process_channels(s.get(), in2, out, 512) == 512);
  REQUIRE(earshot_process_channels(fresh.get(), in2, out2, 512) == 512);
  CHECK(identical(a, a2));
  CHECK(identical(b, b2));
}

TEST_CASE("multichannel streams refuse bad arguments with a message and leave the output untouched", "[channels]") {
  const auto bytes = all_cases()[0].fx.bytes();
  for (int C : {0, -1, EARSHOT_MAX_CHANNELS + 1}) {
    std::string err;
    auto s = open_channels(bytes, "", 48000, C, &err);
    CAPTURE(C, err);
    CHECK(!s);
    CHECK(err.find("channel count " + std::to_string(C)) != std::string::npos);
  }
  auto s = open_channels(bytes, "", 48000, 2);
  REQUIRE(s);
  std::vector<float> x(64, 0.5f), y(64, 7.0f), z(64, 7.0f);
  // earshot_process takes mono streams only.
  CHECK(earshot_process(s.get(), x.data(), y.data(), 64) == 0);
  const float* in[2] = {x.data(), nullptr};
  float* out[2] = {y.data(), z.data()};
  CHECK(earshot_process_channels(s.get(), in, out, 64) == 0);
  in[1] = x.data();
  CHECK(earshot_process_channels(s.get(), in, out, 0) == 0);
  CHECK(earshot_process_channels(s.get(), in, out, EARSHOT_MAX_BLOCK + 1) == 0);
  CHECK(earshot_process_channels(nullptr, in, out, 64) == 0);
  for (float v : y) CHECK(v == 7.0f);
  for (float v : z) CHECK(v == 7.0f);
  CHECK(earshot_channels(nullptr) == 0);
  // A mono stream is a one-channel stream to earshot_process_channels.
  auto mono = open(bytes, "", 48000);
  CHECK(earshot_channels(mono.get()) == 1);
  const float* in1[1] = {x.data()};
  float* out1[1] = {y.data()};
  CHECK(earshot_process_channels(mono.get(), in1, out1, 64) == 64);
  // The channel count is in the info text.
  CHECK(std::string(earshot_info(s.get())).find("\"channels\":2") != std::string::npos);
}
