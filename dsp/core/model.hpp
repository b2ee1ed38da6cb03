// The loaded effect: its description, graph and weights, read-only once built.
// Streams (engine.cpp) keep all per-stream state; many streams can share one
// Model. Built only by load_model() (loader.cpp), which validates everything.
#pragma once
#include <cstddef>
#include <cstdint>
#include <map>
#include <memory>
#include <string>
#include <vector>

#include "../layers/registry.hpp"

namespace earshot {

enum class ActFn : int { identity, tanh, sigmoid, relu, leaky_relu, softsign, hardtanh };

struct ActSpec {
  ActFn fn = ActFn::identity;
  float slope = 0.01f;  // leaky_relu: y = slope·x for x ≤ 0
  float lo = -1.0f;     // hardtanh bounds
  float hi = 1.0f;
};

// A weight tensor, always F32 in memory (F16 converted at load), row-major in
// PyTorch's layout.
struct Tensor {
  std::vector<int> shape;
  std::vector<float> data;
  size_t size() const { return data.size(); }
};

// One value per row of EARSHOT_LAYER_TYPES (dsp/layers/registry.hpp).
enum class LayerType {
#define EARSHOT_X(type, Name) type,
  EARSHOT_LAYER_TYPES(EARSHOT_X)
#undef EARSHOT_X
};

// The type's name in effect files, e.g. "gru".
inline const char* layer_type_name(LayerType t) {
  static const char* const kNames[] = {
#define EARSHOT_X(type, Name) #type,
      EARSHOT_LAYER_TYPES(EARSHOT_X)
#undef EARSHOT_X
  };
  return kNames[int(t)];
}

// The type named `name`; false when no row of the table has that name.
inline bool layer_type_from_name(const std::string& name, LayerType& t) {
#define EARSHOT_X(type, Name)  \
  if (name == #type) {           \
    t = LayerType::type;         \
    return true;                 \
  }
  EARSHOT_LAYER_TYPES(EARSHOT_X)
#undef EARSHOT_X
  return false;
}

// "linear, conv1d, ..." in table order.
inline std::string layer_type_list() {
  std::string s;
#define EARSHOT_X(type, Name) s += std::string(s.empty() ? "" : ", ") + #type;
  EARSHOT_LAYER_TYPES(EARSHOT_X)
#undef EARSHOT_X
  return s;
}

// A small MLP from the control vector to 2C values [γ; β] (FiLM).
struct MlpSpec {
  std::vector<int> widths;  // n_controls, hidden..., 2C
  ActSpec act;              // between layers, not after the last
  std::vector<const Tensor*> weight, bias;  // per layer: [widths[j+1], widths[j]], [widths[j+1]]
};

struct LayerSpec {
  LayerType type = LayerType::linear;
  std::string name;
  int in = 0, out = 0;          // channels in and out of the whole layer
  int kernel = 1, dilation = 1; // conv1d, tcn, wavenet (kernel)
  int hidden = 0, num_layers = 1;  // lstm, gru
  int channels = 0, skip = 0;   // wavenet: residual channels C, skip channels S
  std::vector<int> dilations;   // wavenet
  bool bias = true;
  bool residual = true;         // tcn
  bool has_film = false;        // tcn
  ActSpec act;                  // activation, tcn
  MlpSpec film;                 // film, tcn
  std::map<std::string, Tensor> params;  // by parameter name without the layer prefix

  const Tensor* param(const std::string& p) const {
    auto it = params.find(p);
    return it == params.end() ? nullptr : &it->second;
  }
};

struct ControlSpec {
  std::string name, unit;
  float min = 0, max = 1, def = 0;
  float smoothing_ms = 20;
};

struct Model {
  int version = 1;
  double sample_rate = 48000;
  std::vector<ControlSpec> controls;
  std::vector<int> input_map;  // per network input channel: -1 audio, else control index
  std::vector<LayerSpec> layers;
  bool input_skip = false;
  std::string description;  // the effect description JSON, as stored
  std::string title;

  // Computed at load.
  int64_t parameters = 0;
  int64_t macs_per_sample = 0;
  int64_t receptive_field = 1;  // samples; meaningless when recurrent
  bool recurrent = false;
  int max_channels = 1;         // widest activation vector between layers
};

// Loader limits (documented in dsp/FORMAT.md).
constexpr size_t kMaxFileBytes = 256u << 20;
constexpr size_t kMaxHeaderBytes = 16u << 20;
constexpr int kMaxDim = 65536;
constexpr int kMaxChannels = 1024;
constexpr int kMaxKernel = 64;
constexpr int kMaxDilation = 65536;
constexpr int kMaxLayers = 256;
constexpr int kMaxControls = 16;
constexpr int kMaxRecurrentLayers = 8;
constexpr int kMaxWavenetLayers = 64;
constexpr int kMaxFilmHidden = 4;
constexpr int64_t kMaxParameters = 16777216;
constexpr int64_t kMaxReceptiveField = 1 << 20;

// Parses and validates an effect file held in memory. On failure returns null
// and sets `error` to a message naming the field or tensor at fault.
std::shared_ptr<const Model> load_model(const unsigned char* bytes, size_t len, std::string& error);

}  // namespace earshot
