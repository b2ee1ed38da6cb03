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
// instruction set (x86's MINPS/MAXPS compute exactly that, and are used).
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
#if defined(__SSE__) && !defined(__EMSCRIPTEN__)
inline __m128 x86_min(__m128 a, __m128 b) { return _mm_min_ps(a, b); }
inline __m128 x86_max(__m128 a, __m128 b) { return _mm_max_ps(a, b); }
#if defined(__AVX__)
inline __m256 x86_min(__m256 a, __m256 b) { return _mm256_min_ps(a, b); }
inline __m256 x86_max(__m256 a, __m256 b) { return _mm256_max_ps(a, b); }
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
#if defined(__SSE__) && !defined(__EMSCRIPTEN__)
  // MINPS/MAXPS return the second operand unless the first compares less
  // (greater): for ±0 pairs and NaNs too (Intel SDM, vol. 2, MINPS and
  // MAXPS), which is exactly select(a < b, a, b). One instruction instead of
  // a compare and a blend.
  static V min(V a, V b) { return V(x86_min(a, b)); }
  static V max(V a, V b) { return V(x86_max(a, b)); }
#elif defined(__EMSCRIPTEN__) && defined(__wasm_simd128__)
  // f32x4.pmin(x, y) = y < x ? y : x and f32x4.pmax(x, y) = x < y ? y : x
  // (the WebAssembly SIMD instruction set's pseudo-minimum and -maximum), so
  // pmin(b, a) = select(a < b, a, b) and pmax(b, a) = select(a > b, a, b).
  // tests/node/signed-zero.test.mjs would catch the operands swapped.
  static V min(V a, V b) { return V(__m128(wasm_f32x4_pmin(v128_t(__m128(b)), v128_t(__m128(a))))); }
  static V max(V a, V b) { return V(__m128(wasm_f32x4_pmax(v128_t(__m128(b)), v128_t(__m128(a))))); }
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
