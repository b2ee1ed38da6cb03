// An independent double-precision evaluator of an effect graph, written with
// Eigen over the whole signal at once (no streaming, no chunks, std:: math),
// straight from the published equations:
//   LSTM, GRU: the equations in PyTorch's nn.LSTM / nn.GRU documentation;
//   causal dilated convolution and the gated residual stack: van den Oord et
//   al. 2016, "WaveNet: A Generative Model for Raw Audio";
//   FiLM: Perez et al. 2018, "FiLM: Visual Reasoning with a General
//   Conditioning Layer" (y = γ ⊙ x + β);
//   TCN block: Steinmetz & Reiss 2022, made causal.
// The core is tested against this, layer by layer and for whole models.
#pragma once
#include <Eigen/Dense>
#include <cmath>
#include <map>
#include <stdexcept>
#include <string>

#include "effect_builder.hpp"

namespace testfx {

using Mat = Eigen::MatrixXd;  // channels × time
using Vec = Eigen::VectorXd;

class Reference;

// One layer type's oracle: its output (channels × time) for input x, from the
// layer object `L` of the description and the per-sample controls.
using LayerOracle = Mat (*)(const Reference& r, const rapidjson::Value& L, const Mat& x, const Mat& controls);

// Every type's oracle by its name in effect files.
inline std::map<std::string, LayerOracle>& layer_oracles() {
  static std::map<std::string, LayerOracle> table;
  return table;
}

class Reference {
 public:
  explicit Reference(const Effect& fx) : fx_(fx) { doc_.Parse(fx.description.c_str()); }

  // audio: T samples; controls: n_controls × T (per-sample values). Returns T samples.
  std::vector<double> run(const std::vector<float>& audio, const Mat& controls) {
    const int T = int(audio.size());
    const auto& g = doc_["graph"];
    const auto& ctl = doc_["controls"];
    Mat x(g["inputs"].Size(), T);
    for (unsigned c = 0; c < g["inputs"].Size(); ++c) {
      const std::string n = g["inputs"][c].GetString();
      if (n == "audio") {
        for (int t = 0; t < T; ++t) x(c, t) = audio[size_t(t)];
      } else {
        for (unsigned k = 0; k < ctl.Size(); ++k)
          if (n == ctl[k]["name"].GetString()) x.row(c) = controls.row(k);
      }
    }
    for (auto& L : g["layers"].GetArray()) x = layer(L, x, controls);
    std::vector<double> y(static_cast<size_t>(T));
    const bool skip = g.HasMember("input_skip") && g["input_skip"].GetBool();
    for (int t = 0; t < T; ++t) y[size_t(t)] = x(0, t) + (skip ? double(audio[size_t(t)]) : 0.0);
    return y;
  }

  // ---- tools for the types' oracles ----
  const Effect& effect() const { return fx_; }

  Mat W2(const std::string& name) const {  // [rows][cols] tensor as a matrix
    const TensorData& t = fx_.tensors.at(name);
    Mat m(t.shape[0], t.shape[1]);
    for (int r = 0; r < t.shape[0]; ++r)
      for (int c = 0; c < t.shape[1]; ++c) m(r, c) = t.values[size_t(r) * t.shape[1] + c];
    return m;
  }
  Vec B(const std::string& name, int n, bool bias) const {
    Vec v = Vec::Zero(n);
    if (!bias) return v;
    const TensorData& t = fx_.tensors.at(name);
    for (int i = 0; i < n; ++i) v(i) = t.values[size_t(i)];
    return v;
  }
  static bool flag(const rapidjson::Value& L, const char* k, bool def) {
    return L.HasMember(k) ? L[k].GetBool() : def;
  }
  static double sigm(double v) { return 1.0 / (1.0 + std::exp(-v)); }

  static double act(const std::string& fn, double v, double slope, double lo, double hi) {
    if (fn == "tanh") return std::tanh(v);
    if (fn == "sigmoid") return sigm(v);
    if (fn == "relu") return v > 0 ? v : 0;
    if (fn == "leaky_relu") return v > 0 ? v : slope * v;
    if (fn == "softsign") return v / (1 + std::fabs(v));
    if (fn == "hardtanh") return std::min(hi, std::max(lo, v));
    if (fn == "identity") return v;
    throw std::runtime_error("reference: unknown activation " + fn);
  }
  static Mat act_mat(const rapidjson::Value& o, const char* key, const Mat& x, double def_slope) {
    const std::string fn = o[key].GetString();
    const double slope = o.HasMember("slope") ? o["slope"].GetDouble() : def_slope;
    const double lo = o.HasMember("min") ? o["min"].GetDouble() : -1, hi = o.HasMember("max") ? o["max"].GetDouble() : 1;
    return x.unaryExpr([&](double v) { return act(fn, v, slope, lo, hi); });
  }

  // Causal dilated convolution: y[:, t] = b + Σ_k W[:, :, k] x[:, t − (K−1−k)·d].
  Mat conv(const std::string& wname, const std::string& bname, bool bias, int d, const Mat& x) const {
    const TensorData& w = fx_.tensors.at(wname);
    const int out = w.shape[0], in = w.shape[1], K = w.shape.size() > 2 ? w.shape[2] : 1;
    const int T = int(x.cols());
    Mat y(out, T);
    const Vec b = B(bname, out, bias);
    for (int t = 0; t < T; ++t) y.col(t) = b;
    for (int k = 0; k < K; ++k) {
      Mat Wk(out, in);
      for (int o = 0; o < out; ++o)
        for (int i = 0; i < in; ++i) Wk(o, i) = w.values[(size_t(o) * in + i) * K + k];
      const int off = (K - 1 - k) * d;
      for (int t = off; t < T; ++t) y.col(t) += Wk * x.col(t - off);
    }
    return y;
  }

  Mat film(const rapidjson::Value* spec, const std::string& prefix, int C, const Mat& x, const Mat& controls) const {
    std::string fn = "relu";
    if (spec && spec->HasMember("activation")) fn = (*spec)["activation"].GetString();
    std::vector<Mat> Ws;
    std::vector<Vec> Bs;
    for (int j = 0;; ++j) {
      const std::string p = prefix + "mlp." + std::to_string(j);
      if (!fx_.tensors.count(p + ".weight")) break;
      Ws.push_back(W2(p + ".weight"));
      Bs.push_back(B(p + ".bias", int(Ws.back().rows()), true));
    }
    Mat y = x;
    for (int t = 0; t < x.cols(); ++t) {
      Vec h = controls.col(t);
      for (size_t j = 0; j < Ws.size(); ++j) {
        h = Ws[j] * h + Bs[j];
        if (j + 1 < Ws.size()) h = h.unaryExpr([&](double v) { return act(fn, v, 0.01, -1, 1); });
      }
      y.col(t) = h.head(C).cwiseProduct(x.col(t)) + h.tail(C);
    }
    return y;
  }

  static Mat gated(const Mat& z) {
    const int C = int(z.rows() / 2);
    return z.topRows(C).array().tanh().matrix().cwiseProduct(z.bottomRows(C).unaryExpr([](double v) { return sigm(v); }));
  }

  // One layer, by its type's oracle (registered by tests/native/layers/<type>_test.cpp).
  Mat layer(const rapidjson::Value& L, const Mat& x, const Mat& controls) const {
    const std::string type = L["type"].GetString();
    auto it = layer_oracles().find(type);
    if (it == layer_oracles().end()) throw std::runtime_error("reference: no oracle for layer type " + type);
    return it->second(*this, L, x, controls);
  }

 private:
  const Effect& fx_;
  rapidjson::Document doc_;
};

// A recurrent layer over its levels: gi = W_ih x + b_ih, gh = W_hh h + b_hh per
// time step, then `cell(gi, gh, h, c)` updates the state (lstm, gru).
template <class Cell>
Mat recurrent_oracle(const Reference& r, const rapidjson::Value& L, const Mat& x, int gates, Cell cell) {
  const std::string name = L["name"].GetString();
  const bool bias = !L.HasMember("bias") || L["bias"].GetBool();
  const int H = L["hidden"].GetInt(), levels = L.HasMember("num_layers") ? L["num_layers"].GetInt() : 1;
  const int T = int(x.cols());
  Mat cur = x;
  for (int l = 0; l < levels; ++l) {
    const std::string s = std::to_string(l);
    const Mat Wih = r.W2(name + ".weight_ih_l" + s), Whh = r.W2(name + ".weight_hh_l" + s);
    const Vec bih = r.B(name + ".bias_ih_l" + s, gates * H, bias), bhh = r.B(name + ".bias_hh_l" + s, gates * H, bias);
    Vec h = Vec::Zero(H), c = Vec::Zero(H);
    Mat out(H, T);
    for (int t = 0; t < T; ++t) {
      cell(Vec(Wih * cur.col(t) + bih), Vec(Whh * h + bhh), h, c);
      out.col(t) = h;
    }
    cur = out;
  }
  return cur;
}

// A layer name and its boolean field, as in the file.
inline std::string layer_name(const rapidjson::Value& L) { return L["name"].GetString(); }
inline bool layer_bias(const rapidjson::Value& L) { return !L.HasMember("bias") || L["bias"].GetBool(); }

// Error-to-signal ratio in dB: 10·log10(Σ(y − ŷ)² / Σ y²).
inline double esr_db(const std::vector<double>& ref, const std::vector<float>& y) {
  double e = 0, s = 0;
  for (size_t i = 0; i < ref.size(); ++i) {
    e += (ref[i] - y[i]) * (ref[i] - y[i]);
    s += ref[i] * ref[i];
  }
  return 10 * std::log10(e / s + 1e-300);
}

inline double max_abs(const std::vector<double>& ref, const std::vector<float>& y) {
  double m = 0;
  for (size_t i = 0; i < ref.size(); ++i) m = std::max(m, std::fabs(ref[i] - y[i]));
  return m;
}

}  // namespace testfx
