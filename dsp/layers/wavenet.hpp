// WaveNet-style gated residual stack (van den Oord et al. 2016; the
// feed-forward form of Damskägg et al. 2019):
//   x = input(x)                         1×1, in → C
//   per layer l: z = conv_l(x)           causal, C → 2C, kernel K, dilation d_l
//                g = tanh(z[0:C]) ⊙ σ(z[C:2C])
//                x = x + res_l(g)        1×1, C → C
//                s = s + skip_l(g)       1×1, C → S
//   output s (S channels)
// ---- description part (types.hpp): fields, figures, stream memory, display ----
#ifndef EARSHOT_LAYER_KERNELS
namespace earshot {

struct WavenetType {
  static bool parse(LayerFields& f, LayerSpec& L) {
    if (!f.in("in", L) || !f.integer("channels", L.channels, 1, kMaxChannels) ||
        !f.integer("skip", L.skip, 1, kMaxChannels) || !f.integer("kernel", L.kernel, 1, kMaxKernel))
      return false;
    const rapidjson::Value* d = f.member("dilations");
    if (!d || !d->IsArray() || d->Size() < 1 || d->Size() > unsigned(kMaxWavenetLayers))
      return f.fail(f.where + ": field 'dilations' must be an array of 1 to " + std::to_string(kMaxWavenetLayers) +
                    " integers");
    for (auto& e : d->GetArray()) {
      if (!e.IsInt() || e.GetInt() < 1 || e.GetInt() > kMaxDilation)
        return f.fail(f.where + ": each dilation must be an integer from 1 to " + std::to_string(kMaxDilation));
      L.dilations.push_back(e.GetInt());
    }
    const int C = L.channels;
    if (!f.conv_params(L, "input", C, L.in, 1, L.bias)) return false;
    for (size_t l = 0; l < L.dilations.size(); ++l) {
      const std::string p = "layers." + std::to_string(l);
      if (!f.conv_params(L, p + ".conv", 2 * C, C, L.kernel, L.bias) || !f.conv_params(L, p + ".res", C, C, 1, L.bias) ||
          !f.conv_params(L, p + ".skip", L.skip, C, 1, L.bias))
        return false;
    }
    L.out = L.skip;
    return true;
  }
  static LayerCost cost(const LayerSpec& L) {
    const int C = L.channels;
    LayerCost c;
    c.macs = int64_t(C) * L.in;
    for (int d : L.dilations) {
      c.macs += int64_t(2 * C) * C * L.kernel + int64_t(C) * C + int64_t(L.skip) * C;
      c.receptive_field += int64_t(L.kernel - 1) * d;
    }
    c.widest = 2 * C;
    return c;
  }
  static double stream_bytes(const LayerSpec& L) {
    using namespace stream_memory;
    const int C = L.channels;
    // 4C rows of scratch (x, z, g); the max(C, skip) rows counted after them
    // held the residual and skip sums before the kernel added them in place.
    // They stay in the figure so that the memory limit a file is checked
    // against (and the figures in tests/data/effects/expected.json) do not
    // change: the figure remains an upper bound, 4·max(C, skip)·kChunk bytes high.
    double b = kPtr * L.in + kF * (4.0 * C + std::max(C, L.skip)) * kChunk;
    for (int d : L.dilations) b += history(C, L.kernel, d) + 3 * kPtr * C + 3 * 256.0;
    return b;
  }
  template <class W>
  static void describe(const LayerSpec& L, W& w) {
    w.Key("kernel");
    w.Int(L.kernel);
    w.Key("channels");
    w.Int(L.channels);
    w.Key("dilations");
    w.StartArray();
    for (int d : L.dilations) w.Int(d);
    w.EndArray();
  }
  static std::string detail(const LayerSpec& L) {
    std::string d = "channels " + short_number(L.channels) + ", kernel " + short_number(L.kernel) + ", skip " +
                    short_number(L.skip) + ", dilations";
    for (int x : L.dilations) d += " " + short_number(x);
    return d;
  }
};

}  // namespace earshot

// ---- kernel part: included once per variant, inside its namespace (variant_graph.cpp) ----
#else

template <class A>
struct WavenetLayer : Layer {
  struct Level {
    ConvUnit<A> conv, res, skip;
  };
  int C, S;
  ConvUnit<A> input;
  std::vector<Level> levels;
  std::vector<float> x, z, g;  // [C], [2C], [C] rows of kChunk

  explicit WavenetLayer(const LayerSpec& s) : C(s.channels), S(s.skip) {
    auto p = [&](const std::string& k) { return s.param(k); };
    input.init(p("input.weight"), s.bias ? p("input.bias") : nullptr, 1);
    levels.resize(s.dilations.size());
    for (size_t l = 0; l < levels.size(); ++l) {
      const std::string q = "layers." + std::to_string(l);
      levels[l].conv.init(p(q + ".conv.weight"), s.bias ? p(q + ".conv.bias") : nullptr, s.dilations[l]);
      levels[l].res.init(p(q + ".res.weight"), s.bias ? p(q + ".res.bias") : nullptr, 1);
      levels[l].skip.init(p(q + ".skip.weight"), s.bias ? p(q + ".skip.bias") : nullptr, 1);
    }
    x.assign(size_t(C) * kChunk, 0.0f);
    z.assign(size_t(2 * C) * kChunk, 0.0f);
    g.assign(size_t(C) * kChunk, 0.0f);
  }

  void run(const float* xin, float* y, int n, const Ctx&) override {
    input.run(xin, x.data(), n);
    for (size_t l = 0; l < levels.size(); ++l) {
      levels[l].conv.run(x.data(), z.data(), n);
      gated_rows<A>(z.data(), g.data(), C, n);
      // x += res(g), y += skip(g): the sum is formed first, then added (the
      // kernel's addend), as a separate pass would.
      levels[l].res.run(g.data(), x.data(), n, x.data());
      levels[l].skip.run(g.data(), y, n, l == 0 ? nullptr : y);
    }
  }
  void reset() override {
    for (auto& L : levels) L.conv.reset();
  }
  void state(std::vector<float>& v) const override {
    for (auto& L : levels) L.conv.values(v);
  }
};
#endif  // EARSHOT_LAYER_KERNELS
