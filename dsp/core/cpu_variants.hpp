// Native-only services beside the C ABI: which CPU variants exist, which this
// machine can run, and the measured peak multiply-add rate of each (the
// yardstick `earshot bench` reports against). Not part of the WebAssembly builds.
#pragma once
#include <ctime>
#include <string>
#include <vector>

namespace earshot {

// Every native variant compiled into this binary, in order of preference
// (most capable last): "scalar", "sse4", "avx2", "avx2fma".
std::vector<std::string> native_variants();

// True when this CPU can run the variant (cpuid checks).
bool variant_supported(const std::string& name);

// The most capable parity variant the CPU supports (avx2fma is never chosen
// automatically: it is fast but not bit-identical to the others).
std::string best_variant();

// Multiply-adds per second reached by an in-register kernel of that variant
// (independent accumulator chains, no memory traffic) run for about `seconds`.
// The variant's own arithmetic: a multiply and an add, fused only in avx2fma.
double measure_peak_madd_rate(const std::string& name, double seconds);

// CPU time of the calling thread, in seconds. Benchmarks time with it so that
// other processes on a shared machine do not count against the figures.
inline double thread_seconds() {
  timespec t;
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &t);
  return double(t.tv_sec) + 1e-9 * double(t.tv_nsec);
}

}  // namespace earshot
