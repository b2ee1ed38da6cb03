// FiLM (Perez et al. 2018):
//
//   [γ; β] = MLP(controls),   y = γ ⊙ x + β   (C channels; γ, β of length C)
//
// with the MLP's activation between its layers, none after the last. FilmGen
// evaluates the MLP only when the controls move; the film layer and the tcn
// block (tcn.hpp) both use it.
// ---- description part (types.hpp): fields, figures, stream memory, display ----
#ifndef EARSHOT_LAYER_KERNELS
namespace earshot {

struct FilmType {
  static bool parse(LayerFields& f, LayerSpec& L) {
    if (!f.in("channels", L)) return false;
    L.out = L.in;
    L.has_film = true;
    return f.mlp(L, &f.object(), L.in, "");
  }
  static LayerCost cost(const LayerSpec&) { return {}; }
  static double stream_bytes(const LayerSpec& L) { return stream_memory::film(L.film, L.in); }
  template <class W>
  static void describe(const LayerSpec&, W&) {}
  static std::string detail(const LayerSpec& L) {
    std::string d = "MLP of the controls";
    if (L.film.widths.size() > 2) {
      d += ", hidden";
      for (size_t j = 1; j + 1 < L.film.widths.size(); ++j) d += " " + short_number(L.film.widths[j]);
    }
    return d;
  }
};

}  // namespace earshot

// ---- kernel part: included once per variant, inside its namespace (variant_graph.cpp) ----
#else

// The FiLM generator: [γ; β] = MLP(controls), evaluated per sample only when
// the control vector changes (plain float loops in a fixed order: the same in
// every variant). Fills gamma/beta rows (stride kChunk) for a chunk.
struct FilmGen {
  const MlpSpec* spec = nullptr;
  int C = 0, nctl = 0;
  std::vector<float> last, cur, a, b, gamma_beta;  // gamma_beta: [2C] for the last control vector
  std::vector<float> gamma, beta;          // [C][kChunk]
  bool valid = false, filled_const = false;

  void init(const MlpSpec& s, int channels) {
    spec = &s;
    C = channels;
    nctl = s.widths.front();
    last.assign(size_t(nctl), 0.0f);
    cur.assign(size_t(nctl), 0.0f);
    int wmax = 0;
    for (int wdt : s.widths) wmax = std::max(wmax, wdt);
    a.assign(size_t(wmax), 0.0f);
    b.assign(size_t(wmax), 0.0f);
    gamma_beta.assign(size_t(2 * C), 0.0f);
    gamma.assign(size_t(C) * kChunk, 0.0f);
    beta.assign(size_t(C) * kChunk, 0.0f);
  }
  void reset() { valid = filled_const = false; }
  void eval() {
    using S = Ops<scalar_arch>;
    std::copy(cur.begin(), cur.end(), a.begin());
    const size_t nl = spec->weight.size();
    for (size_t j = 0; j < nl; ++j) {
      const int ni = spec->widths[j], no = spec->widths[j + 1];
      const float* w = spec->weight[j]->data.data();
      const float* bias = spec->bias[j]->data.data();
      for (int o = 0; o < no; ++o) {
        float acc = bias[o];
        for (int i = 0; i < ni; ++i) acc = S::madd(w[size_t(o) * ni + i], a[size_t(i)], acc);
        b[size_t(o)] = j + 1 < nl ? act_v<scalar_arch>(spec->act, acc) : acc;
      }
      std::swap(a, b);
    }
    std::copy(a.begin(), a.begin() + 2 * C, gamma_beta.begin());
  }
  void fill(const float* ctl, int n) {
    bool changed = !valid;
    for (int t = 0; t < n; ++t) {
      bool diff = !valid;
      for (int c = 0; c < nctl; ++c) {
        cur[size_t(c)] = ctl[size_t(c) * kChunk + t];
        if (cur[size_t(c)] != last[size_t(c)]) diff = true;
      }
      if (diff) {
        eval();
        last = cur;
        valid = true;
        changed = true;
        filled_const = false;
      }
      if (!filled_const)
        for (int c = 0; c < C; ++c) {
          gamma[size_t(c) * kChunk + t] = gamma_beta[size_t(c)];
          beta[size_t(c) * kChunk + t] = gamma_beta[size_t(C + c)];
        }
    }
    if (!changed && !filled_const) {
      // Whole chunk constant: rows now hold the constant for every t ≤ n; fill
      // the rest so later chunks can skip filling.
      for (int c = 0; c < C; ++c) {
        std::fill(gamma.begin() + size_t(c) * kChunk, gamma.begin() + size_t(c + 1) * kChunk, gamma_beta[size_t(c)]);
        std::fill(beta.begin() + size_t(c) * kChunk, beta.begin() + size_t(c + 1) * kChunk, gamma_beta[size_t(C + c)]);
      }
      filled_const = true;
    }
  }
  // y = γ ⊙ y + β over C rows of stride kChunk.
  template <class A>
  void apply(float* y, int n) const {
    using O = Ops<A>;
    for (int c = 0; c < C; ++c) {
      float* row = y + size_t(c) * kChunk;
      const float* g = gamma.data() + size_t(c) * kChunk;
      const float* be = beta.data() + size_t(c) * kChunk;
      int t = 0;
      for (; t + O::W <= n; t += O::W) O::store(row + t, O::madd(O::load(g + t), O::load(row + t), O::load(be + t)));
      for (; t < n; ++t) row[t] = Ops<scalar_arch>::madd(g[t], row[t], be[t]);
    }
  }
};

template <class A>
struct FilmLayer : Layer {
  FilmGen gen;
  int C;
  explicit FilmLayer(const LayerSpec& s) : C(s.in) { gen.init(s.film, C); }
  void run(const float* x, float* y, int n, const Ctx& ctx) override {
    gen.fill(ctx.ctl, n);
    if (x != y)
      for (int c = 0; c < C; ++c) std::copy(x + size_t(c) * kChunk, x + size_t(c) * kChunk + n, y + size_t(c) * kChunk);
    gen.template apply<A>(y, n);
  }
  void reset() override { gen.reset(); }
};
#endif  // EARSHOT_LAYER_KERNELS
