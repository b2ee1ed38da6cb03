// Dense kernels, written once against the Ops vocabulary (simd.hpp) and
// compiled per variant. Each output element is computed as
//   acc = start; for each product in a fixed order: acc = w·x + acc
// whatever the vector width, so every variant gives the same bits (no FMA in
// parity variants, no horizontal reductions). Vector loops cover the bulk; a
// scalar loop with the same operations covers the tail.
#pragma once

// Causal (dilated) convolution over a chunk, vectorised over time.
// w: [out][in][K] (PyTorch layout), b: [out] or null. x[i] points at sample 0
// of input channel i, with at least (K−1)·d valid samples before it.
// y: out rows, row stride ys; y[o][t] = b[o] + Σ_k Σ_i w[o][i][k]·x[i][t − (K−1−k)·d].
template <class A>
inline void conv_time(const float* w, const float* b, int out, int in, int K, int d, const float* const* x,
                      float* y, int ys, int n) {
  using O = Ops<A>;
  using S = Ops<scalar_arch>;
  using V = typename O::V;
  constexpr int W = O::W;
  for (int o = 0; o < out; ++o) {
    const float* wo = w + size_t(o) * in * K;
    const float bo = b ? b[o] : 0.0f;
    float* yo = y + size_t(o) * ys;
    int t = 0;
    for (; t + 4 * W <= n; t += 4 * W) {
      V a0 = O::set1(bo), a1 = a0, a2 = a0, a3 = a0;
      for (int k = 0; k < K; ++k) {
        const int off = (K - 1 - k) * d;
        for (int i = 0; i < in; ++i) {
          const V wv = O::set1(wo[i * K + k]);
          const float* p = x[i] + t - off;
          a0 = O::madd(wv, O::load(p), a0);
          a1 = O::madd(wv, O::load(p + W), a1);
          a2 = O::madd(wv, O::load(p + 2 * W), a2);
          a3 = O::madd(wv, O::load(p + 3 * W), a3);
        }
      }
      O::store(yo + t, a0);
      O::store(yo + t + W, a1);
      O::store(yo + t + 2 * W, a2);
      O::store(yo + t + 3 * W, a3);
    }
    for (; t + W <= n; t += W) {
      V a0 = O::set1(bo);
      for (int k = 0; k < K; ++k) {
        const int off = (K - 1 - k) * d;
        for (int i = 0; i < in; ++i) a0 = O::madd(O::set1(wo[i * K + k]), O::load(x[i] + t - off), a0);
      }
      O::store(yo + t, a0);
    }
    for (; t < n; ++t) {
      float a0 = bo;
      for (int k = 0; k < K; ++k) {
        const int off = (K - 1 - k) * d;
        for (int i = 0; i < in; ++i) a0 = S::madd(wo[i * K + k], x[i][t - off], a0);
      }
      yo[t] = a0;
    }
  }
}

// Rows [r, r + R·W) of gemv_cols: R vectors held in registers across the
// whole column loop.
template <class A, int R>
inline void gemv_block(const float* wt, int rows, const float* x, int in, const float* init, float* acc, int r) {
  using O = Ops<A>;
  using V = typename O::V;
  constexpr int W = O::W;
  V a[R];
  for (int j = 0; j < R; ++j) a[j] = O::load(init + r + j * W);
  for (int i = 0; i < in; ++i) {
    const V xv = O::set1(x[i]);
    const float* p = wt + size_t(i) * rows + r;
    for (int j = 0; j < R; ++j) a[j] = O::madd(O::load(p + j * W), xv, a[j]);
  }
  for (int j = 0; j < R; ++j) O::store(acc + r + j * W, a[j]);
}

// The last m < R whole vectors of rows in one block of m (so a remainder
// keeps several independent sums in flight); returns the next row.
template <class A, int R>
inline int gemv_rest(const float* wt, int rows, const float* x, int in, const float* init, float* acc, int r, int m) {
  if constexpr (R == 0) {
    return r;
  } else {
    if (m != R) return gemv_rest<A, R - 1>(wt, rows, x, in, init, acc, r, m);
    gemv_block<A, R>(wt, rows, x, in, init, acc, r);
    return r + R * Ops<A>::W;
  }
}

// acc[r] = init[r] + Σ_i wt[i][r]·x[i] for r in [0, rows): a matrix-vector
// product in column (axpy) form, starting from init (which may be acc itself,
// so a bias needs no copy first). wt is the transposed weight, [in][rows].
template <class A>
inline void gemv_cols(const float* wt, int rows, const float* x, int in, const float* init, float* acc) {
  using S = Ops<scalar_arch>;
  constexpr int W = Ops<A>::W;
  // Vectors per block. Eight suit native code; V8's code for the WebAssembly
  // SIMD build runs faster with six (docs/wasm.md has the figures). Every
  // output's sum has the same terms in the same order either way.
#if defined(__wasm_simd128__)
  constexpr int R = 6;
#else
  constexpr int R = 8;
#endif
  int r = 0;
  for (; r + R * W <= rows; r += R * W) gemv_block<A, R>(wt, rows, x, in, init, acc, r);
  r = gemv_rest<A, R - 1>(wt, rows, x, in, init, acc, r, (rows - r) / W);
  for (; r < rows; ++r) {
    float a0 = init[r];
    for (int i = 0; i < in; ++i) a0 = S::madd(wt[size_t(i) * rows + r], x[i], a0);
    acc[r] = a0;
  }
}

// y[0..n) = a[0..n) + b[0..n)
template <class A>
inline void add_rows(const float* a, const float* b, float* y, int n) {
  using O = Ops<A>;
  int t = 0;
  for (; t + O::W <= n; t += O::W) O::store(y + t, O::add(O::load(a + t), O::load(b + t)));
  for (; t < n; ++t) y[t] = a[t] + b[t];
}

// Input history of a causal convolution: per channel a linear buffer holding
// the last (K−1)·d samples before the current chunk, then the chunk. When the
// write position reaches the end, the tail is moved to the front (amortised:
// the spare room is at least 8 chunks). Values are flushed of subnormals on write.
struct History {
  int channels = 0, len = 0, cap = 0, pos = 0;
  std::vector<float> buf;  // [channels][cap]

  void init(int ch, int history) {
    channels = ch;
    len = history;
    cap = history + std::max(8 * kChunk, history);
    buf.assign(size_t(ch) * cap, 0.0f);
    pos = len;
  }
  void reset() {
    std::fill(buf.begin(), buf.end(), 0.0f);
    pos = len;
  }
  // Appends n samples of each channel (rows of stride kChunk); fills ptr[i]
  // with the address of sample 0 of the chunk in channel i.
  template <class A>
  void push(const float* in, int n, const float** ptr) {
    using O = Ops<A>;
    if (pos + n > cap) {
      for (int c = 0; c < channels; ++c) {
        float* row = buf.data() + size_t(c) * cap;
        std::memmove(row, row + pos - len, sizeof(float) * size_t(len));
      }
      pos = len;
    }
    for (int c = 0; c < channels; ++c) {
      float* dst = buf.data() + size_t(c) * cap + pos;
      const float* src = in + size_t(c) * kChunk;
      int t = 0;
      for (; t + O::W <= n; t += O::W) O::store(dst + t, flush_tiny<A>(O::load(src + t)));
      for (; t < n; ++t) dst[t] = flush_tiny<scalar_arch>(src[t]);
      ptr[c] = dst;
    }
  }
  void advance(int n) { pos += n; }
  // The stored state: the last `len` samples of each channel.
  void values(std::vector<float>& out) const {
    for (int c = 0; c < channels; ++c) {
      const float* row = buf.data() + size_t(c) * cap;
      out.insert(out.end(), row + pos - len, row + pos);
    }
  }
};

// A convolution with its weights and, when K > 1, its input history.
template <class A>
struct ConvUnit {
  int in = 0, out = 0, K = 1, d = 1;
  const float* w = nullptr;
  const float* b = nullptr;
  History hist;
  std::vector<const float*> ptr;

  void init(const Tensor* weight, const Tensor* bias, int dilation) {
    out = weight->shape[0];
    in = weight->shape[1];
    K = weight->shape.size() > 2 ? weight->shape[2] : 1;
    d = dilation;
    w = weight->data.data();
    b = bias ? bias->data.data() : nullptr;
    if (K > 1) hist.init(in, (K - 1) * d);
    ptr.resize(size_t(in));
  }
  // x: in rows of stride kChunk; y: out rows of stride kChunk.
  void run(const float* x, float* y, int n) {
    if (K > 1) {
      hist.template push<A>(x, n, ptr.data());
    } else {
      for (int i = 0; i < in; ++i) ptr[size_t(i)] = x + size_t(i) * kChunk;
    }
    conv_time<A>(w, b, out, in, K, d, ptr.data(), y, kChunk, n);
    if (K > 1) hist.advance(n);
  }
  void reset() {
    if (K > 1) hist.reset();
  }
  void values(std::vector<float>& v) const {
    if (K > 1) hist.values(v);
  }
};
