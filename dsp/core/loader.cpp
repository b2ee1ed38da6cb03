// Effect file loader: safetensors container + effect description (dsp/FORMAT.md).
// Trusts nothing: every length, offset, shape and count is checked before use,
// and each rejection names the field or tensor at fault.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <set>

#include "earshot/earshot.h"
#include "model.hpp"
#include "json_reader.hpp"
#include "../layers/types.hpp"

#include <rapidjson/document.h>
#include <rapidjson/error/en.h>

namespace earshot {
namespace {

using rapidjson::Value;

struct Fail {
  std::string& error;
  bool operator()(const std::string& msg) {
    error = msg;
    return false;
  }
};

// The activation functions by their names in effect files.
const std::pair<const char*, ActFn> kActivations[] = {
    {"tanh", ActFn::tanh},       {"sigmoid", ActFn::sigmoid},       {"relu", ActFn::relu},
    {"leaky_relu", ActFn::leaky_relu}, {"softsign", ActFn::softsign}, {"hardtanh", ActFn::hardtanh},
    {"identity", ActFn::identity}};

struct RawTensor {
  std::string dtype;
  std::vector<int> shape;
  uint64_t begin = 0, end = 0;
  bool used = false;
};

float half_to_float(uint16_t h) {
  const uint32_t sign = uint32_t(h & 0x8000u) << 16;
  const uint32_t exp = (h >> 10) & 0x1f;
  const uint32_t man = h & 0x3ffu;
  uint32_t bits;
  if (exp == 0) {
    if (man == 0) {
      bits = sign;
    } else {  // subnormal half: normalise
      int e = -1;
      uint32_t m = man;
      do {
        ++e;
        m <<= 1;
      } while ((m & 0x400u) == 0);
      bits = sign | uint32_t(127 - 15 - e) << 23 | (m & 0x3ffu) << 13;
    }
  } else if (exp == 31) {
    bits = sign | 0x7f800000u | man << 13;  // inf / nan (rejected later)
  } else {
    bits = sign | (exp + 127 - 15) << 23 | man << 13;
  }
  float f;
  std::memcpy(&f, &bits, 4);
  return f;
}

uint64_t read_u64le(const unsigned char* p) {
  uint64_t v = 0;
  for (int i = 7; i >= 0; --i) v = v << 8 | p[i];
  return v;
}

bool is_name_char(char c, bool allow_dot) {
  return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '_' ||
         (allow_dot && c == '.');
}

bool valid_name(const std::string& s, size_t max_len, bool allow_dot) {
  if (s.empty() || s.size() > max_len) return false;
  for (char c : s)
    if (!is_name_char(c, allow_dot)) return false;
  return true;
}

std::string shape_text(const std::vector<int>& s) {
  std::string t = "[";
  for (size_t i = 0; i < s.size(); ++i) t += (i ? ", " : "") + std::to_string(s[i]);
  return t + "]";
}

}  // namespace

// The file's tensors and the error sink, with the field checks every part of
// the description uses (LayerFields forwards to these for the layer types).
struct LayerFields::Source {
  const unsigned char* data;
  std::map<std::string, RawTensor>& raw;
  Fail fail;

  static const Value* member(const Value& o, const char* k) {
    auto it = o.FindMember(k);
    return it == o.MemberEnd() ? nullptr : &it->value;
  }

  bool number(const Value& o, const char* k, double& out, const std::string& where, bool required,
              double def) {
    const Value* v = member(o, k);
    if (!v) {
      if (required) return fail(where + ": field '" + k + "' is missing");
      out = def;
      return true;
    }
    if (!v->IsNumber() || !std::isfinite(v->GetDouble()))
      return fail(where + ": field '" + k + "' must be a finite number");
    out = v->GetDouble();
    return true;
  }

  bool integer(const Value& o, const char* k, int& out, int lo, int hi, const std::string& where,
               bool required = true, int def = 0) {
    const Value* v = member(o, k);
    if (!v) {
      if (required) return fail(where + ": field '" + k + "' is missing");
      out = def;
      return true;
    }
    if (!v->IsInt() || v->GetInt() < lo || v->GetInt() > hi)
      return fail(where + ": field '" + k + "' must be an integer from " + std::to_string(lo) + " to " +
                   std::to_string(hi));
    out = v->GetInt();
    return true;
  }

  bool boolean(const Value& o, const char* k, bool& out, bool def, const std::string& where) {
    const Value* v = member(o, k);
    if (!v) {
      out = def;
      return true;
    }
    if (!v->IsBool()) return fail(where + ": field '" + k + "' must be true or false");
    out = v->GetBool();
    return true;
  }

  bool activation(const Value& o, ActSpec& a, const std::string& where, const char* fn_key) {
    const Value* v = member(o, fn_key);
    if (!v || !v->IsString()) return fail(where + ": field '" + fn_key + "' must name an activation");
    const std::string fn = v->GetString();
    bool found = false;
    for (auto& e : kActivations)
      if (fn == e.first) {
        a.fn = e.second;
        found = true;
      }
    if (!found)
      return fail(where + ": unknown activation '" + fn +
                   "' (tanh, sigmoid, relu, leaky_relu, softsign, hardtanh, identity)");
    double x;
    if (!number(o, "slope", x, where, false, 0.01)) return false;
    a.slope = float(x);
    double lo, hi;
    if (!number(o, "min", lo, where, false, -1) || !number(o, "max", hi, where, false, 1)) return false;
    if (a.fn == ActFn::hardtanh && !(lo < hi)) return fail(where + ": hardtanh needs min < max");
    a.lo = float(lo);
    a.hi = float(hi);
    return true;
  }

  // Claims tensor `<layer>.<param>` with the expected shape into L.params.
  bool take(LayerSpec& L, const std::string& param, std::vector<int> shape) {
    const std::string key = L.name + "." + param;
    auto it = raw.find(key);
    if (it == raw.end()) return fail("tensor '" + key + "' is missing (layer '" + L.name + "' needs it)");
    RawTensor& r = it->second;
    if (r.shape != shape)
      return fail("tensor '" + key + "': shape " + shape_text(r.shape) + " does not match the graph, expected " +
                   shape_text(shape));
    r.used = true;
    Tensor t;
    t.shape = shape;
    size_t n = 1;
    for (int s : shape) n *= size_t(s);
    t.data.resize(n);
    const unsigned char* p = data + r.begin;
    for (size_t i = 0; i < n; ++i) {
      float f;
      if (r.dtype == "F32") {
        uint32_t b = uint32_t(p[4 * i]) | uint32_t(p[4 * i + 1]) << 8 | uint32_t(p[4 * i + 2]) << 16 |
                     uint32_t(p[4 * i + 3]) << 24;
        std::memcpy(&f, &b, 4);
      } else {
        f = half_to_float(uint16_t(p[2 * i] | p[2 * i + 1] << 8));
      }
      if (!std::isfinite(f))
        return fail("tensor '" + key + "': value " + std::to_string(i) + " is not finite");
      t.data[i] = f;
    }
    L.params[param] = std::move(t);
    return true;
  }

  bool mlp(LayerSpec& L, const Value* film_obj, int n_controls, int channels, const std::string& prefix,
           const std::string& where) {
    if (n_controls == 0) return fail(where + ": FiLM needs at least one control");
    MlpSpec& f = L.film;
    f.widths = {n_controls};
    f.act.fn = ActFn::relu;
    if (film_obj) {
      if (const Value* h = member(*film_obj, "hidden")) {
        if (!h->IsArray() || h->Size() > unsigned(kMaxFilmHidden))
          return fail(where + ": FiLM 'hidden' must be an array of at most " + std::to_string(kMaxFilmHidden) +
                       " widths");
        for (auto& w : h->GetArray()) {
          if (!w.IsInt() || w.GetInt() < 1 || w.GetInt() > kMaxChannels)
            return fail(where + ": FiLM hidden widths must be integers from 1 to " + std::to_string(kMaxChannels));
          f.widths.push_back(w.GetInt());
        }
      }
      if (member(*film_obj, "activation")) {
        if (!member(*film_obj, "activation")->IsString())
          return fail(where + ": FiLM 'activation' must be a string");
        if (!activation(*film_obj, f.act, where + " FiLM", "activation")) return false;
      }
    }
    f.widths.push_back(2 * channels);
    for (size_t j = 0; j + 1 < f.widths.size(); ++j) {
      const std::string p = prefix + "mlp." + std::to_string(j);
      if (!take(L, p + ".weight", {f.widths[j + 1], f.widths[j]}) || !take(L, p + ".bias", {f.widths[j + 1]}))
        return false;
    }
    for (size_t j = 0; j + 1 < f.widths.size(); ++j) {
      const std::string p = prefix + "mlp." + std::to_string(j);
      f.weight.push_back(L.param(p + ".weight"));
      f.bias.push_back(L.param(p + ".bias"));
    }
    return true;
  }

  bool conv_params(LayerSpec& L, const std::string& p, int out, int in, int k, bool bias) {
    const std::string pre = p.empty() ? "" : p + ".";
    if (!take(L, pre + "weight", {out, in, k})) return false;
    return !bias || take(L, pre + "bias", {out});
  }

};

const rapidjson::Value* LayerFields::member(const char* key) const { return Source::member(o_, key); }
bool LayerFields::fail(const std::string& msg) { return src_.fail(msg); }
bool LayerFields::in(const char* key, LayerSpec& L) {
  if (!src_.integer(o_, key, L.in, 1, kMaxChannels, where)) return false;
  if (L.in != width)
    return fail(where + ": field '" + key + "' is " + std::to_string(L.in) + " but the previous stage gives " +
                std::to_string(width) + " channels");
  return true;
}
bool LayerFields::integer(const char* key, int& out, int lo, int hi, bool required, int def) {
  return src_.integer(o_, key, out, lo, hi, where, required, def);
}
bool LayerFields::boolean(const char* key, bool& out, bool def) { return src_.boolean(o_, key, out, def, where); }
bool LayerFields::activation(const Value& o, ActSpec& a, const std::string& at, const char* fn_key) {
  return src_.activation(o, a, at, fn_key);
}
bool LayerFields::take(LayerSpec& L, const std::string& param, std::vector<int> shape) {
  return src_.take(L, param, std::move(shape));
}
bool LayerFields::conv_params(LayerSpec& L, const std::string& prefix, int out, int in, int k, bool bias) {
  return src_.conv_params(L, prefix, out, in, k, bias);
}
bool LayerFields::mlp(LayerSpec& L, const Value* film_obj, int channels, const std::string& prefix) {
  return src_.mlp(L, film_obj, n_controls, channels, prefix, where);
}

// ---- display helpers of the layer types (types.hpp) ----

std::string short_number(double v) {
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.6g", v);
  return buf;
}

const char* activation_name(ActFn fn) {
  for (auto& e : kActivations)
    if (e.second == fn) return e.first;
  return "?";
}

std::string activation_text(const ActSpec& a) {
  std::string d = activation_name(a.fn);
  if (a.fn == ActFn::leaky_relu) d += " (slope " + short_number(a.slope) + ")";
  if (a.fn == ActFn::hardtanh) d += " (" + short_number(a.lo) + " .. " + short_number(a.hi) + ")";
  return d;
}

std::string recurrent_detail(const LayerSpec& L) {
  return "hidden " + short_number(L.hidden) + ", " + std::to_string(L.num_layers) +
         (L.num_layers == 1 ? " layer" : " layers") + (L.bias ? "" : ", no bias");
}

std::string conv_detail(const LayerSpec& L) {
  return "kernel " + short_number(L.kernel) + ", dilation " + short_number(L.dilation);
}

std::string layer_detail(const LayerSpec& L) {
  switch (L.type) {  // one case per row of EARSHOT_LAYER_TYPES (dsp/layers/registry.hpp)
#define EARSHOT_X(type, Name) \
  case LayerType::type:       \
    return Name##Type::detail(L);
    EARSHOT_LAYER_TYPES(EARSHOT_X)
#undef EARSHOT_X
  }
  return "";
}

namespace {

// Reads the effect description and the tensors it names into a Model.
class Builder {
 public:
  Builder(const unsigned char* data, std::map<std::string, RawTensor>& raw, std::string& error)
      : src_{data, raw, Fail{error}} {}

  bool build(const Value& d, Model& m) {
    if (!d.IsObject()) return fail_("effect description: must be a JSON object");
    const Value* v;
    if (!(v = member(d, "format")) || !v->IsString() || std::string(v->GetString()) != "earshot-effect")
      return fail_("effect description: field 'format' must be \"earshot-effect\"");
    if (!(v = member(d, "version")) || !v->IsInt()) return fail_("effect description: field 'version' must be an integer");
    m.version = v->GetInt();
    if (m.version > 1)
      return fail_("effect description: format version " + std::to_string(m.version) +
                   " is too new (this earshot reads version 1)");
    if (m.version < 1) return fail_("effect description: field 'version' must be 1");
    if (!(v = member(d, "sample_rate")) || !v->IsNumber() || !std::isfinite(v->GetDouble()) ||
        v->GetDouble() < EARSHOT_MIN_RATE || v->GetDouble() > EARSHOT_MAX_RATE)
      return fail_("effect description: field 'sample_rate' must be a number from " +
                   std::to_string(EARSHOT_MIN_RATE) + " to " + std::to_string(EARSHOT_MAX_RATE));
    m.sample_rate = v->GetDouble();
    if (m.sample_rate != std::floor(m.sample_rate))
      return fail_("effect description: field 'sample_rate' must be a whole number of Hz");
    if (!controls(d, m) || !credits(d, m)) return false;
    const Value* g = member(d, "graph");
    if (!g || !g->IsObject()) return fail_("effect description: field 'graph' must be an object");
    return graph(*g, m);
  }

 private:
  LayerFields::Source src_;

  bool fail_(const std::string& msg) { return src_.fail(msg); }
  static const Value* member(const Value& o, const char* k) { return LayerFields::Source::member(o, k); }
  bool number(const Value& o, const char* k, double& out, const std::string& where, bool required, double def) {
    return src_.number(o, k, out, where, required, def);
  }
  bool integer(const Value& o, const char* k, int& out, int lo, int hi, const std::string& where,
               bool required = true, int def = 0) {
    return src_.integer(o, k, out, lo, hi, where, required, def);
  }
  bool boolean(const Value& o, const char* k, bool& out, bool def, const std::string& where) {
    return src_.boolean(o, k, out, def, where);
  }

  bool controls(const Value& d, Model& m) {
    const Value* c = member(d, "controls");
    if (!c) return true;
    if (!c->IsArray()) return fail_("effect description: field 'controls' must be an array");
    if (c->Size() > unsigned(kMaxControls))
      return fail_("effect description: " + std::to_string(c->Size()) + " controls, at most " +
                   std::to_string(kMaxControls) + " allowed");
    std::set<std::string> seen;
    for (unsigned i = 0; i < c->Size(); ++i) {
      const Value& e = (*c)[i];
      std::string where = "controls[" + std::to_string(i) + "]";
      if (!e.IsObject()) return fail_(where + ": must be an object");
      ControlSpec s;
      const Value* v = member(e, "name");
      if (!v || !v->IsString() || !valid_name(v->GetString(), 32, false))
        return fail_(where + ": field 'name' must be 1 to 32 characters of A-Z a-z 0-9 _");
      s.name = v->GetString();
      // graph.inputs says "audio" for the input sample: a control of that name could never be fed.
      if (s.name == "audio") return fail_(where + ": field 'name' must not be \"audio\" (the input sample's name)");
      where = "control '" + s.name + "'";
      if (!seen.insert(s.name).second) return fail_(where + ": name used twice");
      if ((v = member(e, "unit"))) {
        if (!v->IsString() || v->GetStringLength() > 16)
          return fail_(where + ": field 'unit' must be a string of at most 16 characters");
        s.unit = v->GetString();
      }
      double lo, hi, def, sm;
      if (!number(e, "min", lo, where, true, 0) || !number(e, "max", hi, where, true, 0) ||
          !number(e, "default", def, where, true, 0) || !number(e, "smoothing_ms", sm, where, false, 20))
        return false;
      if (!(lo < hi)) return fail_(where + ": 'min' must be below 'max'");
      if (def < lo || def > hi) return fail_(where + ": 'default' must lie within [min, max]");
      if (sm < 0 || sm > 10000) return fail_(where + ": 'smoothing_ms' must be from 0 to 10000");
      s.min = float(lo);
      s.max = float(hi);
      s.def = float(def);
      s.smoothing_ms = float(sm);
      m.controls.push_back(s);
    }
    return true;
  }

  bool credits(const Value& d, Model& m) {
    const Value* c = member(d, "credits");
    if (!c || !c->IsObject()) return fail_("effect description: field 'credits' must be an object with a 'title'");
    const Value* t = member(*c, "title");
    if (!t || !t->IsString() || t->GetStringLength() == 0 || t->GetStringLength() > 1000)
      return fail_("credits: field 'title' must be a string of 1 to 1000 characters");
    m.title = t->GetString();
    for (const char* k : {"paper", "code", "licence"}) {
      const Value* v = member(*c, k);
      if (v && (!v->IsString() || v->GetStringLength() > 1000))
        return fail_(std::string("credits: field '") + k + "' must be a string of at most 1000 characters");
    }
    if (const Value* a = member(*c, "authors")) {
      if (!a->IsArray() || a->Size() > 100) return fail_("credits: field 'authors' must be an array of strings");
      for (auto& s : a->GetArray())
        if (!s.IsString() || s.GetStringLength() > 1000)
          return fail_("credits: field 'authors' must be an array of strings of at most 1000 characters");
    }
    return true;
  }

  bool layer(const Value& o, int width, int n_controls, Model& m, std::set<std::string>& names, int index) {
    std::string where = "layer " + std::to_string(index);
    if (!o.IsObject()) return fail_(where + ": must be an object");
    LayerSpec L;
    const Value* v = member(o, "name");
    if (!v || !v->IsString() || !valid_name(v->GetString(), 64, true))
      return fail_(where + ": field 'name' must be 1 to 64 characters of A-Z a-z 0-9 _ .");
    L.name = v->GetString();
    where = "layer '" + L.name + "'";
    if (!names.insert(L.name).second) return fail_(where + ": name used twice");
    v = member(o, "type");
    if (!v || !v->IsString()) return fail_(where + ": field 'type' must be a string");
    const std::string type = v->GetString();
    if (!boolean(o, "bias", L.bias, true, where)) return false;
    if (!layer_type_from_name(type, L.type))
      return fail_(where + ": unknown layer type '" + type + "' (" + layer_type_list() + ")");
    LayerFields f(src_, o, where, width, n_controls);
    LayerCost cost;
    switch (L.type) {  // one case per row of EARSHOT_LAYER_TYPES (dsp/layers/registry.hpp)
#define EARSHOT_X(type, Name)                 \
  case LayerType::type:                       \
    if (!Name##Type::parse(f, L)) return false; \
    cost = Name##Type::cost(L);               \
    break;
      EARSHOT_LAYER_TYPES(EARSHOT_X)
#undef EARSHOT_X
    }
    m.receptive_field += cost.receptive_field;
    if (m.receptive_field > kMaxReceptiveField)
      return fail_(where + ": receptive field exceeds " + std::to_string(kMaxReceptiveField) + " samples");
    m.macs_per_sample += cost.macs;
    m.recurrent = m.recurrent || cost.recurrent;
    m.max_channels = std::max({m.max_channels, cost.widest, L.in, L.out});
    m.layers.push_back(std::move(L));
    return true;
  }

  bool graph(const Value& g, Model& m) {
    const Value* in = member(g, "inputs");
    if (!in || !in->IsArray() || in->Size() < 1 || in->Size() > unsigned(1 + kMaxControls))
      return fail_("graph: field 'inputs' must be an array naming \"audio\" and any controls");
    int audio = 0;
    for (auto& e : in->GetArray()) {
      if (!e.IsString()) return fail_("graph: 'inputs' entries must be strings");
      const std::string n = e.GetString();
      if (n == "audio") {
        ++audio;
        m.input_map.push_back(-1);
        continue;
      }
      int idx = -1;
      for (size_t c = 0; c < m.controls.size(); ++c)
        if (m.controls[c].name == n) idx = int(c);
      if (idx < 0) return fail_("graph: input '" + n + "' is neither \"audio\" nor a control name");
      m.input_map.push_back(idx);
    }
    if (audio != 1) return fail_("graph: 'inputs' must contain \"audio\" exactly once");
    if (!boolean(g, "input_skip", m.input_skip, false, "graph")) return false;
    const Value* ls = member(g, "layers");
    if (!ls || !ls->IsArray() || ls->Size() < 1 || ls->Size() > unsigned(kMaxLayers))
      return fail_("graph: field 'layers' must be an array of 1 to " + std::to_string(kMaxLayers) + " layers");
    std::set<std::string> names;
    int width = int(m.input_map.size());
    for (unsigned i = 0; i < ls->Size(); ++i) {
      if (!layer((*ls)[i], width, int(m.controls.size()), m, names, int(i))) return false;
      width = m.layers.back().out;
    }
    if (width != 1)
      return fail_("graph: the last layer gives " + std::to_string(width) + " channels; an effect must end in 1");
    for (auto& kv : src_.raw)
      if (!kv.second.used) return fail_("tensor '" + kv.first + "' is not used by any layer of the graph");
    for (auto& L : m.layers)
      for (auto& p : L.params) m.parameters += int64_t(p.second.size());
    return true;
  }
};

}  // namespace

std::shared_ptr<const Model> load_model(const unsigned char* bytes, size_t len, std::string& error) {
  Fail fail{error};
  auto bad = [&](const std::string& msg) {
    fail(msg);
    return std::shared_ptr<const Model>();
  };
  if (!bytes) return bad("effect file: no data");
  if (len < 8) return bad("effect file: truncated (" + std::to_string(len) + " bytes; the 8-byte header length is missing)");
  if (len > kMaxFileBytes) return bad("effect file: " + std::to_string(len) + " bytes exceeds the 256 MiB limit");
  const uint64_t hlen = read_u64le(bytes);
  if (hlen > kMaxHeaderBytes) return bad("effect file: header length " + std::to_string(hlen) + " exceeds the 16 MiB limit");
  if (hlen < 2) return bad("effect file: header length " + std::to_string(hlen) + " is too small for a JSON object");
  if (8 + hlen > len)
    return bad("effect file: header length " + std::to_string(hlen) + " runs past the end of the file (" +
               std::to_string(len) + " bytes)");
  // The one JSON reader (json_reader.hpp): iterative (depth costs heap, not
  // call stack), depth- and size-capped, UTF-8 checked, explicit length (a NUL
  // is an error, not an end), nothing but whitespace after the value.
  JsonDocument header;
  const std::string header_error =
      json_read("effect file header", reinterpret_cast<const char*>(bytes + 8), size_t(hlen), header);
  if (!header_error.empty()) return bad(header_error);
  const rapidjson::Document& h = header.doc;
  if (!h.IsObject()) return bad("effect file header: must be a JSON object");
  const unsigned char* data = bytes + 8 + hlen;
  const uint64_t data_len = len - 8 - hlen;

  std::map<std::string, RawTensor> raw;
  std::string description;
  int64_t total = 0;
  for (auto& kv : h.GetObject()) {
    const std::string key = kv.name.GetString();
    const Value& t = kv.value;
    if (key == "__metadata__") {
      if (!t.IsObject()) return bad("effect file header: '__metadata__' must be an object");
      auto it = t.FindMember("earshot.effect");
      if (it == t.MemberEnd() || !it->value.IsString())
        return bad("effect file header: '__metadata__' has no \"earshot.effect\" string (not an earshot effect file)");
      description.assign(it->value.GetString(), it->value.GetStringLength());
      continue;
    }
    const std::string where = "tensor '" + key + "'";
    if (!t.IsObject()) return bad(where + ": header entry must be an object");
    RawTensor r;
    auto dt = t.FindMember("dtype");
    if (dt == t.MemberEnd() || !dt->value.IsString()) return bad(where + ": field 'dtype' is missing");
    r.dtype = dt->value.GetString();
    if (r.dtype != "F32" && r.dtype != "F16") return bad(where + ": unknown dtype '" + r.dtype + "' (F32 or F16)");
    auto sh = t.FindMember("shape");
    if (sh == t.MemberEnd() || !sh->value.IsArray() || sh->value.Size() < 1 || sh->value.Size() > 4)
      return bad(where + ": field 'shape' must be an array of 1 to 4 dimensions");
    uint64_t count = 1;
    for (auto& d : sh->value.GetArray()) {
      if (!d.IsInt() || d.GetInt() < 1 || d.GetInt() > kMaxDim)
        return bad(where + ": each dimension must be an integer from 1 to " + std::to_string(kMaxDim));
      r.shape.push_back(d.GetInt());
      count *= uint64_t(d.GetInt());
      if (count > uint64_t(kMaxParameters)) return bad(where + ": more than " + std::to_string(kMaxParameters) + " values");
    }
    auto off = t.FindMember("data_offsets");
    if (off == t.MemberEnd() || !off->value.IsArray() || off->value.Size() != 2 || !off->value[0].IsUint64() ||
        !off->value[1].IsUint64())
      return bad(where + ": field 'data_offsets' must be two non-negative integers");
    r.begin = off->value[0].GetUint64();
    r.end = off->value[1].GetUint64();
    if (r.begin > r.end || r.end > data_len)
      return bad(where + ": data_offsets [" + std::to_string(r.begin) + ", " + std::to_string(r.end) +
                 ") lie outside the data section (" + std::to_string(data_len) + " bytes)");
    const uint64_t elem = r.dtype == "F32" ? 4 : 2;
    if (r.end - r.begin != count * elem)
      return bad(where + ": data_offsets span " + std::to_string(r.end - r.begin) + " bytes but shape " +
                 shape_text(r.shape) + " of " + r.dtype + " needs " + std::to_string(count * elem));
    total += int64_t(count);
    if (total > kMaxParameters) return bad("effect file: more than " + std::to_string(kMaxParameters) + " parameters in all");
    if (!raw.emplace(key, r).second) return bad(where + ": listed twice");
  }
  // Overlap: sort by begin and compare neighbours. Ties are ordered by name,
  // not by pointer, so the message is the same on every platform.
  std::vector<std::pair<uint64_t, const std::string*>> spans;
  for (auto& kv : raw) spans.push_back({kv.second.begin, &kv.first});
  std::sort(spans.begin(), spans.end(), [](const auto& a, const auto& b) {
    return a.first != b.first ? a.first < b.first : *a.second < *b.second;
  });
  for (size_t i = 1; i < spans.size(); ++i) {
    const RawTensor& prev = raw[*spans[i - 1].second];
    if (spans[i].first < prev.end && raw[*spans[i].second].end > spans[i].first)
      return bad("tensor '" + *spans[i].second + "': data overlaps tensor '" + *spans[i - 1].second + "'");
  }
  if (description.empty() && !h.HasMember("__metadata__"))
    return bad("effect file header: no '__metadata__' (not an earshot effect file)");

  JsonDocument parsed;
  const std::string description_error = json_read("effect description", description.data(), description.size(), parsed);
  if (!description_error.empty()) return bad(description_error);
  const rapidjson::Document& d = parsed.doc;
  auto m = std::make_shared<Model>();
  m->description = description;
  Builder b(data, raw, error);
  if (!b.build(d, *m)) return nullptr;
  return m;
}

}  // namespace earshot
