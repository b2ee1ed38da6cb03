// GRU, one or more layers, PyTorch's equations and gate order (r, z, n):
//   r = σ(W_ir x + b_ir + W_hr h + b_hr)
//   z = σ(W_iz x + b_iz + W_hz h + b_hz)
//   n = tanh(W_in x + b_in + r ⊙ (W_hn h + b_hn))
//   h' = (1 − z) ⊙ n + z ⊙ h
// The input and hidden products are kept apart (the hidden bias of n sits
// inside the reset product). Weights transposed for column-form products.
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
    std::vector<float> wih_t, whh_t, bih, bhh;  // [in][3H], [H][3H], [3H], [3H]
    std::vector<float> h;                       // state, [H]
  };
  int in, H;
  std::vector<Level> levels;
  std::vector<float> gi, gh, x;

  explicit GruLayer(const LayerSpec& s) : in(s.in), H(s.hidden) {
    for (int l = 0; l < s.num_layers; ++l) {
      Level L;
      L.in = l == 0 ? in : H;
      const std::string k = std::to_string(l);
      L.wih_t = transpose(*s.param("weight_ih_l" + k));
      L.whh_t = transpose(*s.param("weight_hh_l" + k));
      L.bih = s.bias ? s.param("bias_ih_l" + k)->data : std::vector<float>(size_t(3 * H), 0.0f);
      L.bhh = s.bias ? s.param("bias_hh_l" + k)->data : std::vector<float>(size_t(3 * H), 0.0f);
      L.h.assign(size_t(H), 0.0f);
      levels.push_back(std::move(L));
    }
    gi.assign(size_t(3 * H), 0.0f);
    gh.assign(size_t(3 * H), 0.0f);
    x.assign(size_t(std::max(in, H)), 0.0f);
  }

  void run(const float* xin, float* y, int n, const Ctx&) override {
    using O = Ops<A>;
    using S = Ops<scalar_arch>;
    constexpr int W = O::W;
    for (int t = 0; t < n; ++t) {
      for (int i = 0; i < in; ++i) x[size_t(i)] = xin[size_t(i) * kChunk + t];
      const float* cur = x.data();
      for (auto& L : levels) {
        gemv_cols<A>(L.wih_t.data(), 3 * H, cur, L.in, L.bih.data(), gi.data());
        gemv_cols<A>(L.whh_t.data(), 3 * H, L.h.data(), H, L.bhh.data(), gh.data());
        // Passes with the same operations as one loop: reset and update gates
        // over the whole 2H vector, the candidate's argument, its tanh, then
        // the state (independent values per pass, so the activations' chains
        // of many vectors overlap).
        float* h = L.h.data();
        float* a = gi.data();  // [0, 2H): r then update; [2H, 3H): candidate
        const float* b = gh.data();
        int j = 0;
        for (; j + W <= 2 * H; j += W) O::store(a + j, O::add(O::load(a + j), O::load(b + j)));
        for (; j < 2 * H; ++j) a[j] = a[j] + b[j];
        sigmoid_rows<A>(a, 2 * H);
        float* cand = a + 2 * H;
        for (j = 0; j + W <= H; j += W)
          O::store(cand + j, O::madd(O::load(a + j), O::load(b + 2 * H + j), O::load(cand + j)));
        for (; j < H; ++j) cand[j] = S::madd(a[j], b[2 * H + j], cand[j]);
        tanh_rows<A>(cand, H);
        const float* update = a + H;
        const auto one = O::set1(1.0f);
        for (j = 0; j + W <= H; j += W) {
          const auto u = O::load(update + j);
          const auto hv = O::add(O::mul(O::sub(one, u), O::load(cand + j)), O::mul(u, O::load(h + j)));
          O::store(h + j, flush_tiny<A>(hv));
        }
        for (; j < H; ++j)
          h[j] = flush_tiny<scalar_arch>((1.0f - update[j]) * cand[j] + update[j] * h[j]);
        cur = h;
      }
      for (int j = 0; j < H; ++j) y[size_t(j) * kChunk + t] = cur[j];
    }
  }
  void reset() override {
    for (auto& L : levels) std::fill(L.h.begin(), L.h.end(), 0.0f);
  }
  void state(std::vector<float>& v) const override {
    for (auto& L : levels) v.insert(v.end(), L.h.begin(), L.h.end());
  }
};
#endif  // EARSHOT_LAYER_KERNELS
