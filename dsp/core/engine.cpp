// The stream behind the C ABI: input gain, dry path, resampling between host
// and model rate, control smoothing, the per-variant runner, dry/wet mix,
// output gain, and the non-finite guard. Everything is allocated in
// earshot_create; earshot_process only computes.
//
// Signal path per host sample block (split internally into sub-blocks of at
// most kSub host samples; the result never depends on the split):
//   x = in · g_in
//   wet = down(runner(up(x)))          (up/down only when the rates differ)
//   dry = down(up(x))                  the same round trip without the model,
//                                      so dry and wet line up to the sample
//                                      fraction; dry = x when the rates agree
//   out = (dry · (1 − w) + wet · w) · g_out
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <new>
#include <string>
#include <vector>

#include "detmath.hpp"
#include "earshot/earshot.h"
#include "model.hpp"
#include "../layers/types.hpp"
#include "resampler.hpp"
#include "runner.hpp"

#include <rapidjson/stringbuffer.h>
#include <rapidjson/writer.h>

namespace earshot {
namespace {

constexpr int kSub = 256;            // host samples per internal sub-block
constexpr double kParamRampMs = 20;  // mix and gain smoothing

// A linear ramp (dsp/FORMAT.md, "Control smoothing"): each sample first
// steps, then is used; the last step lands exactly on the target.
struct Ramp {
  float cur = 0, target = 0, inc = 0;
  int left = 0, steps = 0;

  void init(float v, int ramp_steps) {
    cur = target = v;
    inc = 0;
    left = 0;
    steps = ramp_steps;
  }
  void set(float v) {
    target = v;
    if (steps <= 0) {
      cur = v;
      left = 0;
      return;
    }
    inc = (target - cur) / float(steps);
    left = steps;
  }
  float next() {
    if (left > 0) {
      --left;
      cur = left == 0 ? target : cur + inc;
    }
    return cur;
  }
  void jump() {
    cur = target;
    left = 0;
  }
};

// dB → gain with detmath::exp (+ − × ÷ only), so it is the same on every
// platform; |db| ≤ 60 here.
float db_to_gain(float db) { return float(detmath::exp(double(db) * 0.11512925464970228420)); }  // ln(10)/20

bool finite_all(const float* x, int n) {
  // x − x is 0 for finite x and NaN otherwise; summing the flags stays exact.
  float acc = 0;
  for (int i = 0; i < n; ++i) acc += x[i] - x[i];
  return acc == 0;
}

// Host-rate FIFO behind a down-resampler, pre-filled with `prefill` zeros so
// it never runs dry (the two resamplers' output counts can lag the input
// count by a few samples).
struct Fifo {
  std::vector<float> buf;
  int read = 0, count = 0, prefill = 0;

  void init(int pre, int capacity) {
    prefill = pre;
    buf.assign(size_t(pre + capacity), 0.0f);
    reset();
  }
  void reset() {
    std::fill(buf.begin(), buf.end(), 0.0f);
    read = 0;
    count = prefill;
  }
  void push(const float* v, int n) {
    const int cap = int(buf.size());
    int w = (read + count) % cap;
    for (int i = 0; i < n; ++i) {
      buf[size_t(w)] = v[i];
      if (++w == cap) w = 0;
    }
    count += n;
  }
  void pop(float* v, int n) {
    const int cap = int(buf.size());
    const int have = std::min(n, count);
    for (int i = 0; i < have; ++i) {
      v[i] = buf[size_t(read)];
      if (++read == cap) read = 0;
    }
    count -= have;
    for (int i = have; i < n; ++i) v[i] = 0;  // never reached when prefill is right
  }
};

// host rate → model rate → host rate, for a signal that needs the same delay
// and band limit as the wet path.
struct RoundTrip {
  Resampler up, down;
  Fifo fifo;
  std::vector<float> mid, back;

  bool init(int host, int model, int max_in, std::string& err) {
    if (!up.init(host, model, err) || !down.init(model, host, err)) return false;
    const int max_mid = up.max_output(max_in);
    const int max_back = down.max_output(max_mid);
    fifo.init(2 + (host + model - 1) / model, max_back + 2 * max_in);
    mid.assign(size_t(max_mid), 0.0f);
    back.assign(size_t(std::max(max_back, max_in)), 0.0f);
    return true;
  }
  void reset() {
    up.reset();
    down.reset();
    fifo.reset();
  }
  // Delay from host input to host output, in host samples (not a whole number in general).
  double delay(int host, int model) const {
    return up.delay_in_input_samples() + down.delay_in_input_samples() * host / model + fifo.prefill;
  }
  // Back at the host rate from `m` model-rate samples; writes k host samples to out.
  void finish(const float* model_rate, int m, float* out, int k) {
    const int produced = down.process(model_rate, m, back.data());
    fifo.push(back.data(), produced);
    fifo.pop(out, k);
  }
};

}  // namespace
}  // namespace earshot

using namespace earshot;

// One channel's signal path (a lane of the runner).
struct Channel {
  RoundTrip wet_trip;  // host → model (into the runner), runner output → host
  RoundTrip dry_trip;  // the dry signal takes the same round trip, so dry and wet line up exactly
  std::vector<float> x, dry, model_in, model_out, wet;
};

struct earshot_stream {
  std::shared_ptr<const Model> model;
  std::unique_ptr<Runner> runner;  // one lane per channel, in lockstep
  int host_rate = 48000;
  bool resampling = false;
  std::vector<Channel> chans;

  std::vector<Ramp> controls;
  std::vector<float> ctl;  // [n_controls][kChunk]
  Ramp mix, gain_in, gain_out;
  std::vector<float> gin, wmix, gout;  // the shared ramps' values over one sub-block, [kSub]
  int latency = 0;

  unsigned nonfinite = 0;
  size_t bytes = 0;  // the bound of stream_bytes(), checked against the limit at create
  std::string info;

  int channels() const { return int(chans.size()); }

  void reset_state() {
    runner->reset();
    if (resampling)
      for (auto& c : chans) {
        c.wet_trip.reset();
        c.dry_trip.reset();
      }
    for (auto& r : controls) r.jump();
    mix.jump();
    gain_in.jump();
    gain_out.jump();
  }

  // The runner over m model-rate samples of every channel's model_in.
  void run_model(int m, bool& bad) {
    const int nctl = int(controls.size());
    const int nch = channels();
    const float* in[kMaxLanes];
    float* out[kMaxLanes];
    for (int off = 0; off < m; off += kChunk) {
      const int c = std::min(kChunk, m - off);
      for (int i = 0; i < nctl; ++i) {
        float* row = ctl.data() + size_t(i) * kChunk;
        for (int t = 0; t < c; ++t) row[t] = controls[size_t(i)].next();
      }
      for (int ch = 0; ch < nch; ++ch) {
        in[ch] = chans[size_t(ch)].model_in.data() + off;
        out[ch] = chans[size_t(ch)].model_out.data() + off;
      }
      runner->process(in, ctl.data(), out, c);
      for (int ch = 0; ch < nch; ++ch)
        if (!finite_all(out[ch], c)) bad = true;
    }
  }

  // n frames of every channel; the ramps (controls, mix, gains) advance once
  // per frame and are shared, so each channel sees what a mono stream would.
  void process(const float* const* in, float* const* out, int n) {
    bool bad = false;
    const int nch = channels();
    for (int off = 0; off < n; off += kSub) {
      const int k = std::min(kSub, n - off);
      for (int t = 0; t < k; ++t) gin[size_t(t)] = gain_in.next();
      for (int ch = 0; ch < nch; ++ch) {
        Channel& c = chans[size_t(ch)];
        for (int t = 0; t < k; ++t) c.x[size_t(t)] = in[ch][off + t] * gin[size_t(t)];
      }
      if (resampling) {
        int m = 0;  // the same count for every channel: it depends on the sample count only
        for (auto& c : chans) m = c.wet_trip.up.process(c.x.data(), k, c.model_in.data());
        run_model(m, bad);
        for (auto& c : chans) {
          c.wet_trip.finish(c.model_out.data(), m, c.wet.data(), k);
          const int md = c.dry_trip.up.process(c.x.data(), k, c.dry_trip.mid.data());
          c.dry_trip.finish(c.dry_trip.mid.data(), md, c.dry.data(), k);
        }
      } else {
        for (auto& c : chans) std::copy(c.x.begin(), c.x.begin() + k, c.model_in.begin());
        run_model(k, bad);
      }
      for (int t = 0; t < k; ++t) {
        wmix[size_t(t)] = mix.next();
        gout[size_t(t)] = gain_out.next();
      }
      for (int ch = 0; ch < nch; ++ch) {
        const Channel& c = chans[size_t(ch)];
        const float* wet_p = resampling ? c.wet.data() : c.model_out.data();
        const float* dry_p = resampling ? c.dry.data() : c.x.data();
        for (int t = 0; t < k; ++t) {
          const float w = wmix[size_t(t)];
          const float y = dry_p[t] * (1.0f - w) + wet_p[t] * w;
          out[ch][off + t] = y * gout[size_t(t)];
        }
      }
    }
    for (int ch = 0; ch < nch && !bad; ++ch)
      if (!finite_all(out[ch], n)) bad = true;
    if (bad) {
      for (int ch = 0; ch < nch; ++ch) std::fill(out[ch], out[ch] + n, 0.0f);
      reset_state();
      ++nonfinite;
    }
  }
};

namespace {


// ---- stream memory, bounded before anything large is allocated -------------
// A channel's own object (its round trips' and buffers' headers), counted as a
// fixed figure at or above its size on every target.
constexpr double kChannelObject = 1024;
static_assert(sizeof(Channel) <= 1024, "kChannelObject must cover a Channel");
// Every buffer a stream's constructors allocate (dsp/FORMAT.md, "Stream
// memory"), in bytes: an upper bound that tests/native/stream_memory_test.cpp
// holds against the bytes actually allocated. The weights of the file are
// counted too (a stream cannot run without them), once.
using stream_memory::kF;
constexpr double kObjectSlack = 1024;  // per layer: objects, vector headers, allocator rounding

// Per-stream bytes of one layer (its state, histories, scratch and the copies
// of its weights it makes, e.g. transposed recurrent matrices): its type's
// figure (dsp/layers/<type>.hpp) and the slack every layer has.
double layer_stream_bytes(const LayerSpec& L) {
  switch (L.type) {  // one case per row of EARSHOT_LAYER_TYPES (dsp/layers/registry.hpp)
#define EARSHOT_X(type, Name) \
  case LayerType::type:       \
    return kObjectSlack + Name##Type::stream_bytes(L);
    EARSHOT_LAYER_TYPES(EARSHOT_X)
#undef EARSHOT_X
  }
  return kObjectSlack;
}

// Bytes one round trip keeps; `design` is raised to the largest filter-design
// temporary (the designs run one after the other, so only the largest counts).
double round_trip_bytes(int host, int model, double& design) {
  double up = 0, down = 0, d_up = 0, d_down = 0;
  Resampler::bytes_needed(host, model, up, d_up);
  Resampler::bytes_needed(model, host, down, d_down);
  design = std::max(design, std::max(d_up, d_down));
  const double max_mid = std::ceil(double(kSub) * model / host) + 1;
  const double max_back = std::ceil(max_mid * host / model) + 1;
  const double prefill = 2 + (host + model - 1) / model;
  return up + down + kF * (prefill + max_back + 2.0 * kSub + max_mid + std::max(max_back, double(kSub)));
}

struct StreamBytes {
  double total = 0;
  double weights = 0, resampler = 0;
  int worst = -1;  // layer with the largest share
  double worst_bytes = 0;
};

// `lanes` channels: everything but the file's weights is counted once per
// channel (a lockstep layer keeps one copy of its weights, so this is above
// what it holds).
StreamBytes stream_bytes(const Model& m, int host_rate, int lanes) {
  StreamBytes r;
  r.weights = kF * double(m.parameters);
  double layers = 0;
  for (size_t i = 0; i < m.layers.size(); ++i) {
    const double b = lanes * layer_stream_bytes(m.layers[i]);
    layers += b;
    if (b > r.worst_bytes) {
      r.worst_bytes = b;
      r.worst = int(i);
    }
  }
  const int model_rate = int(m.sample_rate);
  double max_model = kSub;
  if (host_rate != model_rate) {
    double design = 0;
    r.resampler = 2 * lanes * round_trip_bytes(host_rate, model_rate, design);
    r.resampler += design;
    max_model = std::ceil(double(kSub) * model_rate / host_rate) + 1;
  }
  const double rows = std::max<double>(m.max_channels, double(m.input_map.size()));
  // kChannelObject, not sizeof(Channel): the figure must be the same natively
  // and in 32-bit WebAssembly (static_assert below).
  const double per_lane = kF * (3.0 * kSub + 2 * max_model + 2 * rows * kChunk) + kChannelObject;
  const double stream = lanes * per_lane + kF * (3.0 * kSub + std::max<double>(1, m.controls.size()) * kChunk) +
                        64.0 * m.controls.size() + 8192 + 2.0 * m.description.size();
  r.total = r.weights + layers + r.resampler + stream;
  return r;
}

std::string mib_text(double bytes) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.1f MiB", bytes / 1048576.0);
  return buf;
}

// "" when the stream fits under `cap` bytes, else the refusal naming the
// largest share (a layer, the resampler or the weights) and the figures.
std::string stream_bytes_refusal(const Model& m, int host_rate, int lanes, size_t cap, const StreamBytes& b) {
  if (b.total <= double(cap)) return "";
  std::string share;
  if (b.worst >= 0 && b.worst_bytes >= b.resampler && b.worst_bytes >= b.weights) {
    const LayerSpec& L = m.layers[size_t(b.worst)];
    share = "layers[" + std::to_string(b.worst) + "] ('" + L.name + "', " + layer_type_name(L.type) +
            ") needs " + mib_text(b.worst_bytes) + " of state, history and scratch";
  } else if (b.resampler >= b.weights) {
    share = "resampling " + std::to_string(host_rate) + " Hz to " + std::to_string(int(m.sample_rate)) +
            " Hz and back needs " + mib_text(b.resampler);
  } else {
    share = "the weights need " + mib_text(b.weights);
  }
  const std::string what = lanes == 1 ? "a stream" : "a stream of " + std::to_string(lanes) + " channels";
  return what + " of this effect at " + std::to_string(host_rate) + " Hz needs " + mib_text(b.total) + " (" + share +
         "); the limit is " + mib_text(double(cap)) + " per stream";
}

void write_error(char* error, size_t cap, const std::string& msg) {
  if (!error || cap == 0) return;
  const size_t n = std::min(cap - 1, msg.size());
  std::memcpy(error, msg.data(), n);
  error[n] = 0;
}

std::string make_info(const earshot_stream& s) {
  const Model& m = *s.model;
  rapidjson::StringBuffer sb;
  rapidjson::Writer<rapidjson::StringBuffer> w(sb);
  w.StartObject();
  w.Key("effect");
  w.RawValue(m.description.data(), m.description.size(), rapidjson::kObjectType);
  w.Key("title");
  w.String(m.title);
  w.Key("variant");
  w.String(s.runner->variant());
  w.Key("model_rate");
  w.Double(m.sample_rate);
  w.Key("host_rate");
  w.Int(s.host_rate);
  w.Key("channels");
  w.Int(s.channels());
  w.Key("latency");
  w.Int(s.latency);
  w.Key("stream_bytes");
  w.Uint64(s.bytes);
  w.Key("parameters");
  w.Int64(m.parameters);
  w.Key("macs_per_sample");
  w.Int64(m.macs_per_sample);
  w.Key("recurrent");
  w.Bool(m.recurrent);
  w.Key("receptive_field");
  if (m.recurrent)
    w.Null();
  else
    w.Int64(m.receptive_field);
  w.Key("input_skip");
  w.Bool(m.input_skip);
  w.Key("layers");
  w.StartArray();
  for (const LayerSpec& L : m.layers) {
    w.StartObject();
    w.Key("name");
    w.String(L.name);
    w.Key("type");
    w.String(layer_type_name(L.type));
    w.Key("in");
    w.Int(L.in);
    w.Key("out");
    w.Int(L.out);
    int64_t p = 0;
    for (auto& kv : L.params) p += int64_t(kv.second.size());
    w.Key("parameters");
    w.Int64(p);
    switch (L.type) {  // the type's own fields (dsp/layers/<type>.hpp)
#define EARSHOT_X(type, Name)         \
  case LayerType::type:               \
    Name##Type::describe(L, w);       \
    break;
      EARSHOT_LAYER_TYPES(EARSHOT_X)
#undef EARSHOT_X
    }
    if (L.has_film) {
      w.Key("film");
      w.Bool(true);
    }
    w.EndObject();
  }
  w.EndArray();
  w.EndObject();
  return sb.GetString();
}

earshot_stream* create(const unsigned char* bytes, size_t len, double host_rate, const char* variant, int channels,
                       size_t max_stream_bytes, char* error, size_t error_cap) {
  std::string err;
  if (channels < 1 || channels > EARSHOT_MAX_CHANNELS) {
    write_error(error, error_cap,
                "channel count " + std::to_string(channels) + " is outside 1.." + std::to_string(EARSHOT_MAX_CHANNELS));
    return nullptr;
  }
  if (!(host_rate >= EARSHOT_MIN_RATE && host_rate <= EARSHOT_MAX_RATE) || host_rate != std::floor(host_rate)) {
    write_error(error, error_cap,
                ("host sample rate must be a whole number of Hz from " + std::to_string(EARSHOT_MIN_RATE) + " to " +
                 std::to_string(EARSHOT_MAX_RATE)));
    return nullptr;
  }
  auto model = load_model(bytes, len, err);
  if (!model) {
    write_error(error, error_cap, err);
    return nullptr;
  }
  const StreamBytes need = stream_bytes(*model, int(host_rate), channels);
  const std::string refusal = stream_bytes_refusal(*model, int(host_rate), channels, max_stream_bytes, need);
  if (!refusal.empty()) {
    write_error(error, error_cap, refusal);
    return nullptr;
  }
  std::unique_ptr<earshot_stream> s(new earshot_stream);
  s->model = model;
  s->bytes = size_t(need.total);
  s->runner = make_runner(model, variant ? variant : "", channels, err);
  if (!s->runner) {
    write_error(error, error_cap, err);
    return nullptr;
  }
  s->host_rate = int(host_rate);
  const int model_rate = int(model->sample_rate);
  s->resampling = s->host_rate != model_rate;
  int max_model = kSub;
  s->chans.resize(size_t(channels));
  for (Channel& c : s->chans) {
    if (s->resampling) {
      if (!c.wet_trip.init(s->host_rate, model_rate, kSub, err) || !c.dry_trip.init(s->host_rate, model_rate, kSub, err)) {
        write_error(error, error_cap, err);
        return nullptr;
      }
      max_model = c.wet_trip.up.max_output(kSub);
      s->latency = int(c.wet_trip.delay(s->host_rate, model_rate) + 0.5);
    }
    c.x.assign(kSub, 0.0f);
    c.dry.assign(kSub, 0.0f);
    c.wet.assign(kSub, 0.0f);
    c.model_in.assign(size_t(max_model), 0.0f);
    c.model_out.assign(size_t(max_model), 0.0f);
  }
  s->gin.assign(kSub, 0.0f);
  s->wmix.assign(kSub, 0.0f);
  s->gout.assign(kSub, 0.0f);
  s->ctl.assign(size_t(std::max<size_t>(1, model->controls.size())) * kChunk, 0.0f);
  for (const ControlSpec& c : model->controls) {
    Ramp r;
    r.init(c.def, int(c.smoothing_ms / 1000.0 * model->sample_rate + 0.5));
    s->controls.push_back(r);
  }
  const int pr = int(kParamRampMs / 1000.0 * s->host_rate + 0.5);
  s->mix.init(1.0f, pr);
  s->gain_in.init(1.0f, pr);
  s->gain_out.init(1.0f, pr);
  s->info = make_info(*s);
  return s.release();
}

// create() with every exception turned into the error text.
earshot_stream* create_guarded(const unsigned char* bytes, size_t len, double host_rate, const char* variant,
                               int channels, size_t max_stream_bytes, char* error, size_t error_cap) {
#if defined(__cpp_exceptions)
  try {
    return create(bytes, len, host_rate, variant, channels, max_stream_bytes, error, error_cap);
  } catch (const std::bad_alloc&) {
    write_error(error, error_cap, "out of memory while loading the effect");
  } catch (...) {
    write_error(error, error_cap, "internal error while loading the effect");
  }
  return nullptr;
#else
  return create(bytes, len, host_rate, variant, channels, max_stream_bytes, error, error_cap);
#endif
}

}  // namespace

extern "C" {

earshot_stream* earshot_create_channels(const unsigned char* bytes, size_t len, double host_rate, const char* variant,
                                       int channels, size_t max_stream_bytes, char* error, size_t error_cap) {
  if (max_stream_bytes == 0 && channels >= 1 && channels <= EARSHOT_MAX_CHANNELS)
    max_stream_bytes = size_t(channels) * EARSHOT_STREAM_BYTES_DEFAULT;
  return create_guarded(bytes, len, host_rate, variant, channels, max_stream_bytes, error, error_cap);
}

earshot_stream* earshot_create_bounded(const unsigned char* bytes, size_t len, double host_rate, const char* variant,
                                       size_t max_stream_bytes, char* error, size_t error_cap) {
  return create_guarded(bytes, len, host_rate, variant, 1, max_stream_bytes, error, error_cap);
}

earshot_stream* earshot_create(const unsigned char* bytes, size_t len, double host_rate, const char* variant,
                               char* error, size_t error_cap) {
  return earshot_create_bounded(bytes, len, host_rate, variant, EARSHOT_STREAM_BYTES_DEFAULT, error, error_cap);
}

size_t earshot_stream_bytes(const earshot_stream* s) { return s ? s->bytes : 0; }

int earshot_process(earshot_stream* s, const float* in, float* out, int n) {
  if (!s || !in || !out || n < 1 || n > EARSHOT_MAX_BLOCK || s->channels() != 1) return 0;
  s->process(&in, &out, n);
  return n;
}

int earshot_channels(const earshot_stream* s) { return s ? s->channels() : 0; }

int earshot_process_channels(earshot_stream* s, const float* const* in, float* const* out, int n) {
  if (!s || !in || !out || n < 1 || n > EARSHOT_MAX_BLOCK) return 0;
  for (int c = 0; c < s->channels(); ++c)
    if (!in[c] || !out[c]) return 0;
  s->process(in, out, n);
  return n;
}

int earshot_control_count(const earshot_stream* s) { return s ? int(s->controls.size()) : 0; }

int earshot_control_index(const earshot_stream* s, const char* name) {
  if (!s || !name) return -1;
  for (size_t i = 0; i < s->model->controls.size(); ++i)
    if (s->model->controls[i].name == name) return int(i);
  return -1;
}

int earshot_set_control(earshot_stream* s, int index, float value) {
  if (!s) return EARSHOT_ERR_ARGUMENT;
  if (index < 0 || index >= int(s->controls.size())) return EARSHOT_ERR_INDEX;
  if (!std::isfinite(value)) return EARSHOT_ERR_NOT_FINITE;
  const ControlSpec& c = s->model->controls[size_t(index)];
  if (value < c.min || value > c.max) return EARSHOT_ERR_RANGE;
  s->controls[size_t(index)].set(value);
  return EARSHOT_OK;
}

float earshot_get_control(const earshot_stream* s, int index) {
  if (!s || index < 0 || index >= int(s->controls.size())) return 0.0f;
  return s->controls[size_t(index)].target;
}

int earshot_set_mix(earshot_stream* s, float wet) {
  if (!s) return EARSHOT_ERR_ARGUMENT;
  if (!std::isfinite(wet)) return EARSHOT_ERR_NOT_FINITE;
  if (wet < 0 || wet > 1) return EARSHOT_ERR_RANGE;
  s->mix.set(wet);
  return EARSHOT_OK;
}

int earshot_set_gain(earshot_stream* s, float input_db, float output_db) {
  if (!s) return EARSHOT_ERR_ARGUMENT;
  if (!std::isfinite(input_db) || !std::isfinite(output_db)) return EARSHOT_ERR_NOT_FINITE;
  if (input_db < -60 || input_db > 24 || output_db < -60 || output_db > 24) return EARSHOT_ERR_RANGE;
  s->gain_in.set(db_to_gain(input_db));
  s->gain_out.set(db_to_gain(output_db));
  return EARSHOT_OK;
}

void earshot_reset(earshot_stream* s) {
  if (s) s->reset_state();
}

int earshot_latency(const earshot_stream* s) { return s ? s->latency : 0; }

const char* earshot_info(const earshot_stream* s) { return s ? s->info.c_str() : "{}"; }

const char* earshot_variant(const earshot_stream* s) { return s ? s->runner->variant() : ""; }

unsigned earshot_nonfinite_count(const earshot_stream* s) { return s ? s->nonfinite : 0; }

const char* earshot_status_text(int status) {
  switch (status) {
    case EARSHOT_OK: return "ok";
    case EARSHOT_ERR_ARGUMENT: return "bad argument (null stream or pointer, or block size outside 1..65536)";
    case EARSHOT_ERR_INDEX: return "control index out of range";
    case EARSHOT_ERR_NOT_FINITE: return "value is not a finite number";
    case EARSHOT_ERR_RANGE: return "value outside the allowed range";
    default: return "unknown status";
  }
}

void earshot_destroy(earshot_stream* s) { delete s; }

}  // extern "C"

// Test hook (declared in tests): every stored state value of the stream's runner.
void earshot_test_state_values(const earshot_stream* s, std::vector<float>& out) {
  out.clear();
  if (s) s->runner->state_values(out);
}
