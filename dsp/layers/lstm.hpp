// LSTM, one or more layers, PyTorch's equations and gate order (i, f, g, o):
//   z = W_ih x + b_ih + W_hh h + b_hh
//   i = σ(z_i), f = σ(z_f), g = tanh(z_g), o = σ(z_o)
//   c' = f ⊙ c + i ⊙ g,  h' = o ⊙ tanh(c')
// Weights are stored transposed ([in][4H]) in panels of rows (kernels.hpp,
// Panels) so the products run in column (axpy) form over the 4H gate rows;
// b_ih + b_hh are summed once at load.
// ---- description part (types.hpp): fields, figures, stream memory, display ----
#ifndef EARSHOT_LAYER_KERNELS
namespace earshot {

// 4 gates; per level 6H values (the 4H summed biases, h and c); 4H gate scratch.
struct LstmType : RecurrentType<4, 6, 4> {};

}  // namespace earshot

// ---- kernel part: included once per variant, inside its namespace (variant_graph.cpp) ----
#else

template <class A>
struct LstmLayer : Layer {
  struct Level {
    int in;
    Panels<A> wih, whh;                     // transposed, [in][4H] and [H][4H], in panels (kernels.hpp)
    std::vector<float> bias;                // [4H]
    std::vector<float> h, c;                // state, [lanes][H]
  };
  int in, H, lanes;
  std::vector<Level> levels;
  std::vector<float> z, x;  // [lanes][4H], [lanes][max(in, H)]: gates, input vector of one sample

  // Lockstep (layer.hpp): one object keeps every lane's state.
  explicit LstmLayer(const LayerSpec& s, int lanes_ = 1) : in(s.in), H(s.hidden), lanes(lanes_) {
    for (int l = 0; l < s.num_layers; ++l) {
      Level L;
      L.in = l == 0 ? in : H;
      const std::string k = std::to_string(l);
      L.wih.pack(*s.param("weight_ih_l" + k));
      L.whh.pack(*s.param("weight_hh_l" + k));
      L.bias.assign(size_t(4 * H), 0.0f);
      if (s.bias) {
        const auto& bi = s.param("bias_ih_l" + k)->data;
        const auto& bh = s.param("bias_hh_l" + k)->data;
        for (int r = 0; r < 4 * H; ++r) L.bias[size_t(r)] = bi[size_t(r)] + bh[size_t(r)];
      }
      L.h.assign(size_t(lanes) * H, 0.0f);
      L.c.assign(size_t(lanes) * H, 0.0f);
      levels.push_back(std::move(L));
    }
    z.assign(size_t(lanes) * 4 * H, 0.0f);
    x.assign(size_t(lanes) * std::max(in, H), 0.0f);
  }

  // The gates of one lane from its products z, and its state update.
  void update(float* zi, float* c, float* h) {
    using O = Ops<A>;
    using S = Ops<scalar_arch>;
    constexpr int W = O::W;
    // Two passes with the same operations as one: first every gate's
    // activation over the whole 4H vector (independent values, so the
    // polynomial chains of many vectors overlap), then the state update.
    float* zf = zi + H;
    float* zg = zf + H;
    float* zo = zg + H;
    sigmoid_rows<A>(zi, 2 * H);
    tanh_rows<A>(zg, H);
    sigmoid_rows<A>(zo, H);
    // The cell state, then h = o ⊙ tanh(c) in groups of tanh_n.
    int j = 0;
    for (; j + W <= H; j += W) {
      const auto ig = O::mul(O::load(zi + j), O::load(zg + j));
      O::store(c + j, flush_tiny<A>(O::madd(O::load(zf + j), O::load(c + j), ig)));
    }
    constexpr int N = kSquashGroup;
    int k = 0;
    for (; k + N * W <= j; k += N * W) {
      typename O::V v[N];
      for (int q = 0; q < N; ++q) v[q] = O::load(c + k + q * W);
      tanh_n<A, N>(v);
      for (int q = 0; q < N; ++q) O::store(h + k + q * W, flush_tiny<A>(O::mul(O::load(zo + k + q * W), v[q])));
    }
    for (; k < j; k += W) O::store(h + k, flush_tiny<A>(O::mul(O::load(zo + k), tanh_v<A>(O::load(c + k)))));
    for (; j < H; ++j) {
      const float ig = S::mul(zi[j], zg[j]);
      const float cv = flush_tiny<scalar_arch>(S::madd(zf[j], c[j], ig));
      c[j] = cv;
      h[j] = flush_tiny<scalar_arch>(S::mul(zo[j], tanh_v<scalar_arch>(cv)));
    }
  }

  void run(const float* xin, float* y, int n, const Ctx& ctx) override { run_lanes(&xin, &y, n, ctx); }

  void run_lanes(const float* const* xin, float* const* y, int n, const Ctx&) override {
    const int xs = std::max(in, H);
    const float* cur[kMaxLanes];
    const float* hp[kMaxLanes];
    const float* bp[kMaxLanes];
    float* zp[kMaxLanes];
    for (int l = 0; l < lanes; ++l) zp[l] = z.data() + size_t(l) * 4 * H;
    for (int t = 0; t < n; ++t) {
      gather_lanes(xin, t, in, lanes, x.data(), xs, cur);
      for (auto& L : levels) {
        for (int l = 0; l < lanes; ++l) {
          hp[l] = L.h.data() + size_t(l) * H;
          bp[l] = L.bias.data();
        }
        gemv_panels_lanes<A>(L.wih, cur, bp, zp, lanes, backward);
        gemv_panels_lanes<A>(L.whh, hp, zp, zp, lanes, backward);
        for (int l = 0; l < lanes; ++l) {
          update(zp[l], L.c.data() + size_t(l) * H, L.h.data() + size_t(l) * H);
          cur[l] = hp[l];
        }
      }
      scatter_lanes(cur, t, H, lanes, y);
      backward = !backward;
    }
  }
  // Direction of the next sample's products (gemv_panels: alternating keeps
  // the panels used last, still in L1, first).
  bool backward = false;

  void reset() override {
    for (auto& L : levels) {
      std::fill(L.h.begin(), L.h.end(), 0.0f);
      std::fill(L.c.begin(), L.c.end(), 0.0f);
    }
  }
  // Lane after lane; per lane every level's h then c.
  void state(std::vector<float>& v) const override {
    for (int l = 0; l < lanes; ++l)
      for (auto& L : levels) {
        v.insert(v.end(), L.h.begin() + long(l) * H, L.h.begin() + long(l + 1) * H);
        v.insert(v.end(), L.c.begin() + long(l) * H, L.c.begin() + long(l + 1) * H);
      }
  }
};
#endif  // EARSHOT_LAYER_KERNELS
