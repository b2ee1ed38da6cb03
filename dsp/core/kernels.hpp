// Dense kernels, written once against the Ops vocabulary (simd.hpp) and
// compiled per variant. Each output element is computed as
//   acc = start; for each product in a fixed order: acc = w·x + acc
// whatever the vector width, so every variant gives the same bits (no FMA in
// parity variants, no horizontal reductions). Vector loops cover the bulk; a
// scalar loop with the same operations covers the tail.
#pragma once

// Causal (dilated) convolution over a chunk, vectorised over time and
// register-blocked: each inner step loads TB time vectors of one input channel
// once and feeds them to OB output rows (one broadcast weight each), so a load
// serves several multiply-adds. Every output element is still
//   acc = b[o]; for k in [0, K): for i in [0, in): acc = w[o][i][k]·x[i][t − (K−1−k)·d] + acc
// (then, with an addend row, acc = addend + acc), the same operations in the
// same order whatever OB, TB or the vector width: the blocking only interleaves
// independent sums.
// w: [out][in][K] (PyTorch layout), b: [out] or null. x: sample 0 of input
// channel 0; channel i starts at x + i·xs, with at least (K−1)·d valid samples
// before it. y: out rows, row stride ys; add: null or out rows of stride ys
// (may be y itself) added after the sum.

// OB output rows × TB time vectors of width Ops<A2>::W, starting at row o, time t.
template <class A2, int OB, int TB>
inline void conv_block(const float* w, const float* b, int o, int in, int K, int d, const float* x, size_t xs,
                       float* y, const float* add, int ys, int t) {
  using O = Ops<A2>;
  using V = typename O::V;
  constexpr int W = O::W;
  V acc[OB][TB];
  for (int r = 0; r < OB; ++r) {
    const V bv = O::set1(b ? b[o + r] : 0.0f);
    for (int j = 0; j < TB; ++j) acc[r][j] = bv;
  }
  const size_t wr = size_t(in) * K;  // weight row stride
  const float* wo = w + size_t(o) * wr;
  for (int k = 0; k < K; ++k) {
    const float* xk = x + t - (K - 1 - k) * d;
    for (int i = 0; i < in; ++i) {
      const float* p = xk + size_t(i) * xs;
      V xv[TB];
      for (int j = 0; j < TB; ++j) xv[j] = O::load(p + j * W);
      const float* wi = wo + size_t(i) * K + k;
      for (int r = 0; r < OB; ++r) {
        const V wv = O::set1(wi[size_t(r) * wr]);
        for (int j = 0; j < TB; ++j) acc[r][j] = O::madd(wv, xv[j], acc[r][j]);
      }
    }
  }
  for (int r = 0; r < OB; ++r) {
    float* yr = y + size_t(o + r) * ys + t;
    const float* ar = add ? add + size_t(o + r) * ys + t : nullptr;
    for (int j = 0; j < TB; ++j) O::store(yr + j * W, ar ? O::add(O::load(ar + j * W), acc[r][j]) : acc[r][j]);
  }
}

// Rows [o, o + OB) over the whole chunk: blocks of TB vectors, then single
// vectors, then single samples.
template <class A, int OB, int TB>
inline void conv_rows(const float* w, const float* b, int o, int in, int K, int d, const float* x, size_t xs,
                      float* y, const float* add, int ys, int n) {
  constexpr int W = Ops<A>::W;
  int t = 0;
  for (; t + TB * W <= n; t += TB * W) conv_block<A, OB, TB>(w, b, o, in, K, d, x, xs, y, add, ys, t);
  for (; t + W <= n; t += W) conv_block<A, OB, 1>(w, b, o, in, K, d, x, xs, y, add, ys, t);
  for (; t < n; ++t) conv_block<scalar_arch, OB, 1>(w, b, o, in, K, d, x, xs, y, add, ys, t);
}

template <class A>
inline void conv_time(const float* w, const float* b, int out, int in, int K, int d, const float* x, size_t xs,
                      float* y, int ys, int n, const float* add = nullptr) {
  // 4 rows × 2 vectors: 8 sums, 2 input vectors, a broadcast weight and the
  // product fit the 16 vector registers of x86-64 and of V8's WebAssembly SIMD
  // code. With FMA there is no separate product: 4 × 3 fits and runs faster
  // (4 × 3, 8 × 1, 2 × 4 and 4 × 4 were slower without FMA; docs/benchmarks.md).
  constexpr int OB = 4, TB = EARSHOT_FUSED ? 3 : 2;
  int o = 0;
  for (; o + OB <= out; o += OB) conv_rows<A, OB, TB>(w, b, o, in, K, d, x, xs, y, add, ys, n);
  for (; o + 2 <= out; o += 2) conv_rows<A, 2, 2 * TB>(w, b, o, in, K, d, x, xs, y, add, ys, n);
  for (; o < out; ++o) conv_rows<A, 1, 4>(w, b, o, in, K, d, x, xs, y, add, ys, n);
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

// Forces inlining of the lockstep blocks into their one caller, so the lane
// pointers stay in registers across the blocks.
#if defined(__GNUC__)
#define EARSHOT_INLINE inline __attribute__((always_inline))
#else
#define EARSHOT_INLINE inline
#endif

// gemv_cols for several lanes (lockstep streams) with one matrix: rows
// [r, r + R·W) of lanes g in [0, G), so each weight vector loaded serves G
// lanes. Every lane's sums have the terms and order of gemv_cols.
template <class A, int R, int G>
EARSHOT_INLINE void gemv_block_lanes(const float* wt, int rows, const float* const* x, int in, const float* const* init,
                             float* const* acc, int r) {
  using O = Ops<A>;
  using V = typename O::V;
  constexpr int W = O::W;
  V a[G][R];
  for (int g = 0; g < G; ++g)
    for (int j = 0; j < R; ++j) a[g][j] = O::load(init[g] + r + j * W);
  for (int i = 0; i < in; ++i) {
    V xv[G];
    for (int g = 0; g < G; ++g) xv[g] = O::set1(x[g][i]);
    const float* p = wt + size_t(i) * rows + r;
    for (int j = 0; j < R; ++j) {
      const V w = O::load(p + j * W);
      for (int g = 0; g < G; ++g) a[g][j] = O::madd(w, xv[g], a[g][j]);
    }
  }
  for (int g = 0; g < G; ++g)
    for (int j = 0; j < R; ++j) O::store(acc[g] + r + j * W, a[g][j]);
}

template <class A, int R, int G>
EARSHOT_INLINE int gemv_rest_lanes(const float* wt, int rows, const float* const* x, int in, const float* const* init,
                           float* const* acc, int r, int m) {
  if constexpr (R == 0) {
    return r;
  } else {
    if (m != R) return gemv_rest_lanes<A, R - 1, G>(wt, rows, x, in, init, acc, r, m);
    gemv_block_lanes<A, R, G>(wt, rows, x, in, init, acc, r);
    return r + R * Ops<A>::W;
  }
}

// acc[l] = init[l] + wt·x[l] for every lane l in [0, lanes): gemv_cols of
// each lane, the lanes taken in pairs so each weight load feeds two products
// (an odd last lane runs alone). init[l] may be acc[l].
template <class A>
inline void gemv_cols_lanes(const float* wt, int rows, const float* const* x, int in, const float* const* init,
                            float* const* acc, int lanes) {
  using S = Ops<scalar_arch>;
  constexpr int W = Ops<A>::W;
  constexpr int R = 6;  // 2 lanes × 4 vectors of sums, 2 broadcasts and a weight: 11 registers
  int l = 0;
  for (; l + 2 <= lanes; l += 2) {
    const float* const* xl = x + l;
    const float* const* il = init + l;
    float* const* al = acc + l;
    int r = 0;
    for (; r + R * W <= rows; r += R * W) gemv_block_lanes<A, R, 2>(wt, rows, xl, in, il, al, r);
    r = gemv_rest_lanes<A, R - 1, 2>(wt, rows, xl, in, il, al, r, (rows - r) / W);
    for (; r < rows; ++r)
      for (int g = 0; g < 2; ++g) {
        float a0 = il[g][r];
        for (int i = 0; i < in; ++i) a0 = S::madd(wt[size_t(i) * rows + r], xl[g][i], a0);
        al[g][r] = a0;
      }
  }
  if (l < lanes) gemv_cols<A>(wt, rows, x[l], in, init[l], acc[l]);
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
  // x: in rows of stride kChunk; y: out rows of stride kChunk. add: null, or
  // out rows of stride kChunk added to the result (may be y: y += conv(x)).
  void run(const float* x, float* y, int n, const float* add = nullptr) {
    if (K > 1) {
      hist.template push<A>(x, n, ptr.data());
      conv_time<A>(w, b, out, in, K, d, ptr[0], size_t(hist.cap), y, kChunk, n, add);
      hist.advance(n);
    } else {
      conv_time<A>(w, b, out, in, K, d, x, size_t(kChunk), y, kChunk, n, add);
    }
  }
  void reset() {
    if (K > 1) hist.reset();
  }
  void values(std::vector<float>& v) const {
    if (K > 1) hist.values(v);
  }
};
