// Activation functions on the processing path, written in the Ops vocabulary.
//
// No libm: glibc and Emscripten's libc differ in the last bits, and the core
// must give the same samples everywhere. tanh is a 13/6-degree odd/even
// rational function (the coefficients of Eigen 3.4's generic_fast_tanh_float,
// MPL-2.0), clamped where it reaches ±1 in float; below |x| < 0.0004 it
// returns x. sigmoid(x) = 0.5 + 0.5·tanh(x/2) (an exact identity), so its
// absolute error is half of tanh's. Measured accuracy: tests/native/activation_test.cpp
// and dsp/ACCURACY.md.
#pragma once

// tanh of N vectors in place, every step applied to all N before the next,
// so that N independent chains are in flight (the polynomial is a chain of
// dependent multiply-adds and a division: one vector at a time is
// latency-bound). Each value gets the same operations whatever N is.
template <class A, int N>
inline void tanh_n(typename Ops<A>::V* a) {
  using O = Ops<A>;
  using V = typename O::V;
  const V hi = O::set1(7.90531110763549805f), lo = O::set1(-7.90531110763549805f);
  V x[N], x2[N], p[N], q[N];
  for (int k = 0; k < N; ++k) x[k] = O::max(O::min(a[k], hi), lo);
  for (int k = 0; k < N; ++k) x2[k] = O::mul(x[k], x[k]);
  for (int k = 0; k < N; ++k) p[k] = O::madd(x2[k], O::set1(-2.76076847742355e-16f), O::set1(2.00018790482477e-13f));
  for (int k = 0; k < N; ++k) q[k] = O::madd(x2[k], O::set1(1.19825839466702e-06f), O::set1(1.18534705686654e-04f));
  for (int k = 0; k < N; ++k) p[k] = O::madd(x2[k], p[k], O::set1(-8.60467152213735e-11f));
  for (int k = 0; k < N; ++k) q[k] = O::madd(x2[k], q[k], O::set1(2.26843463243900e-03f));
  for (int k = 0; k < N; ++k) p[k] = O::madd(x2[k], p[k], O::set1(5.12229709037114e-08f));
  for (int k = 0; k < N; ++k) q[k] = O::madd(x2[k], q[k], O::set1(4.89352518554385e-03f));
  for (int k = 0; k < N; ++k) p[k] = O::madd(x2[k], p[k], O::set1(1.48572235717979e-05f));
  for (int k = 0; k < N; ++k) p[k] = O::madd(x2[k], p[k], O::set1(6.37261928875436e-04f));
  for (int k = 0; k < N; ++k) p[k] = O::madd(x2[k], p[k], O::set1(4.89352455891786e-03f));
  for (int k = 0; k < N; ++k) p[k] = O::mul(x[k], p[k]);
  for (int k = 0; k < N; ++k) a[k] = O::select(O::lt(O::abs(a[k]), O::set1(0.0004f)), a[k], O::div(p[k], q[k]));
}

template <class A>
inline typename Ops<A>::V tanh_v(typename Ops<A>::V a) {
  tanh_n<A, 1>(&a);
  return a;
}

// sigmoid(x) = 0.5 + 0.5·tanh(x/2): the argument of that tanh, and the
// sigmoid from its result (so passes can put sigmoids in tanh_n's groups).
template <class A>
inline typename Ops<A>::V sigmoid_arg(typename Ops<A>::V x) {
  return Ops<A>::mul(Ops<A>::set1(0.5f), x);
}
template <class A>
inline typename Ops<A>::V sigmoid_from_tanh(typename Ops<A>::V t) {
  const auto half = Ops<A>::set1(0.5f);
  return Ops<A>::madd(half, t, half);
}

template <class A>
inline typename Ops<A>::V sigmoid_v(typename Ops<A>::V x) {
  return sigmoid_from_tanh<A>(tanh_v<A>(sigmoid_arg<A>(x)));
}

template <class A>
inline typename Ops<A>::V softsign_v(typename Ops<A>::V x) {
  using O = Ops<A>;
  return O::div(x, O::add(O::set1(1.0f), O::abs(x)));
}

template <class A>
inline typename Ops<A>::V act_v(const ActSpec& p, typename Ops<A>::V x) {
  using O = Ops<A>;
  switch (p.fn) {
    case ActFn::tanh: return tanh_v<A>(x);
    case ActFn::sigmoid: return sigmoid_v<A>(x);
    case ActFn::relu: return O::select(O::gt(x, O::set1(0.0f)), x, O::set1(0.0f));
    case ActFn::leaky_relu: return O::select(O::gt(x, O::set1(0.0f)), x, O::mul(x, O::set1(p.slope)));
    case ActFn::softsign: return softsign_v<A>(x);
    case ActFn::hardtanh: return O::max(O::min(x, O::set1(p.hi)), O::set1(p.lo));
    case ActFn::identity: break;
  }
  return x;
}

// y[0..n) = f(x[0..n)); x and y may alias. Vector body, scalar tail: the same
// operations, so the split point never changes a value.
template <class A>
inline void activate(const ActSpec& p, const float* x, float* y, int n) {
  using O = Ops<A>;
  using S = Ops<scalar_arch>;
  int t = 0;
  for (; t + O::W <= n; t += O::W) O::store(y + t, act_v<A>(p, O::load(x + t)));
  for (; t < n; ++t) y[t] = act_v<scalar_arch>(p, S::load(x + t));
}

// Vectors per group in the passes below (tanh_n).
constexpr int kSquashGroup = 4;

// N vectors (of Ops<A>::W values) at x: sigmoid (kSigmoid) or tanh, in place.
template <class A, bool kSigmoid, int N>
inline void squash_group(float* x) {
  using O = Ops<A>;
  typename O::V v[N];
  for (int k = 0; k < N; ++k) v[k] = kSigmoid ? sigmoid_arg<A>(O::load(x + k * O::W)) : O::load(x + k * O::W);
  tanh_n<A, N>(v);
  for (int k = 0; k < N; ++k) O::store(x + k * O::W, kSigmoid ? sigmoid_from_tanh<A>(v[k]) : v[k]);
}

// x[0..n) = sigmoid (kSigmoid) or tanh of x[0..n), in place: groups of
// kSquashGroup vectors, single vectors, then a scalar tail (the same
// operations on every value, so the split never changes one).
template <class A, bool kSigmoid>
inline void squash_rows(float* x, int n) {
  constexpr int W = Ops<A>::W;
  int t = 0;
  for (; t + kSquashGroup * W <= n; t += kSquashGroup * W) squash_group<A, kSigmoid, kSquashGroup>(x + t);
  for (; t + W <= n; t += W) squash_group<A, kSigmoid, 1>(x + t);
  for (; t < n; ++t) squash_group<scalar_arch, kSigmoid, 1>(x + t);
}
template <class A>
inline void tanh_rows(float* x, int n) {
  squash_rows<A, false>(x, n);
}
template <class A>
inline void sigmoid_rows(float* x, int n) {
  squash_rows<A, true>(x, n);
}
