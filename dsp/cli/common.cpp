// Argument parsing, the effect file reader and the stream handle shared by
// every command.
#include <sys/stat.h>

#include <algorithm>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <fstream>

#include <sndfile.h>

#include <memory>

#include "cli.hpp"
#include "cpu_variants.hpp"

namespace earshot {
namespace cli {

// ---- arguments -------------------------------------------------------------

bool Args::has(const std::string& name) const {
  for (const auto& o : options)
    if (o.first == name) return true;
  return false;
}

const std::string* Args::last(const std::string& name) const {
  const std::string* v = nullptr;
  for (const auto& o : options)
    if (o.first == name) v = &o.second;
  return v;
}

double parse_rate_option(const Args& a) {
  const std::string* r = a.last("--rate");
  if (!r) return 0;
  const double rate = parse_number("--rate", *r, EARSHOT_MIN_RATE, EARSHOT_MAX_RATE);
  if (rate != std::floor(rate)) throw UsageError("--rate: " + *r + " is not a whole number of Hz");
  return rate;
}

std::string stream_rates_text() {
  return "earshot streams run at " + std::to_string(EARSHOT_MIN_RATE) + " .. " + std::to_string(EARSHOT_MAX_RATE) +
         " Hz";
}

std::vector<std::string> Args::all(const std::string& name) const {
  std::vector<std::string> v;
  for (const auto& o : options)
    if (o.first == name) v.push_back(o.second);
  return v;
}

Args parse_args(const std::vector<std::string>& argv, const std::vector<OptionSpec>& specs) {
  Args a;
  bool options_done = false;
  for (size_t i = 0; i < argv.size(); ++i) {
    const std::string& t = argv[i];
    if (options_done || t.size() < 2 || t[0] != '-' || t == "-") {
      a.positional.push_back(t);
      continue;
    }
    if (t == "--") {
      options_done = true;
      continue;
    }
    std::string name = t, value;
    bool inline_value = false;
    const size_t eq = t.find('=');
    if (t.compare(0, 2, "--") == 0 && eq != std::string::npos) {
      name = t.substr(0, eq);
      value = t.substr(eq + 1);
      inline_value = true;
    }
    if (name == "-h") name = "--help";
    const OptionSpec* spec = nullptr;
    for (const OptionSpec& s : specs)
      if (name == s.name) spec = &s;
    if (!spec) throw UsageError("unknown option '" + name + "'");
    if (spec->takes_value) {
      if (!inline_value) {
        if (i + 1 >= argv.size()) throw UsageError("option " + name + " needs a value");
        value = argv[++i];
      }
    } else if (inline_value) {
      throw UsageError("option " + name + " takes no value");
    }
    a.options.emplace_back(name, value);
  }
  return a;
}

static std::string trim_number(double v) {
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.10g", v);
  return buf;
}

double parse_number(const std::string& what, const std::string& text, double lo, double hi) {
  const char* s = text.c_str();
  char* end = nullptr;
  errno = 0;
  const double v = std::strtod(s, &end);
  if (text.empty() || end == s || *end != '\0' || std::isspace((unsigned char)text[0]))
    throw UsageError(what + ": '" + text + "' is not a number");
  if (!std::isfinite(v) || errno == ERANGE) throw UsageError(what + ": '" + text + "' is not a finite number");
  if (v < lo || v > hi)
    throw UsageError(what + ": " + text + " is outside the allowed range " + trim_number(lo) + " .. " +
                     trim_number(hi));
  return v;
}

long parse_integer(const std::string& what, const std::string& text, long lo, long hi) {
  const char* s = text.c_str();
  char* end = nullptr;
  errno = 0;
  const long v = std::strtol(s, &end, 10);
  if (text.empty() || end == s || *end != '\0' || std::isspace((unsigned char)text[0]))
    throw UsageError(what + ": '" + text + "' is not a whole number");
  if (errno == ERANGE || v < lo || v > hi)
    throw UsageError(what + ": " + text + " is outside the allowed range " + std::to_string(lo) + " .. " +
                     std::to_string(hi));
  return v;
}

// ---- effect file -----------------------------------------------------------

// dsp/FORMAT.md: an effect file is at most 256 MiB. Checked here too so a huge
// file is refused before it is read into memory.
constexpr uintmax_t kEffectFileLimit = 256u << 20;

std::vector<unsigned char> read_effect_file(const std::string& path) {
  struct stat st;
  if (::stat(path.c_str(), &st) != 0)
    throw InputError("cannot read effect file '" + path + "': " + std::strerror(errno));
  if (S_ISDIR(st.st_mode)) throw InputError("cannot read effect file '" + path + "': it is a directory");
  if (S_ISREG(st.st_mode) && uintmax_t(st.st_size) > kEffectFileLimit)
    throw InputError("effect file '" + path + "' is " + std::to_string(uintmax_t(st.st_size)) +
                     " bytes, over the 268435456-byte (256 MiB) limit of the format");
  std::FILE* f = std::fopen(path.c_str(), "rb");
  if (!f) throw InputError("cannot read effect file '" + path + "': " + std::strerror(errno));
  std::vector<unsigned char> bytes;
  unsigned char buf[65536];
  size_t got;
  while ((got = std::fread(buf, 1, sizeof buf, f)) > 0) {
    bytes.insert(bytes.end(), buf, buf + got);
    if (bytes.size() > kEffectFileLimit) {
      std::fclose(f);
      throw InputError("effect file '" + path + "' is over the 268435456-byte (256 MiB) limit of the format");
    }
  }
  const bool failed = std::ferror(f) != 0;
  const int err = errno;
  std::fclose(f);
  if (failed) throw InputError("cannot read effect file '" + path + "': " + std::strerror(err));
  return bytes;
}

std::vector<std::string> supported_variants() {
  std::vector<std::string> v;
  for (const std::string& n : native_variants())
    if (variant_supported(n)) v.push_back(n);
  return v;
}

void check_variant(const std::string& variant) {
  const std::vector<std::string> all = native_variants();
  if (std::find(all.begin(), all.end(), variant) == all.end()) {
    std::string list;
    for (const std::string& n : all) list += (list.empty() ? "" : ", ") + n;
    throw UsageError("--variant: unknown variant '" + variant + "' (this build has " + list + ")");
  }
  if (!variant_supported(variant)) {
    std::string list;
    for (const std::string& n : supported_variants()) list += (list.empty() ? "" : ", ") + n;
    throw UsageError("--variant: variant '" + variant + "' needs instructions this CPU does not have (it runs " +
                     list + ")");
  }
}

// ---- stream ----------------------------------------------------------------

namespace {
size_t stream_limit = EARSHOT_STREAM_BYTES_DEFAULT;
}

size_t stream_limit_bytes() { return stream_limit; }

void apply_stream_limit(const Args& a) {
  if (const std::string* v = a.last("--max-stream-mib"))
    stream_limit = size_t(parse_integer("--max-stream-mib", *v, 1, 65536)) << 20;
}

Stream::Stream(const std::vector<unsigned char>& bytes, double host_rate, const std::string& variant,
               const std::string& path, int channels) {
  char err[1024] = {0};
  s_ = earshot_create_channels(bytes.data(), bytes.size(), host_rate, variant.c_str(), channels,
                               stream_limit * size_t(channels), err, sizeof err);
  if (!s_) throw InputError(path + ": " + err);
}

void Stream::process(const float* in, float* out, size_t n, int block) {
  for (size_t off = 0; off < n; off += size_t(block)) {
    const int k = int(std::min<size_t>(size_t(block), n - off));
    if (earshot_process(s_, in + off, out + off, k) != k)
      throw std::runtime_error("earshot_process refused a block of " + std::to_string(k) + " samples");
  }
}

void Stream::process_channels(const std::vector<std::vector<float>>& in, std::vector<std::vector<float>>& out,
                              size_t n, int block) {
  const int C = earshot_channels(s_);
  if (C < 1 || C > EARSHOT_MAX_CHANNELS || int(in.size()) != C || int(out.size()) != C)
    throw std::runtime_error("process_channels: " + std::to_string(in.size()) + " inputs for a stream of " +
                             std::to_string(C) + " channels");
  const float* ip[EARSHOT_MAX_CHANNELS];
  float* op[EARSHOT_MAX_CHANNELS];
  for (size_t off = 0; off < n; off += size_t(block)) {
    const int k = int(std::min<size_t>(size_t(block), n - off));
    for (int c = 0; c < C; ++c) {
      ip[c] = in[size_t(c)].data() + off;
      op[c] = out[size_t(c)].data() + off;
    }
    if (earshot_process_channels(s_, ip, op, k) != k)
      throw std::runtime_error("earshot_process_channels refused a block of " + std::to_string(k) + " frames");
  }
}

rapidjson::Document Stream::info() const {
  rapidjson::Document d;
  d.Parse(earshot_info(s_));
  if (d.HasParseError() || !d.IsObject()) throw std::runtime_error("the core's info JSON does not parse");
  return d;
}

double json_number(const rapidjson::Value& v, const char* key, double fallback) {
  if (!v.IsObject()) return fallback;
  auto it = v.FindMember(key);
  return it != v.MemberEnd() && it->value.IsNumber() ? it->value.GetDouble() : fallback;
}

std::string json_string(const rapidjson::Value& v, const char* key, const std::string& fallback) {
  if (!v.IsObject()) return fallback;
  auto it = v.FindMember(key);
  // With its length: a NUL inside the text ("\u0000" in JSON) is kept, for the
  // caller to escape, rather than cutting the text short.
  return it != v.MemberEnd() && it->value.IsString()
             ? std::string(it->value.GetString(), it->value.GetStringLength())
             : fallback;
}

void apply_controls(Stream& s, const std::vector<std::string>& settings) {
  if (settings.empty()) return;
  const rapidjson::Document info = s.info();
  const rapidjson::Value* controls = nullptr;
  if (info.HasMember("effect") && info["effect"].IsObject() && info["effect"].HasMember("controls") &&
      info["effect"]["controls"].IsArray())
    controls = &info["effect"]["controls"];
  for (const std::string& setting : settings) {
    const size_t eq = setting.find('=');
    if (eq == std::string::npos || eq == 0)
      throw UsageError("--control: expected NAME=VALUE, got '" + setting + "'");
    const std::string name = setting.substr(0, eq), text = setting.substr(eq + 1);
    const int index = earshot_control_index(s.get(), name.c_str());
    if (index < 0) {
      std::string list;
      if (controls)
        for (const auto& c : controls->GetArray()) list += (list.empty() ? "" : ", ") + json_string(c, "name");
      throw UsageError("--control: this effect has no control named '" + name + "' (" +
                       (list.empty() ? std::string("it has no controls") : "its controls: " + list) + ")");
    }
    const double v = parse_number("--control " + name, text, -HUGE_VAL, HUGE_VAL);
    const int status = earshot_set_control(s.get(), index, float(v));
    if (status != EARSHOT_OK) {
      std::string range;
      if (controls && index < int(controls->Size())) {
        const rapidjson::Value& c = (*controls)[rapidjson::SizeType(index)];
        range = " (" + name + " takes " + trim_number(json_number(c, "min")) + " .. " +
                trim_number(json_number(c, "max")) + ")";
      }
      throw UsageError("--control " + setting + ": " + earshot_status_text(status) + range);
    }
  }
}

// ---- output helpers --------------------------------------------------------

std::string format_fixed(double v, int decimals) {
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.*f", decimals, v);
  return buf;
}

std::string format_count(int64_t v) {
  std::string digits = std::to_string(v < 0 ? -v : v), out;
  for (size_t i = 0; i < digits.size(); ++i) {
    if (i > 0 && (digits.size() - i) % 3 == 0) out += ' ';
    out += digits[i];
  }
  return v < 0 ? "-" + out : out;
}

std::string hex64(uint64_t v) {
  char buf[24];
  std::snprintf(buf, sizeof buf, "%016llx", (unsigned long long)v);
  return buf;
}

// ---- audio files -----------------------------------------------------------

namespace {

// Bytes per sample of the uncompressed encodings whose frame count follows
// from the data size; 0 for any other.
int sample_bytes(int format) {
  switch (format & SF_FORMAT_SUBMASK) {
    case SF_FORMAT_PCM_S8:
    case SF_FORMAT_PCM_U8: return 1;
    case SF_FORMAT_PCM_16: return 2;
    case SF_FORMAT_PCM_24: return 3;
    case SF_FORMAT_PCM_32:
    case SF_FORMAT_FLOAT: return 4;
    case SF_FORMAT_DOUBLE: return 8;
    default: return 0;
  }
}

uint64_t read_le(const unsigned char* p, int n) {
  uint64_t v = 0;
  for (int i = n - 1; i >= 0; --i) v = (v << 8) | p[i];
  return v;
}

uint64_t read_be(const unsigned char* p, int n) {
  uint64_t v = 0;
  for (int i = 0; i < n; ++i) v = (v << 8) | p[i];
  return v;
}

// The frame count the header declares, or -1 when it gives none to check.
// WAV: RIFF/RIFX/RF64 chunks (EBU Tech 3306 for RF64's ds64); AIFF: the COMM
// chunk's numSampleFrames (AIFF 1.3). Chunks are padded to even sizes.
int64_t declared_frames(const std::string& path, int format, int channels) {
  const int major = format & SF_FORMAT_TYPEMASK;
  const int bytes = sample_bytes(format);
  if (bytes == 0 || channels < 1) return -1;
  const bool wav = major == SF_FORMAT_WAV || major == SF_FORMAT_WAVEX || major == SF_FORMAT_RF64;
  const bool aiff = major == SF_FORMAT_AIFF;
  if (!wav && !aiff) return -1;
  std::unique_ptr<std::FILE, int (*)(std::FILE*)> f(std::fopen(path.c_str(), "rb"), std::fclose);
  if (!f) return -1;
  unsigned char head[12];
  if (std::fread(head, 1, 12, f.get()) != 12) return -1;
  const std::string magic(reinterpret_cast<const char*>(head), 4), kind(reinterpret_cast<const char*>(head) + 8, 4);
  const bool big = magic == "RIFX" || magic == "FORM";
  const bool rf64 = magic == "RF64";
  if (wav && !((magic == "RIFF" || magic == "RIFX" || rf64) && kind == "WAVE")) return -1;
  if (aiff && !(magic == "FORM" && (kind == "AIFF" || kind == "AIFC"))) return -1;
  uint64_t ds64_data = 0;
  for (int guard = 0; guard < 4096; ++guard) {
    unsigned char ch[8];
    if (std::fread(ch, 1, 8, f.get()) != 8) return -1;
    const std::string id(reinterpret_cast<const char*>(ch), 4);
    const uint64_t size = big ? read_be(ch + 4, 4) : read_le(ch + 4, 4);
    if (wav && id == "ds64") {
      unsigned char d[16];
      if (size < 16 || std::fread(d, 1, 16, f.get()) != 16) return -1;
      ds64_data = read_le(d + 8, 8);
      if (std::fseek(f.get(), long(size - 16 + (size & 1)), SEEK_CUR) != 0) return -1;
      continue;
    }
    if (wav && id == "data") {
      const uint64_t data = rf64 && size == 0xffffffffu ? ds64_data : size;
      return int64_t(data / uint64_t(bytes * channels));
    }
    if (aiff && id == "COMM") {
      unsigned char c[6];
      if (size < 6 || std::fread(c, 1, 6, f.get()) != 6) return -1;
      return int64_t(read_be(c + 2, 4));
    }
    if (size > uint64_t(0x7fffffff) || std::fseek(f.get(), long(size + (size & 1)), SEEK_CUR) != 0) return -1;
  }
  return -1;
}

}  // namespace

void check_declared_length(const std::string& path, int format, int channels, int64_t frames) {
  const int64_t declared = declared_frames(path, format, channels);
  if (declared > frames)
    throw InputError("'" + path + "': read " + std::to_string(frames) + " of " + std::to_string(declared) +
                     " frames: the file ends before the audio data its header declares (truncated or damaged)");
}

Audio read_audio(const std::string& path) {
  struct stat st;
  if (stat(path.c_str(), &st) != 0)
    throw InputError("cannot read audio file '" + path + "': " + std::strerror(errno));
  if (S_ISDIR(st.st_mode)) throw InputError("'" + path + "' is a folder, not an audio file");
  SF_INFO info;
  std::memset(&info, 0, sizeof info);
  std::unique_ptr<SNDFILE, int (*)(SNDFILE*)> f(sf_open(path.c_str(), SFM_READ, &info), sf_close);
  if (!f) throw InputError("cannot read audio file '" + path + "': " + sf_strerror(nullptr));
  Audio a;
  a.channels = info.channels;
  a.rate = info.samplerate;
  a.format = info.format;
  if (a.channels < 1 || a.channels > 32)
    throw InputError("'" + path + "' has " + std::to_string(a.channels) + " channels; 1 to 32 are supported");
  if (!stream_rate_ok(a.rate))
    throw InputError("'" + path + "' has a sample rate of " + std::to_string(a.rate) + " Hz; " +
                     std::to_string(EARSHOT_MIN_RATE) + " to " + std::to_string(EARSHOT_MAX_RATE) +
                     " Hz are supported");
  if (info.frames < 0) throw InputError("'" + path + "': libsndfile reports no length");
  check_declared_length(path, info.format, info.channels, int64_t(info.frames));
  const int64_t declared = int64_t(info.frames);
  if (declared > kMaxAudioSamples / a.channels)
    throw InputError("'" + path + "' declares " + std::to_string(declared) + " frames of " +
                     std::to_string(a.channels) + " channels; at most " + std::to_string(kMaxAudioSamples) +
                     " samples (frames x channels) are read");
  // Read in pieces and grow with what was actually decoded: a compressed
  // header may claim far more frames than the file holds, and memory must
  // follow the data, never the claim.
  const size_t ch = size_t(a.channels);
  constexpr sf_count_t kPiece = 65536;
  while (int64_t(a.frames) < declared) {
    const sf_count_t want = sf_count_t(std::min<int64_t>(kPiece, declared - int64_t(a.frames)));
    a.samples.resize((a.frames + size_t(want)) * ch);
    const sf_count_t got = sf_readf_float(f.get(), a.samples.data() + a.frames * ch, want);
    if (got < 0) break;
    for (size_t i = a.frames * ch; i < (a.frames + size_t(got)) * ch; ++i)
      if (!std::isfinite(a.samples[i]))
        throw InputError("'" + path + "': sample " + std::to_string(i / ch) + " of channel " +
                         std::to_string(i % ch + 1) + " is not a finite number");
    a.frames += size_t(got);
    if (got < want) break;
  }
  a.samples.resize(a.frames * ch);
  a.samples.shrink_to_fit();
  if (int64_t(a.frames) != declared)
    throw InputError("'" + path + "': read " + std::to_string(a.frames) + " of " + std::to_string(declared) +
                     " frames: " + sf_strerror(f.get()));
  return a;
}


}  // namespace cli
}  // namespace earshot
