// Proves earshot_process, earshot_set_control, set_mix and set_gain never allocate:
// the global operator new of this test binary counts calls while armed.
// Under AddressSanitizer the sanitizer owns operator new/delete (replacing them
// here mixes its allocator with ours), so this test runs in the release build only.
#if !defined(__SANITIZE_ADDRESS__)
#include <catch2/catch.hpp>
#include <atomic>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <malloc.h>
#include <new>

#include "cases.hpp"
#include "stream_util.hpp"

namespace {
std::atomic<bool> armed{false};
std::atomic<long> allocations{0};
// Live bytes of operator new (glibc's usable sizes) and their peak, always kept.
std::atomic<long long> live_bytes{0}, peak_bytes{0};

void* counted(std::size_t n) {
  void* p = std::malloc(n ? n : 1);
  if (p) {
    const long long now = live_bytes += (long long)malloc_usable_size(p);
    long long peak = peak_bytes;
    while (now > peak && !peak_bytes.compare_exchange_weak(peak, now)) {
    }
  }
  return p;
}
void uncounted(void* p) {
  if (p) live_bytes -= (long long)malloc_usable_size(p);
  std::free(p);
}
}  // namespace

void* operator new(std::size_t n) {
  if (armed) ++allocations;
  if (void* p = counted(n)) return p;
  throw std::bad_alloc();
}
void* operator new[](std::size_t n) { return operator new(n); }
void operator delete(void* p) noexcept { uncounted(p); }
void operator delete[](void* p) noexcept { uncounted(p); }
void operator delete(void* p, std::size_t) noexcept { uncounted(p); }
void operator delete[](void* p, std::size_t) noexcept { uncounted(p); }
void* operator new(std::size_t n, const std::nothrow_t&) noexcept {
  if (armed) ++allocations;
  return counted(n);
}
void* operator new[](std::size_t n, const std::nothrow_t& t) noexcept { return operator new(n, t); }
void operator delete(void* p, const std::nothrow_t&) noexcept { uncounted(p); }
void operator delete[](void* p, const std::nothrow_t&) noexcept { uncounted(p); }

using namespace testfx;

TEST_CASE("processing never allocates, in every variant, with and without resampling") {
  const std::vector<float> x = test_signal(70000);
  std::vector<float> y(x.size());
  for (const Case& c : all_cases(5)) {
    for (double rate : {48000.0, 44100.0}) {
      for (const std::string& v : parity_variants()) {
        CAPTURE(c.name, rate, v);
        auto s = open(c.fx.bytes(), v, rate);
        REQUIRE(s);
        allocations = 0;
        armed = true;
        earshot_process(s.get(), x.data(), y.data(), 1);
        earshot_process(s.get(), x.data(), y.data(), 300);
        if (c.n_controls) earshot_set_control(s.get(), 0, 0.8f);
        earshot_set_mix(s.get(), 0.7f);
        earshot_set_gain(s.get(), -3.0f, 2.0f);
        earshot_process(s.get(), x.data(), y.data(), EARSHOT_MAX_BLOCK);
        earshot_reset(s.get());
        earshot_process(s.get(), x.data(), y.data(), 4000);
        armed = false;
        CHECK(allocations == 0);
      }
    }
  }
  // Multichannel streams (lockstep lanes) as well.
  for (const Case& c : all_cases(5)) {
    for (double rate : {48000.0, 44100.0}) {
      CAPTURE(c.name, rate);
      const auto bytes = c.fx.bytes();
      char err[512];
      StreamPtr s(earshot_create_channels(bytes.data(), bytes.size(), rate, "", 3, 0, err, sizeof err));
      REQUIRE(s);
      std::vector<float> y1(x.size()), y2(x.size());
      const float* in[3] = {x.data(), x.data() + 1, x.data() + 2};
      float* out[3] = {y.data(), y1.data(), y2.data()};
      allocations = 0;
      armed = true;
      earshot_process_channels(s.get(), in, out, 1);
      earshot_process_channels(s.get(), in, out, 300);
      if (c.n_controls) earshot_set_control(s.get(), 0, 0.8f);
      earshot_set_mix(s.get(), 0.7f);
      earshot_process_channels(s.get(), in, out, 60000);
      earshot_reset(s.get());
      earshot_process_channels(s.get(), in, out, 4000);
      armed = false;
      CHECK(allocations == 0);
    }
  }
  // The counter works: creating a stream allocates.
  allocations = 0;
  armed = true;
  auto s = open(all_cases()[0].fx.bytes(), "", 48000);
  armed = false;
  CHECK(allocations > 0);
}
// Peak bytes held while `f` runs, above what was live when it started.
template <class F>
long long peak_during(F&& f) {
  const long long base = live_bytes;
  peak_bytes = base;
  f();
  return peak_bytes - base;
}

TEST_CASE("a stream's memory bound holds what create allocates, and is close to it", "[stream-bytes]") {
  // The bound (engine.cpp, dsp/FORMAT.md "Stream memory") must never be below
  // the peak the create call reaches (weights, state, history, scratch,
  // resampler design), and not far above it.
  for (const Case& c : all_cases(5)) {
    for (double rate : {48000.0, 44100.0, 8000.0}) {
      const std::vector<unsigned char> bytes = c.fx.bytes();
      earshot_stream* s = nullptr;
      const long long peak = peak_during([&] {
        char err[512];
        s = earshot_create(bytes.data(), bytes.size(), rate, "scalar", err, sizeof err);
      });
      REQUIRE(s);
      const double bound = double(earshot_stream_bytes(s));
      CAPTURE(c.name, rate, peak, bound);
      CHECK(bound >= double(peak));
      CHECK(bound <= 1.25 * double(peak) + 96 * 1024);
      earshot_destroy(s);
    }
  }
}

TEST_CASE("a multichannel stream's memory bound holds what create allocates", "[stream-bytes]") {
  for (const Case& c : all_cases(5)) {
    for (double rate : {48000.0, 44100.0}) {
      for (int C : {2, 5}) {
        const std::vector<unsigned char> bytes = c.fx.bytes();
        earshot_stream* s = nullptr;
        const long long peak = peak_during([&] {
          char err[512];
          s = earshot_create_channels(bytes.data(), bytes.size(), rate, "scalar", C, 0, err, sizeof err);
        });
        REQUIRE(s);
        const double bound = double(earshot_stream_bytes(s));
        CAPTURE(c.name, rate, C, peak, bound);
        CHECK(bound >= double(peak));
        // Everything but the weights is counted per channel; lockstep layers
        // share their weight copies, so the bound may be above by those.
        CHECK(bound <= C * (1.25 * double(peak) + 96 * 1024));
        earshot_destroy(s);
      }
    }
  }
}

TEST_CASE("a small file asking for a huge history is refused before anything large is allocated", "[stream-bytes]") {
  // 1 → 1024 channels (linear), then a kernel-2 conv1d with dilation 65536 on
  // 1024 channels: a few KB of weights, 512 MiB of history per stream.
  Builder b(3);
  linear(b, 1, 1024);
  conv(b, 1024, 1, 2, 65536);
  const std::vector<unsigned char> bytes = b.build().bytes();
  INFO("file bytes " << bytes.size());
  CHECK(bytes.size() < 40000);
  char err[512] = {0};
  earshot_stream* s = nullptr;
  const auto t0 = std::chrono::steady_clock::now();
  const long long peak = peak_during([&] { s = earshot_create(bytes.data(), bytes.size(), 48000, "", err, sizeof err); });
  const double ms = std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count();
  REQUIRE(s == nullptr);
  const std::string msg = err;
  CAPTURE(msg, peak);
  CHECK(msg.find("layers[1]") != std::string::npos);
  CHECK(msg.find("conv1d") != std::string::npos);
  CHECK(msg.find("limit is 64.0 MiB") != std::string::npos);
  // Deterministic stand-in for "costs milliseconds": the refusal holds no more
  // than a few copies of the file.
  CHECK(peak < 8 * (long long)bytes.size() + 256 * 1024);
  std::printf("refused %zu-byte file: %s (%.2f ms, peak %lld bytes)\n", bytes.size(), err, ms, peak);
  // The same file under an explicit, larger limit is accepted and says its figure.
  s = earshot_create_bounded(bytes.data(), bytes.size(), 48000, "", size_t(1) << 30, err, sizeof err);
  REQUIRE(s);
  CHECK(earshot_stream_bytes(s) > (size_t(512) << 20));
  earshot_destroy(s);
}

TEST_CASE("the costliest stream under the default limit is created within the limit", "[stream-bytes]") {
  // The same shape as above with the largest dilation the default 64 MiB limit
  // accepts (found by bisection on the refusal): the worst a small file can
  // cost a page that uses the default. Prints its create time and peak.
  auto file = [](int dilation) {
    Builder b(3);
    linear(b, 1, 1024);
    conv(b, 1024, 1, 2, dilation);
    return b.build().bytes();
  };
  auto accepted = [&](int dilation) {
    const std::vector<unsigned char> bytes = file(dilation);
    char err[512] = {0};
    earshot_stream* s = earshot_create(bytes.data(), bytes.size(), 48000, "", err, sizeof err);
    const bool ok = s != nullptr;
    earshot_destroy(s);
    return ok;
  };
  int lo = 1, hi = 65536;  // lo accepted, hi refused (the case above)
  REQUIRE(accepted(lo));
  REQUIRE(!accepted(hi));
  while (hi - lo > 1) {
    const int mid = lo + (hi - lo) / 2;
    (accepted(mid) ? lo : hi) = mid;
  }
  const std::vector<unsigned char> bytes = file(lo);
  char err[512] = {0};
  earshot_stream* s = nullptr;
  const auto t0 = std::chrono::steady_clock::now();
  const long long peak = peak_during([&] { s = earshot_create(bytes.data(), bytes.size(), 48000, "", err, sizeof err); });
  const double ms = std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count();
  REQUIRE(s);
  const size_t bound = earshot_stream_bytes(s);
  CAPTURE(lo, bound, peak);
  CHECK(bound <= EARSHOT_STREAM_BYTES_DEFAULT);
  CHECK(double(peak) <= double(bound));
  std::vector<float> x(4800, 0.25f), y(4800);
  const auto t1 = std::chrono::steady_clock::now();
  for (int i = 0; i < 10; ++i) REQUIRE(earshot_process(s, x.data(), y.data(), 4800) == 4800);
  const double run_ms = std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t1).count();
  std::printf("costliest accepted: %zu-byte file, dilation %d, bound %.1f MiB, create %.2f ms, peak %.1f MiB, 1 s of audio in %.1f ms\n",
              bytes.size(), lo, bound / 1048576.0, ms, peak / 1048576.0, run_ms);
  earshot_destroy(s);
}

#endif
