// The one vocabulary of vector operations the kernels are written in.
//
// A kernel is written once as a template on an arch tag and compiled once per
// variant. `Ops<Arch>` maps each operation to a plain float (scalar variant) or
// to an xsimd batch (sse4, avx2, and WebAssembly SIMD through Emscripten's SSE
// emulation). Every operation is IEEE single precision with one rounding, so a
// lane of a vector computes exactly what the scalar loop computes; only the
// avx2fma variant fuses multiply and add (and so differs in the last bits).
//
// min/max/relu are defined as compare-and-select, select(a < b, a, b), so
// that their result for signed zeros and NaN is the same on every
// instruction set (min_ps/max_ps below compute exactly that).
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
// min and max in one instruction each, exactly select(a < b, a, b) and
// select(a > b, a, b), signed zeros and NaN included:
// - WebAssembly: f32x4.pmin(x, y) = y < x ? y : x and f32x4.pmax(x, y) =
//   x < y ? y : x (the WebAssembly SIMD instruction set's pseudo-minimum and
//   -maximum), so the operands go in the other way round;
// - x86: MINPS/MAXPS return the second operand unless the first compares less
//   (greater), for ±0 pairs and NaNs too (Intel SDM vol. 2, MINPS, MAXPS).
// tests/native/layers/activation_test.cpp and tests/node/signed-zero.test.mjs
// would catch the operands swapped.
#if defined(__EMSCRIPTEN__) && defined(__wasm_simd128__)
#define EARSHOT_MIN_MAX_PS 1
inline __m128 min_ps(__m128 a, __m128 b) { return __m128(wasm_f32x4_pmin(v128_t(b), v128_t(a))); }
inline __m128 max_ps(__m128 a, __m128 b) { return __m128(wasm_f32x4_pmax(v128_t(b), v128_t(a))); }
#elif defined(__SSE__) && !defined(__EMSCRIPTEN__)
#define EARSHOT_MIN_MAX_PS 1
inline __m128 min_ps(__m128 a, __m128 b) { return _mm_min_ps(a, b); }
inline __m128 max_ps(__m128 a, __m128 b) { return _mm_max_ps(a, b); }
#if defined(__AVX__)
inline __m256 min_ps(__m256 a, __m256 b) { return _mm256_min_ps(a, b); }
inline __m256 max_ps(__m256 a, __m256 b) { return _mm256_max_ps(a, b); }
#endif
#endif

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
#if EARSHOT_MIN_MAX_PS
  static V min(V a, V b) { return V(min_ps(a, b)); }
  static V max(V a, V b) { return V(max_ps(a, b)); }
#else
  static V min(V a, V b) { return xsimd::select(a < b, a, b); }
  static V max(V a, V b) { return xsimd::select(a > b, a, b); }
#endif
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
