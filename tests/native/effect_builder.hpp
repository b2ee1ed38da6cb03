// Builds effect files (dsp/FORMAT.md) in memory for tests: a description, a
// graph and seeded random weights, with hooks to corrupt any part.
#pragma once
#include <cstdint>
#include <cstring>
#include <map>
#include <random>
#include <string>
#include <vector>

#define RAPIDJSON_HAS_STDSTRING 1
#include <rapidjson/document.h>
#include <rapidjson/stringbuffer.h>
#include <rapidjson/writer.h>

namespace testfx {

struct TensorData {
  std::vector<int> shape;
  std::vector<float> values;
  std::string dtype = "F32";
};

inline std::string to_json(const rapidjson::Value& v) {
  rapidjson::StringBuffer sb;
  rapidjson::Writer<rapidjson::StringBuffer> w(sb);
  v.Accept(w);
  return sb.GetString();
}

struct Effect {
  std::string description;                 // effect description JSON
  std::map<std::string, TensorData> tensors;  // name → data
  std::map<std::string, std::string> extra_header;  // raw JSON appended per key (for corrupt files)

  // Serialises the safetensors container. Tensors in name order, packed.
  std::vector<unsigned char> bytes() const {
    std::string h = "{\"__metadata__\":{\"earshot.effect\":";
    rapidjson::StringBuffer sb;
    rapidjson::Writer<rapidjson::StringBuffer> w(sb);
    w.String(description);
    h += sb.GetString();
    h += "}";
    std::vector<unsigned char> data;
    for (auto& kv : tensors) {
      const size_t begin = data.size();
      for (float f : kv.second.values) {
        if (kv.second.dtype == "F16") {
          const uint16_t x = float_to_half(f);
          data.push_back(uint8_t(x & 0xff));
          data.push_back(uint8_t(x >> 8));
        } else {
          uint32_t b;
          std::memcpy(&b, &f, 4);
          for (int i = 0; i < 4; ++i) data.push_back(uint8_t(b >> (8 * i)));
        }
      }
      h += ",\"" + kv.first + "\":{\"dtype\":\"" + kv.second.dtype + "\",\"shape\":[";
      for (size_t i = 0; i < kv.second.shape.size(); ++i) h += (i ? "," : "") + std::to_string(kv.second.shape[i]);
      h += "],\"data_offsets\":[" + std::to_string(begin) + "," + std::to_string(data.size()) + "]}";
    }
    for (auto& kv : extra_header) h += ",\"" + kv.first + "\":" + kv.second;
    h += "}";
    while ((8 + h.size()) % 8) h += ' ';
    std::vector<unsigned char> out(8);
    uint64_t n = h.size();
    for (int i = 0; i < 8; ++i) out[size_t(i)] = uint8_t(n >> (8 * i));
    out.insert(out.end(), h.begin(), h.end());
    out.insert(out.end(), data.begin(), data.end());
    return out;
  }

  static uint16_t float_to_half(float f) {  // round to nearest even; normal range only (tests)
    uint32_t b;
    std::memcpy(&b, &f, 4);
    const uint32_t sign = (b >> 16) & 0x8000u;
    int e = int((b >> 23) & 0xff) - 127 + 15;
    uint32_t m = b & 0x7fffffu;
    if (((b >> 23) & 0xff) == 0xff) return uint16_t(sign | 0x7c00u | (m ? 0x200u : 0));
    if (e <= 0) return uint16_t(sign);
    if (e >= 31) return uint16_t(sign | 0x7c00u);
    uint32_t h = sign | uint32_t(e) << 10 | m >> 13;
    const uint32_t rest = m & 0x1fffu;
    if (rest > 0x1000u || (rest == 0x1000u && (h & 1))) ++h;
    return uint16_t(h);
  }
};

// A graph under construction: layer JSON objects plus their weights.
class Builder {
 public:
  explicit Builder(uint32_t seed, double sample_rate = 48000) : rng_(seed), rate_(sample_rate) {}

  std::vector<std::string> inputs{"audio"};
  std::string controls_json = "[]";
  bool input_skip = false;
  std::string title = "test effect";

  // Adds a layer given its JSON fields (without name/type); returns the name.
  std::string layer(const std::string& type, const std::string& fields) {
    const std::string name = type + std::to_string(layers_.size());
    layers_.push_back("{\"type\":\"" + type + "\",\"name\":\"" + name + "\"" + (fields.empty() ? "" : "," + fields) + "}");
    return name;
  }
  // Adds a tensor of uniform random values in [−scale, scale].
  void tensor(const std::string& name, std::vector<int> shape, float scale) {
    size_t n = 1;
    for (int s : shape) n *= size_t(s);
    TensorData t;
    t.shape = shape;
    std::uniform_real_distribution<float> u(-scale, scale);
    for (size_t i = 0; i < n; ++i) t.values.push_back(u(rng_));
    fx_.tensors[name] = t;
  }
  Effect build() {
    std::string g = "{\"inputs\":[";
    for (size_t i = 0; i < inputs.size(); ++i) g += (i ? ",\"" : "\"") + inputs[i] + "\"";
    g += "],\"layers\":[";
    for (size_t i = 0; i < layers_.size(); ++i) g += (i ? "," : "") + layers_[i];
    g += std::string("],\"input_skip\":") + (input_skip ? "true" : "false") + "}";
    fx_.description = "{\"format\":\"earshot-effect\",\"version\":1,\"sample_rate\":" + std::to_string(int(rate_)) +
                      ",\"controls\":" + controls_json + ",\"credits\":{\"title\":\"" + title + "\"},\"graph\":" + g + "}";
    return fx_;
  }
  std::mt19937& rng() { return rng_; }

 private:
  std::mt19937 rng_;
  double rate_;
  std::vector<std::string> layers_;
  Effect fx_;
};

// Deterministic test signal: a decaying 220 Hz tone, a rising sweep and
// seeded noise bursts, about −6 dBFS peak. Computed in double with std::sin
// (only the test's input; both sides of each comparison get the same floats).
std::vector<float> test_signal(int n, double rate = 48000, uint32_t seed = 7);

}  // namespace testfx
