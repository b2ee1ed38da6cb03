// A table of small effects covering every layer type and the three published
// model families, with odd sizes, kernels 1/2/3/5 and dilations that are not
// powers of two. Weights are seeded uniform values scaled by 1/sqrt(fan-in).
#pragma once
#include <cmath>
#include <map>
#include <string>
#include <vector>

#include <Eigen/Dense>

#include "effect_builder.hpp"
#include "model.hpp"

namespace testfx {

struct Case {
  std::string name;
  Effect fx;
  int n_controls = 0;
};

inline float fan(int n) { return 1.0f / std::sqrt(float(n)); }

inline const char* two_controls(float smoothing_ms = 0) {
  static std::string s;
  s = "[{\"name\":\"drive\",\"unit\":\"\",\"min\":0,\"max\":1,\"default\":0.3,\"smoothing_ms\":" +
      std::to_string(smoothing_ms) +
      "},{\"name\":\"tone\",\"unit\":\"\",\"min\":-1,\"max\":1,\"default\":0.4,\"smoothing_ms\":" +
      std::to_string(smoothing_ms) + "}]";
  return s.c_str();
}

inline void linear(Builder& b, int in, int out, bool bias = true) {
  const std::string n = b.layer("linear", "\"in\":" + std::to_string(in) + ",\"out\":" + std::to_string(out) +
                                              (bias ? "" : ",\"bias\":false"));
  b.tensor(n + ".weight", {out, in}, fan(in));
  if (bias) b.tensor(n + ".bias", {out}, 0.1f);
}

inline void conv(Builder& b, int in, int out, int k, int d) {
  const std::string n = b.layer("conv1d", "\"in\":" + std::to_string(in) + ",\"out\":" + std::to_string(out) +
                                              ",\"kernel\":" + std::to_string(k) + ",\"dilation\":" + std::to_string(d));
  b.tensor(n + ".weight", {out, in, k}, fan(in * k));
  b.tensor(n + ".bias", {out}, 0.1f);
}

inline void act(Builder& b, int ch, const std::string& fn, const std::string& extra = "") {
  b.layer("activation", "\"channels\":" + std::to_string(ch) + ",\"fn\":\"" + fn + "\"" + extra);
}

inline void recurrent(Builder& b, const std::string& type, int in, int H, int layers) {
  const int G = type == "lstm" ? 4 : 3;
  const std::string n = b.layer(type, "\"in\":" + std::to_string(in) + ",\"hidden\":" + std::to_string(H) +
                                          ",\"num_layers\":" + std::to_string(layers));
  for (int l = 0; l < layers; ++l) {
    const std::string s = std::to_string(l);
    b.tensor(n + ".weight_ih_l" + s, {G * H, l == 0 ? in : H}, fan(H));
    b.tensor(n + ".weight_hh_l" + s, {G * H, H}, fan(H));
    b.tensor(n + ".bias_ih_l" + s, {G * H}, fan(H));
    b.tensor(n + ".bias_hh_l" + s, {G * H}, fan(H));
  }
}

inline void mlp(Builder& b, const std::string& prefix, int nctl, std::vector<int> hidden, int C) {
  std::vector<int> w{nctl};
  w.insert(w.end(), hidden.begin(), hidden.end());
  w.push_back(2 * C);
  for (size_t j = 0; j + 1 < w.size(); ++j) {
    b.tensor(prefix + "mlp." + std::to_string(j) + ".weight", {w[j + 1], w[j]}, fan(w[j]));
    b.tensor(prefix + "mlp." + std::to_string(j) + ".bias", {w[j + 1]}, 0.5f);
  }
}

inline std::string ints(const std::vector<int>& v) {
  std::string s = "[";
  for (size_t i = 0; i < v.size(); ++i) s += (i ? "," : "") + std::to_string(v[i]);
  return s + "]";
}

inline void film(Builder& b, int C, std::vector<int> hidden, int nctl) {
  const std::string n = b.layer("film", "\"channels\":" + std::to_string(C) + ",\"hidden\":" + ints(hidden));
  mlp(b, n + ".", nctl, hidden, C);
}

inline void wavenet(Builder& b, int in, int C, int S, int K, const std::vector<int>& dil) {
  const std::string n = b.layer("wavenet", "\"in\":" + std::to_string(in) + ",\"channels\":" + std::to_string(C) +
                                               ",\"skip\":" + std::to_string(S) + ",\"kernel\":" + std::to_string(K) +
                                               ",\"dilations\":" + ints(dil));
  b.tensor(n + ".input.weight", {C, in, 1}, fan(in));
  b.tensor(n + ".input.bias", {C}, 0.1f);
  for (size_t l = 0; l < dil.size(); ++l) {
    const std::string p = n + ".layers." + std::to_string(l);
    b.tensor(p + ".conv.weight", {2 * C, C, K}, fan(C * K));
    b.tensor(p + ".conv.bias", {2 * C}, 0.1f);
    b.tensor(p + ".res.weight", {C, C, 1}, fan(C));
    b.tensor(p + ".res.bias", {C}, 0.1f);
    b.tensor(p + ".skip.weight", {S, C, 1}, fan(C));
    b.tensor(p + ".skip.bias", {S}, 0.1f);
  }
}

inline void tcn(Builder& b, int in, int out, int K, int d, bool with_film, int nctl, const std::string& act_json = "") {
  const std::string n = b.layer("tcn", "\"in\":" + std::to_string(in) + ",\"out\":" + std::to_string(out) +
                                           ",\"kernel\":" + std::to_string(K) + ",\"dilation\":" + std::to_string(d) +
                                           (with_film ? ",\"film\":{\"hidden\":[7]}" : "") +
                                           (act_json.empty() ? "" : ",\"activation\":" + act_json));
  b.tensor(n + ".conv.weight", {out, in, K}, fan(in * K));
  b.tensor(n + ".conv.bias", {out}, 0.1f);
  if (with_film) mlp(b, n + ".film.", nctl, {7}, out);
  if (in != out) b.tensor(n + ".res.weight", {out, in, 1}, fan(in));
}

// The list the cases are added to: each case gets the next seed, and the
// control smoothing the caller asked for.
struct CaseList {
  explicit CaseList(float smoothing_ms) : smoothing_ms(smoothing_ms) {}
  std::vector<Case> cases;
  uint32_t seed = 1;
  float smoothing_ms;

  template <class Fill>
  void add(const std::string& name, int nctl, Fill&& fill) {
    Builder b(seed++);
    if (nctl) b.controls_json = two_controls(smoothing_ms);
    fill(b);
    cases.push_back({name, b.build(), nctl});
  }
};

// The recurrent types' cases: hidden 1, 5, 13, 32, one and two levels, with a
// linear head and the input skip.
inline void recurrent_cases(CaseList& list, const char* type) {
  for (int H : {1, 5, 13, 32})
    for (int L : {1, 2}) {
      if (H == 1 && L == 2) continue;
      list.add(std::string(type) + " H" + std::to_string(H) + " x" + std::to_string(L), 0, [=](Builder& b) {
        recurrent(b, type, 1, H, L);
        linear(b, H, 1);
        b.input_skip = true;
      });
    }
}

// A layer type's cases (framed by linear layers), by type name; filled by
// the types' test files (layer_test.hpp).
using CaseFill = void (*)(CaseList&);
inline std::map<std::string, CaseFill>& layer_cases() {
  static std::map<std::string, CaseFill> table;
  return table;
}

// The type names of the core's table (dsp/layers/registry.hpp), in order.
inline std::vector<std::string> layer_type_names() {
  return {
#define EARSHOT_X(type, Name) #type,
      EARSHOT_LAYER_TYPES(EARSHOT_X)
#undef EARSHOT_X
  };
}

// Whole models of the three published families, mixing the types.
inline void model_cases(CaseList& list) {
  // Recurrent family: controls as extra inputs, linear head, input skip (Wright et al. 2019/2020).
  list.add("model lstm-12 + controls", 2, [](Builder& b) {
    b.inputs = {"audio", "drive", "tone"};
    recurrent(b, "lstm", 3, 12, 1);
    linear(b, 12, 1);
    b.input_skip = true;
  });
  list.add("model gru-9 x2 + controls", 2, [](Builder& b) {
    b.inputs = {"audio", "drive", "tone"};
    recurrent(b, "gru", 3, 9, 2);
    linear(b, 9, 1);
    b.input_skip = true;
  });
  // Feed-forward WaveNet family (Damskägg et al. 2019).
  list.add("model wavenet k2 + controls in", 2, [](Builder& b) {
    b.inputs = {"audio", "drive", "tone"};
    wavenet(b, 3, 7, 4, 2, {1, 3, 9});
    linear(b, 4, 3);
    act(b, 3, "tanh");
    linear(b, 3, 1);
  });
  // TCN with FiLM on two controls (Steinmetz & Reiss 2022).
  list.add("model tcn + film", 2, [](Builder& b) {
    tcn(b, 1, 6, 5, 1, true, 2);
    tcn(b, 6, 6, 3, 7, true, 2);
    tcn(b, 6, 5, 5, 13, true, 2, "{\"fn\":\"tanh\"}");
    linear(b, 5, 1);
  });
}

// Every case: each type's (in the table's order), then the whole models.
inline std::vector<Case> all_cases(float smoothing_ms = 0) {
  CaseList list(smoothing_ms);
  for (const std::string& type : layer_type_names()) {
    auto it = layer_cases().find(type);
    if (it != layer_cases().end()) it->second(list);
  }
  model_cases(list);
  return list.cases;
}

// Per-sample control trajectory (controls × T) for a case with constant
// controls at their defaults.
inline Eigen::MatrixXd default_controls(int n_controls, int T) {
  Eigen::MatrixXd c(n_controls, T);
  if (n_controls >= 1) c.row(0).setConstant(double(0.3f));
  if (n_controls >= 2) c.row(1).setConstant(double(0.4f));
  return c;
}

}  // namespace testfx
