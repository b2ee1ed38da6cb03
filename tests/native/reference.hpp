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
#include <stdexcept>
#include <string>

#include "effect_builder.hpp"

namespace testfx {

using Mat = Eigen::MatrixXd;  // channels × time
using Vec = Eigen::VectorXd;

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

 private:
  const Effect& fx_;
  rapidjson::Document doc_;

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

  Mat layer(const rapidjson::Value& L, const Mat& x, const Mat& controls) const {
    const std::string type = L["type"].GetString(), name = L["name"].GetString();
    const bool bias = flag(L, "bias", true);
    const int T = int(x.cols());
    if (type == "linear") return conv(name + ".weight", name + ".bias", bias, 1, x);
    if (type == "conv1d")
      return conv(name + ".weight", name + ".bias", bias, L.HasMember("dilation") ? L["dilation"].GetInt() : 1, x);
    if (type == "activation") return act_mat(L, "fn", x, 0.01);
    if (type == "gated") return gated(x);
    if (type == "film") return film(&L, name + ".", L["channels"].GetInt(), x, controls);
    if (type == "lstm" || type == "gru") {
      const int H = L["hidden"].GetInt(), layers = L.HasMember("num_layers") ? L["num_layers"].GetInt() : 1;
      Mat cur = x;
      for (int l = 0; l < layers; ++l) {
        const std::string s = std::to_string(l);
        const Mat Wih = W2(name + ".weight_ih_l" + s), Whh = W2(name + ".weight_hh_l" + s);
        const int G = type == "lstm" ? 4 : 3;
        const Vec bih = B(name + ".bias_ih_l" + s, G * H, bias), bhh = B(name + ".bias_hh_l" + s, G * H, bias);
        Vec h = Vec::Zero(H), c = Vec::Zero(H);
        Mat out(H, T);
        for (int t = 0; t < T; ++t) {
          const Vec gi = Wih * cur.col(t) + bih, gh = Whh * h + bhh;
          if (type == "lstm") {
            const Vec z = gi + gh;  // i, f, g, o
            const Vec i = z.segment(0, H).unaryExpr([](double v) { return sigm(v); });
            const Vec f = z.segment(H, H).unaryExpr([](double v) { return sigm(v); });
            const Vec g = z.segment(2 * H, H).array().tanh().matrix();
            const Vec o = z.segment(3 * H, H).unaryExpr([](double v) { return sigm(v); });
            c = f.cwiseProduct(c) + i.cwiseProduct(g);
            h = o.cwiseProduct(c.array().tanh().matrix());
          } else {  // r, z, n
            const Vec r = (gi.segment(0, H) + gh.segment(0, H)).unaryExpr([](double v) { return sigm(v); });
            const Vec z = (gi.segment(H, H) + gh.segment(H, H)).unaryExpr([](double v) { return sigm(v); });
            const Vec n = (gi.segment(2 * H, H) + r.cwiseProduct(gh.segment(2 * H, H))).array().tanh().matrix();
            h = (Vec::Ones(H) - z).cwiseProduct(n) + z.cwiseProduct(h);
          }
          out.col(t) = h;
        }
        cur = out;
      }
      return cur;
    }
    if (type == "wavenet") {
      Mat h = conv(name + ".input.weight", name + ".input.bias", bias, 1, x);
      Mat s;
      const auto& dil = L["dilations"];
      for (unsigned l = 0; l < dil.Size(); ++l) {
        const std::string p = name + ".layers." + std::to_string(l);
        const Mat g = gated(conv(p + ".conv.weight", p + ".conv.bias", bias, dil[l].GetInt(), h));
        h = h + conv(p + ".res.weight", p + ".res.bias", bias, 1, g);
        const Mat sk = conv(p + ".skip.weight", p + ".skip.bias", bias, 1, g);
        s = l == 0 ? sk : Mat(s + sk);
      }
      return s;
    }
    if (type == "tcn") {
      const int out = L["out"].GetInt(), in = L["in"].GetInt();
      Mat y = conv(name + ".conv.weight", name + ".conv.bias", bias, L.HasMember("dilation") ? L["dilation"].GetInt() : 1, x);
      if (L.HasMember("film")) y = film(&L["film"], name + ".film.", out, y, controls);
      if (L.HasMember("activation")) {
        const auto& a = L["activation"];
        const std::string fn = a["fn"].GetString();
        y = act_mat(a, "fn", y, fn == "leaky_relu" ? 0.2 : 0.01);
      } else {
        y = y.unaryExpr([](double v) { return v > 0 ? v : 0.2 * v; });
      }
      if (flag(L, "residual", true)) y += in == out ? x : conv(name + ".res.weight", "", false, 1, x);
      return y;
    }
    throw std::runtime_error("reference: unknown layer type " + type);
  }
};

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
