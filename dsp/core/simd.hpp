// The one vocabulary of vector operations the kernels are written in.
//
// A kernel is written once as a template on an arch tag and compiled once per
// variant. `Ops<Arch>` maps each operation to a plain float (scalar variant) or
// to an xsimd batch (sse4, avx2, and WebAssembly SIMD through Emscripten's SSE
// emulation). Every operation is IEEE single precision with one rounding, so a
// lane of a vector computes exactly what the scalar loop computes; only the
// avx2fma variant fuses multiply and add (and so differs in the last bits).
//
// min/max/relu are written as compare-and-select so that their result for
// signed zeros is the same on every instruction set.
//
// This header is included only by the per-variant translation unit, inside
// namespace earshot::EARSHOT_NS, so each variant's inline functions stay apart.
#pragma once

#ifndef EARSHOT_NS
#error "simd.hpp is compiled per variant: define EARSHOT_NS"
#endif

struct scalar_arch {
  static constexpr const char* name() { return "scalar"; }
};

template <class Arch>
struct Ops;

// Plain float: the scalar variant, and the tail of every vector loop.
template <>
struct Ops<scalar_arch> {
  using V = float;
  using M = bool;
  static constexpr int W = 1;
  static V load(const float* p) { return *p; }
  static void store(float* p, V v) { *p = v; }
  static V set1(float x) { return x; }
  static V add(V a, V b) { return a + b; }
  static V sub(V a, V b) { return a - b; }
  static V mul(V a, V b) { return a * b; }
  static V div(V a, V b) { return a / b; }
  static V madd(V a, V b, V c) {  // a*b + c: two roundings, one when EARSHOT_FUSED (avx2fma)
#if EARSHOT_FUSED
    return __builtin_fmaf(a, b, c);
#else
    return a * b + c;
#endif
  }
  static M lt(V a, V b) { return a < b; }
  static M gt(V a, V b) { return a > b; }
  static V select(M m, V a, V b) { return m ? a : b; }
  static V abs(V a) { return __builtin_fabsf(a); }
  static V min(V a, V b) { return a < b ? a : b; }
  static V max(V a, V b) { return a > b ? a : b; }
};

#if EARSHOT_XSIMD
template <class XArch>
struct Ops {
  using V = xsimd::batch<float, XArch>;
  using M = xsimd::batch_bool<float, XArch>;
  static constexpr int W = int(V::size);
  static V load(const float* p) { return V::load_unaligned(p); }
  static void store(float* p, V v) { v.store_unaligned(p); }
  static V set1(float x) { return V(x); }
  static V add(V a, V b) { return a + b; }
  static V sub(V a, V b) { return a - b; }
  static V mul(V a, V b) { return a * b; }
  static V div(V a, V b) { return a / b; }
  static V madd(V a, V b, V c) {
#if EARSHOT_FUSED
    return xsimd::fma(a, b, c);
#else
    return a * b + c;
#endif
  }
  static M lt(V a, V b) { return a < b; }
  static M gt(V a, V b) { return a > b; }
  static V select(M m, V a, V b) { return xsimd::select(m, a, b); }
  static V abs(V a) { return xsimd::abs(a); }
  static V min(V a, V b) { return xsimd::select(a < b, a, b); }
  static V max(V a, V b) { return xsimd::select(a > b, a, b); }
};
#endif

// Values below this magnitude are set to zero where state is stored, so that
// recurrent state and filter memories never hold subnormals (WebAssembly has
// no flush-to-zero mode). 1e-30 is far below any audible or numerically
// meaningful level (−600 dBFS).
constexpr float kFlushBelow = 1e-30f;

template <class A>
inline typename Ops<A>::V flush_tiny(typename Ops<A>::V v) {
  using O = Ops<A>;
  return O::select(O::lt(O::abs(v), O::set1(kFlushBelow)), O::set1(0.0f), v);
}
