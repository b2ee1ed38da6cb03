// The description side of every layer type: what a type's file
// (dsp/layers/<type>.hpp) provides next to its kernel, and the tools it uses.
//
// Each <type>.hpp has two parts. Included through this header, it gives its
// description part, `struct <Name>Type` (Name from its row of the table in
// registry.hpp) with
//   static bool parse(LayerFields& f, LayerSpec& L);   // fields and tensors
//   static LayerCost cost(const LayerSpec& L);          // dsp/FORMAT.md figures
//   static double stream_bytes(const LayerSpec& L);     // per-stream memory
//   template <class W> static void describe(const LayerSpec& L, W& json);
//   static std::string detail(const LayerSpec& L);      // `earshot info` text
// Included by variant_graph.cpp with EARSHOT_LAYER_KERNELS defined, inside a
// variant's namespace, it gives its kernel part, `<Name>Layer<Arch>`.
//
// The loader (loader.cpp), the stream-memory bound and the info JSON
// (engine.cpp) and `earshot info` reach the types only through the table.
#pragma once
#include <algorithm>
#include <cstdint>
#include <string>
#include <vector>

#include "../core/model.hpp"
#include "../core/runner.hpp"

#include <rapidjson/document.h>

namespace earshot {

// The figures of one layer (dsp/FORMAT.md, "Figures"), added up by the loader.
struct LayerCost {
  int64_t macs = 0;             // multiply-adds per sample
  int64_t receptive_field = 0;  // samples of past input it adds
  bool recurrent = false;       // keeps state beyond any receptive field
  int widest = 0;               // widest activation inside the layer, beyond its in and out
};

// The reader a type's parse() gets: the layer's JSON object and the file's
// tensors, with checks whose messages name the layer and the field. Every
// method returns false after recording the message (implemented in
// dsp/core/loader.cpp).
class LayerFields {
 public:
  struct Source;  // the file's tensors and the error sink (loader.cpp)
  LayerFields(Source& src, const rapidjson::Value& o, std::string at, int width, int n_controls)
      : where(std::move(at)), width(width), n_controls(n_controls), src_(src), o_(o) {}

  const std::string where;  // "layer 'name'"
  const int width;          // channels the previous stage gives
  const int n_controls;

  const rapidjson::Value& object() const { return o_; }
  const rapidjson::Value* member(const char* key) const;
  bool fail(const std::string& msg);
  // The input width field (`in` or `channels`): an integer equal to `width`.
  bool in(const char* key, LayerSpec& L);
  bool integer(const char* key, int& out, int lo, int hi, bool required = true, int def = 0);
  bool boolean(const char* key, bool& out, bool def);
  // An activation named by field `fn_key` of `o`, with slope/min/max.
  bool activation(const rapidjson::Value& o, ActSpec& a, const std::string& where, const char* fn_key);
  // Claims tensor `<layer>.<param>` with the expected shape into L.params.
  bool take(LayerSpec& L, const std::string& param, std::vector<int> shape);
  // A convolution's weight [out][in][k] and, with `bias`, its bias [out].
  bool conv_params(LayerSpec& L, const std::string& prefix, int out, int in, int k, bool bias);
  // The FiLM generator's MLP from the controls to [γ; β] of `channels` each.
  bool mlp(LayerSpec& L, const rapidjson::Value* film_obj, int channels, const std::string& prefix);

 private:
  Source& src_;
  const rapidjson::Value& o_;
};

// ---- recurrent layers (lstm.hpp, gru.hpp): PyTorch's parameter names, `gates` blocks ----
inline bool recurrent_fields(LayerFields& f, LayerSpec& L, int gates) {
  if (!f.in("in", L) || !f.integer("hidden", L.hidden, 1, kMaxChannels) ||
      !f.integer("num_layers", L.num_layers, 1, kMaxRecurrentLayers, false, 1))
    return false;
  for (int l = 0; l < L.num_layers; ++l) {
    const int in = l == 0 ? L.in : L.hidden;
    const std::string s = std::to_string(l);
    if (!f.take(L, "weight_ih_l" + s, {gates * L.hidden, in}) || !f.take(L, "weight_hh_l" + s, {gates * L.hidden, L.hidden}))
      return false;
    if (L.bias && (!f.take(L, "bias_ih_l" + s, {gates * L.hidden}) || !f.take(L, "bias_hh_l" + s, {gates * L.hidden})))
      return false;
  }
  L.out = L.hidden;
  return true;
}

inline LayerCost recurrent_cost(const LayerSpec& L, int gates) {
  LayerCost c;
  for (int l = 0; l < L.num_layers; ++l) c.macs += int64_t(gates) * L.hidden * ((l == 0 ? L.in : L.hidden) + L.hidden);
  c.recurrent = true;
  return c;
}

template <class W>
void recurrent_describe(const LayerSpec& L, W& w) {
  w.Key("hidden");
  w.Int(L.hidden);
  w.Key("num_layers");
  w.Int(L.num_layers);
}

std::string recurrent_detail(const LayerSpec& L);

// Per-stream bytes of a recurrent layer: its transposed weight copies, then
// `per_level` values per hidden unit and level (state, biases), `scratch` per
// hidden unit (gate products) and one input row.
inline double recurrent_stream_bytes(const LayerSpec& L, double per_level, double scratch) {
  double p = 0;
  for (auto& kv : L.params) p += double(kv.second.size());
  return sizeof(float) * (p + per_level * L.hidden * L.num_layers + scratch * L.hidden + std::max(L.in, L.hidden));
}

// A recurrent type's description part, by its gate count and its stream
// memory figures (recurrent_stream_bytes).
template <int Gates, int PerLevel, int Scratch>
struct RecurrentType {
  static bool parse(LayerFields& f, LayerSpec& L) { return recurrent_fields(f, L, Gates); }
  static LayerCost cost(const LayerSpec& L) { return recurrent_cost(L, Gates); }
  static double stream_bytes(const LayerSpec& L) { return recurrent_stream_bytes(L, PerLevel, Scratch); }
  template <class W>
  static void describe(const LayerSpec& L, W& w) {
    recurrent_describe(L, w);
  }
  static std::string detail(const LayerSpec& L) { return recurrent_detail(L); }
};

// ---- causal convolutions with one dilation (conv1d.hpp, tcn.hpp) ----
template <class W>
void conv_describe(const LayerSpec& L, W& w) {
  w.Key("kernel");
  w.Int(L.kernel);
  w.Key("dilation");
  w.Int(L.dilation);
}
std::string conv_detail(const LayerSpec& L);

// ---- stream memory helpers (dsp/FORMAT.md, "Stream memory") ----------------
namespace stream_memory {
constexpr double kF = sizeof(float);
constexpr double kPtr = 8;  // a pointer's bytes, at most: one figure natively and in wasm32

// A causal convolution's history ring (kernels.hpp, History).
inline double history(int channels, int kernel, int dilation) {
  if (kernel <= 1) return 0;
  const double h = double(kernel - 1) * dilation;
  return kF * channels * (h + std::max(8.0 * kChunk, h));
}

// The FiLM generator's buffers (film.hpp, FilmGen).
inline double film(const MlpSpec& f, int C) {
  int wmax = 0;
  for (int w : f.widths) wmax = std::max(wmax, w);
  const double nctl = f.widths.empty() ? 0 : f.widths.front();
  return kF * (2 * nctl + 2.0 * wmax + 2.0 * C + 2.0 * C * kChunk);
}
}  // namespace stream_memory

// Six significant digits, trailing zeros dropped (printf %.6g): 0.01, 48000.
std::string short_number(double v);
// "tanh", "leaky_relu (slope 0.2)", "hardtanh (-1 .. 1)".
std::string activation_text(const ActSpec& a);
// The file's name of an activation function.
const char* activation_name(ActFn fn);
// The detail column of `earshot info` for one layer: its type's detail().
std::string layer_detail(const LayerSpec& L);

}  // namespace earshot

// Every type's description part, in table order.
#define EARSHOT_LAYER_DESCRIPTIONS
#include "registry.hpp"
#undef EARSHOT_LAYER_DESCRIPTIONS
