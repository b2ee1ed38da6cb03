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

// Rows [r, r + R·W) of a matrix-vector product in column (axpy) form,
// acc = init + Σ_i wt[i][·]·x[i] (wt transposed, row stride `rows`): R
// vectors held in registers across the whole column loop, each output's terms
// in column order. init may be acc.
// Always inlined (and so are its callers below): as a function of its own
// GCC copied the R starting sums through the stack in 16-byte halves and read
// them back whole, which missed store forwarding — LSTM-16 ran at 0.67x.
#if defined(__GNUC__)
#define EARSHOT_INLINE inline __attribute__((always_inline))
#else
#define EARSHOT_INLINE inline
#endif

template <class A, int R>
EARSHOT_INLINE void gemv_block(const float* wt, int rows, const float* x, int in, const float* init, float* acc, int r) {
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

// ---- recurrent weights in panels ------------------------------------------
// Vectors per block of the one-lane product: eight suit native code; V8's code
// for the WebAssembly SIMD build runs faster with six (docs/wasm.md).
#if defined(__wasm_simd128__)
constexpr int kGemvVectors = 6;
#else
constexpr int kGemvVectors = 8;
#endif

// A transposed weight wt[in][rows] stored as panels of P = kGemvVectors·W
// rows, each panel [in][P] contiguous, and the rows past the last whole panel
// as one more panel [in][rows − full]. A block of gemv then reads one
// contiguous stretch of memory instead of `in` pieces a row stride apart,
// which the hardware prefetchers follow better when the matrix streams from
// L2. The same floats as wt: only their order in memory differs.
// The panels start on a 64-byte boundary (a cache line), so no vector load
// straddles two lines: with malloc's 16-byte alignment the speed of a run
// depended on where the heap put the matrix (measured ±30 % between runs).
template <class A>
struct Panels {
  int rows = 0, in = 0, P = 0, full = 0;
  std::vector<float> store;  // the panels from store[off]
  size_t off = 0;

  // From the file's weight w[rows][in] (PyTorch's layout): wt[i][r] = w[r][i].
  void pack(const Tensor& w) {
    rows = w.shape[0];
    in = w.shape[1];
    P = kGemvVectors * Ops<A>::W;
    full = rows / P * P;
    store.assign(w.data.size() + 16, 0.0f);
    off = (64 - reinterpret_cast<uintptr_t>(store.data()) % 64) % 64 / sizeof(float);
    float* o = store.data() + off;
    for (int b = 0; b < full; b += P)
      for (int i = 0; i < in; ++i)
        for (int k = 0; k < P; ++k) *o++ = w.data[size_t(b + k) * in + size_t(i)];
    for (int i = 0; i < in; ++i)
      for (int k = full; k < rows; ++k) *o++ = w.data[size_t(k) * in + size_t(i)];
  }
  const float* panel(int r) const { return store.data() + off + size_t(r) * in; }  // r: first row, a multiple of P
  int rest() const { return rows - full; }
};

// gemv_cols on a panelled matrix: the same sums, term by term. backward: the
// whole panels from last to first. A recurrent layer alternates the direction
// every sample, so the panels it used last (still in L1 when the matrix is
// larger than L1) are the first it uses next; the panels are independent
// sums, so the order changes no value.
// The rows past the last whole panel.
template <class A>
EARSHOT_INLINE void gemv_tail(const Panels<A>& M, const float* x, const float* init, float* acc) {
  using S = Ops<scalar_arch>;
  constexpr int W = Ops<A>::W;
  const int in = M.in, full = M.full, rest = M.rest();
  if (rest == 0) return;
  const float* t = M.panel(full);
  int r = gemv_rest<A, kGemvVectors - 1>(t, rest, x, in, init + full, acc + full, 0, rest / W);
  for (; r < rest; ++r) {
    float a0 = init[full + r];
    for (int i = 0; i < in; ++i) a0 = S::madd(t[size_t(i) * rest + r], x[i], a0);
    acc[full + r] = a0;
  }
}

template <class A>
EARSHOT_INLINE void gemv_panels(const Panels<A>& M, const float* x, const float* init, float* acc, bool backward) {
  constexpr int R = kGemvVectors;
  if (!backward)
    for (int b = 0; b < M.full; b += M.P) gemv_block<A, R>(M.panel(b), M.P, x, M.in, init + b, acc + b, 0);
  gemv_tail<A>(M, x, init, acc);
  if (backward)
    for (int b = M.full - M.P; b >= 0; b -= M.P) gemv_block<A, R>(M.panel(b), M.P, x, M.in, init + b, acc + b, 0);
}

// gemv_panels for every lane l in [0, lanes), panel by panel: each panel
// (P rows × in columns, 16 KiB at 64 × 64 floats) is read from L2 for the
// first lane and from L1 for the others, so a matrix larger than L1 streams
// once per sample for all lanes instead of once per lane. init[l] may be acc[l].
template <class A>
inline void gemv_panels_lanes(const Panels<A>& M, const float* const* x, const float* const* init,
                              float* const* acc, int lanes, bool backward) {
  constexpr int R = kGemvVectors;
  const int P = M.P, in = M.in, full = M.full;
  if (lanes == 1) return gemv_panels<A>(M, x[0], init[0], acc[0], backward);
  if (!backward)
    for (int b = 0; b < full; b += P)
      for (int l = 0; l < lanes; ++l) gemv_block<A, R>(M.panel(b), P, x[l], in, init[l] + b, acc[l] + b, 0);
  for (int l = 0; l < lanes; ++l) gemv_tail<A>(M, x[l], init[l], acc[l]);
  if (backward)
    for (int b = full - P; b >= 0; b -= P)
      for (int l = 0; l < lanes; ++l) gemv_block<A, R>(M.panel(b), P, x[l], in, init[l] + b, acc[l] + b, 0);
}

// Sample t of every lane's `in` rows (stride kChunk) into lane l's vector at
// x + l·stride; cur[l] points at it. The recurrent layers' per-sample input.
inline void gather_lanes(const float* const* xin, int t, int in, int lanes, float* x, int stride, const float** cur) {
  for (int l = 0; l < lanes; ++l) {
    float* xl = x + size_t(l) * size_t(stride);
    for (int i = 0; i < in; ++i) xl[i] = xin[l][size_t(i) * kChunk + t];
    cur[l] = xl;
  }
}

// cur[l][0..H) into sample t of lane l's H output rows.
inline void scatter_lanes(const float* const* cur, int t, int H, int lanes, float* const* y) {
  for (int l = 0; l < lanes; ++l)
    for (int j = 0; j < H; ++j) y[l][size_t(j) * kChunk + t] = cur[l][j];
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
