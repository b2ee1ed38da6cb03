// Proves earshot_process, earshot_set_control, set_mix and set_gain never allocate:
// the global operator new of this test binary counts calls while armed.
// Under AddressSanitizer the sanitizer owns operator new/delete (replacing them
// here mixes its allocator with ours), so this test runs in the release build only.
#if !defined(__SANITIZE_ADDRESS__)
#include <catch2/catch.hpp>
#include <atomic>
#include <cstdlib>
#include <new>

#include "cases.hpp"
#include "stream_util.hpp"

namespace {
std::atomic<bool> armed{false};
std::atomic<long> allocations{0};
}  // namespace

void* operator new(std::size_t n) {
  if (armed) ++allocations;
  if (void* p = std::malloc(n ? n : 1)) return p;
  throw std::bad_alloc();
}
void* operator new[](std::size_t n) { return operator new(n); }
void operator delete(void* p) noexcept { std::free(p); }
void operator delete[](void* p) noexcept { std::free(p); }
void operator delete(void* p, std::size_t) noexcept { std::free(p); }
void operator delete[](void* p, std::size_t) noexcept { std::free(p); }
void* operator new(std::size_t n, const std::nothrow_t&) noexcept {
  if (armed) ++allocations;
  return std::malloc(n ? n : 1);
}
void* operator new[](std::size_t n, const std::nothrow_t& t) noexcept { return operator new(n, t); }
void operator delete(void* p, const std::nothrow_t&) noexcept { std::free(p); }
void operator delete[](void* p, const std::nothrow_t&) noexcept { std::free(p); }

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
  // The counter works: creating a stream allocates.
  allocations = 0;
  armed = true;
  auto s = open(all_cases()[0].fx.bytes(), "", 48000);
  armed = false;
  CHECK(allocations > 0);
}
#endif  // !__SANITIZE_ADDRESS__
