// GRU, one or more layers, PyTorch's equations and gate order (r, z, n):
//   r = σ(W_ir x + b_ir + W_hr h + b_hr)
//   z = σ(W_iz x + b_iz + W_hz h + b_hz)
//   n = tanh(W_in x + b_in + r ⊙ (W_hn h + b_hn))
//   h' = (1 − z) ⊙ n + z ⊙ h
// The input and hidden products are kept apart (the hidden bias of n sits
// inside the reset product). Weights transposed, in panels of rows
// (kernels.hpp, Panels), for column-form products.
// ---- description part (types.hpp): fields, figures, stream memory, display ----
#ifndef EARSHOT_LAYER_KERNELS
namespace earshot {

// 3 gates; per level 7H values (the 3H input and 3H hidden biases, h); 6H gate
// scratch (the input and hidden products).
struct GruType : RecurrentType<3, 7, 6> {};

}  // namespace earshot

// ---- kernel part: included once per variant, inside its namespace (variant_graph.cpp) ----
#else

template <class A>
struct GruLayer : Layer {
  struct Level {
    int in;
    Panels<A> wih, whh;                         // transposed, [in][3H] and [H][3H], in panels (kernels.hpp)
    std::vector<float> bih, bhh;                // [3H], [3H]
    std::vector<float> h;                       // state, [lanes][H]
  };
  int in, H, lanes;
  std::vector<Level> levels;
  std::vector<float> gi, gh, x;  // [lanes][3H], [lanes][3H], [lanes][max(in, H)]

  // Lockstep (layer.hpp): one object keeps every lane's state.
  explicit GruLayer(const LayerSpec& s, int lanes_ = 1) : in(s.in), H(s.hidden), lanes(lanes_) {
    for (int l = 0; l < s.num_layers; ++l) {
      Level L;
      L.in = l == 0 ? in : H;
      const std::string k = std::to_string(l);
      L.wih.pack(*s.param("weight_ih_l" + k));
      L.whh.pack(*s.param("weight_hh_l" + k));
      L.bih = s.bias ? s.param("bias_ih_l" + k)->data : std::vector<float>(size_t(3 * H), 0.0f);
      L.bhh = s.bias ? s.param("bias_hh_l" + k)->data : std::vector<float>(size_t(3 * H), 0.0f);
      L.h.assign(size_t(lanes) * H, 0.0f);
      levels.push_back(std::move(L));
    }
    gi.assign(size_t(lanes) * 3 * H, 0.0f);
    gh.assign(size_t(lanes) * 3 * H, 0.0f);
    x.assign(size_t(lanes) * std::max(in, H), 0.0f);
  }

  // The gates of one lane from its input products a and hidden products b,
  // and its state update.
  void update(float* a, const float* b, float* h) {
    using O = Ops<A>;
    using S = Ops<scalar_arch>;
    constexpr int W = O::W;
    // Passes with the same operations as one loop: reset and update gates
    // over the whole 2H vector, the candidate's argument, its tanh, then
    // the state (independent values per pass, so the activations' chains
    // of many vectors overlap). a: [0, 2H) r then update; [2H, 3H) candidate.
    int j = 0;
    for (; j + W <= 2 * H; j += W) O::store(a + j, O::add(O::load(a + j), O::load(b + j)));
    for (; j < 2 * H; ++j) a[j] = a[j] + b[j];
    sigmoid_rows<A>(a, 2 * H);
    float* cand = a + 2 * H;
    for (j = 0; j + W <= H; j += W)
      O::store(cand + j, O::madd(O::load(a + j), O::load(b + 2 * H + j), O::load(cand + j)));
    for (; j < H; ++j) cand[j] = S::madd(a[j], b[2 * H + j], cand[j]);
    tanh_rows<A>(cand, H);
    const float* u = a + H;
    const auto one = O::set1(1.0f);
    for (j = 0; j + W <= H; j += W) {
      const auto uv = O::load(u + j);
      const auto hv = O::add(O::mul(O::sub(one, uv), O::load(cand + j)), O::mul(uv, O::load(h + j)));
      O::store(h + j, flush_tiny<A>(hv));
    }
    for (; j < H; ++j) h[j] = flush_tiny<scalar_arch>((1.0f - u[j]) * cand[j] + u[j] * h[j]);
  }

  void run(const float* xin, float* y, int n, const Ctx& ctx) override { run_lanes(&xin, &y, n, ctx); }

  void run_lanes(const float* const* xin, float* const* y, int n, const Ctx&) override {
    const int xs = std::max(in, H);
    const float* cur[kMaxLanes];
    const float* hp[kMaxLanes];
    const float* bi[kMaxLanes];
    const float* bh[kMaxLanes];
    float* ip[kMaxLanes];
    float* qp[kMaxLanes];
    for (int l = 0; l < lanes; ++l) {
      ip[l] = gi.data() + size_t(l) * 3 * H;
      qp[l] = gh.data() + size_t(l) * 3 * H;
    }
    for (int t = 0; t < n; ++t) {
      gather_lanes(xin, t, in, lanes, x.data(), xs, cur);
      for (auto& L : levels) {
        for (int l = 0; l < lanes; ++l) {
          hp[l] = L.h.data() + size_t(l) * H;
          bi[l] = L.bih.data();
          bh[l] = L.bhh.data();
        }
        gemv_panels_lanes<A>(L.wih, cur, bi, ip, lanes, backward);
        gemv_panels_lanes<A>(L.whh, hp, bh, qp, lanes, backward);
        for (int l = 0; l < lanes; ++l) {
          update(ip[l], qp[l], L.h.data() + size_t(l) * H);
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
    for (auto& L : levels) std::fill(L.h.begin(), L.h.end(), 0.0f);
  }
  // Lane after lane; per lane every level's h.
  void state(std::vector<float>& v) const override {
    for (int l = 0; l < lanes; ++l)
      for (auto& L : levels) v.insert(v.end(), L.h.begin() + long(l) * H, L.h.begin() + long(l + 1) * H);
  }
};
#endif  // EARSHOT_LAYER_KERNELS
