// `earshot info FILE`: what an effect is and what it costs, from the core's
// info JSON (earshot_info) of a stream made for the file.
#include <sys/stat.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

#include "cli.hpp"
#include "text_out.hpp"
#include "cpu_variants.hpp"
#include "model.hpp"
#include "../layers/types.hpp"

namespace earshot {
namespace cli {
namespace {

const char* kHelp =
    "usage: earshot info FILE [--json] [--rate HZ] [--variant V] [--max-stream-mib N]\n"
    "\n"
    "Describes an effect file: credits, file size, model sample rate, the layer list\n"
    "with channel shapes, parameter count, multiply-adds per sample, receptive field\n"
    "(or 'recurrent' for LSTM/GRU graphs), latency, stream memory, and the controls (name, unit,\n"
    "range, default, smoothing time).\n"
    "\n"
    "options:\n"
    "  --json        print the core's info JSON (earshot_info) instead, one line\n"
    "  --rate HZ     host sample rate for the latency figure and the JSON\n"
    "                (default: the model's rate, where the latency is 0; the text\n"
    "                also shows 44100 and 48000 Hz)\n"
    "  --variant V   CPU variant for the stream: scalar, sse4, avx2, avx2fma\n"
    "                (default: the best bit-exact one this CPU runs)\n"
    MAX_STREAM_HELP
    "  -h, --help    this text\n";

const rapidjson::Value* member(const rapidjson::Value& v, const char* key) {
  if (!v.IsObject()) return nullptr;
  auto it = v.FindMember(key);
  return it == v.MemberEnd() ? nullptr : &it->value;
}

// Columns padded to their widest cell, two spaces in from the margin; the last
// column unpadded. `right`: which columns align right (numbers).
void print_table(std::vector<std::vector<std::string>> rows, const std::vector<bool>& right) {
  for (auto& r : rows)
    for (std::string& cell : r) cell = terminal_text(cell);
  std::vector<size_t> w(rows[0].size(), 0);
  for (const auto& r : rows)
    for (size_t c = 0; c < r.size(); ++c) w[c] = std::max(w[c], r[c].size());
  for (const auto& r : rows) {
    std::string line = " ";
    for (size_t c = 0; c < r.size(); ++c) {
      const std::string fill(w[c] - r[c].size(), ' ');
      line += (c ? "  " : " ") + (right[c] ? fill + r[c] : c + 1 < r.size() ? r[c] + fill : r[c]);
    }
    while (!line.empty() && line.back() == ' ') line.pop_back();
    std::printf("%s\n", line.c_str());
  }
}

std::string file_size_text(const std::string& path) {
  struct stat st;
  if (::stat(path.c_str(), &st) != 0) return "?";
  const double b = double(st.st_size);
  std::string s = format_count(int64_t(st.st_size)) + " bytes";
  if (b >= 1024 * 1024)
    s += " (" + format_fixed(b / (1024 * 1024), 1) + " MiB)";
  else if (b >= 1024)
    s += " (" + format_fixed(b / 1024, 1) + " KiB)";
  return s;
}

// Every value printed may hold the effect file's own text: terminal_text
// escapes control characters (docs/cli.md, "Untrusted text").
void row(const char* k, const std::string& v) { std::printf("  %-17s %s\n", k, terminal_text(v).c_str()); }

// Latency at the host rate in use and at the two common rates (a rate the
// effect cannot be served at is left out).
std::string latency_text(const Stream& s, double host, double model_rate, const std::vector<unsigned char>& bytes,
                         const std::string& variant, const std::string& path) {
  std::vector<double> rates = {host};
  for (double r : {44100.0, 48000.0})
    if (r != host) rates.push_back(r);
  std::string lat;
  for (double r : rates) {
    int samples;
    if (r == host) {
      samples = s.latency();
    } else {
      try {
        Stream t(bytes, r, variant, path);
        samples = t.latency();
      } catch (const InputError&) {
        continue;  // this rate cannot be served; the stream in use can
      }
    }
    if (!lat.empty()) lat += "; ";
    lat += std::to_string(samples) + " samples at " + short_number(r) + " Hz";
    if (samples > 0) lat += " (" + format_fixed(samples / r * 1000, 2) + " ms)";
    if (r == model_rate) lat += " (model rate: no resampling)";
  }
  return lat;
}

// Title, file, credits and the figures of the whole effect.
void print_summary(const rapidjson::Value& info, const rapidjson::Value& effect, const rapidjson::Value& credits,
                   const std::string& path, double model_rate) {
  std::printf("%s\n", terminal_text(json_string(info, "title", "(untitled)")).c_str());
  row("file", path + ", " + file_size_text(path));
  if (const rapidjson::Value* au = member(credits, "authors"); au && au->IsArray() && au->Size() > 0) {
    std::string list;
    for (const auto& x : au->GetArray())
      if (x.IsString()) list += (list.empty() ? "" : ", ") + std::string(x.GetString());
    row(au->Size() == 1 ? "author" : "authors", list);
  }
  for (const char* k : {"paper", "code", "licence"})
    if (!json_string(credits, k).empty()) row(k, json_string(credits, k));
  row("format version", short_number(json_number(effect, "version", 1)));
  row("model rate", short_number(model_rate) + " Hz");
  const int64_t params = int64_t(json_number(info, "parameters"));
  const int64_t macs = int64_t(json_number(info, "macs_per_sample"));
  row("parameters", format_count(params));
  row("multiply-adds", format_count(macs) + " per sample (" + format_fixed(double(macs) * model_rate / 1e6, 2) +
                           " million per second at " + short_number(model_rate) + " Hz)");
  const rapidjson::Value* rf = member(info, "receptive_field");
  const bool recurrent = member(info, "recurrent") && info["recurrent"].IsBool() && info["recurrent"].GetBool();
  if (recurrent || !rf || !rf->IsNumber())
    row("receptive field", "recurrent (LSTM/GRU state: unbounded)");
  else
    row("receptive field", format_count(rf->GetInt64()) + (rf->GetInt64() == 1 ? " sample (" : " samples (") +
                               format_fixed(rf->GetDouble() / model_rate * 1000, 2) + " ms at the model rate)");
  row("input skip", member(info, "input_skip") && info["input_skip"].IsBool() && info["input_skip"].GetBool()
                        ? "yes (output = network + input)"
                        : "no");
}

// The layer table, from the core's own description of the graph (model.hpp;
// the detail column is each type's detail(), dsp/layers/<type>.hpp).
void print_layers(const Model& m) {
  std::printf("\nlayers (%zu)\n", m.layers.size());
  if (m.layers.empty()) return;
  std::vector<std::vector<std::string>> rows;
  rows.push_back({"#", "name", "type", "in -> out", "parameters", "details"});
  for (size_t i = 0; i < m.layers.size(); ++i) {
    const LayerSpec& L = m.layers[i];
    int64_t params = 0;
    for (const auto& kv : L.params) params += int64_t(kv.second.size());
    rows.push_back({std::to_string(i), L.name, layer_type_name(L.type), std::to_string(L.in) + " -> " + std::to_string(L.out),
                    format_count(params), layer_detail(L)});
  }
  print_table(rows, {true, false, false, false, true, false});
}

void print_controls(const rapidjson::Value& effect) {
  const rapidjson::Value* controls = member(effect, "controls");
  const unsigned n_controls = controls && controls->IsArray() ? controls->Size() : 0;
  std::printf("\ncontrols (%u)\n", n_controls);
  if (n_controls == 0) {
    std::printf("  none\n");
    return;
  }
  std::vector<std::vector<std::string>> rows;
  rows.push_back({"name", "unit", "min", "max", "default", "smoothing"});
  for (const auto& c : controls->GetArray())
    rows.push_back({json_string(c, "name"), json_string(c, "unit").empty() ? "-" : json_string(c, "unit"),
                    short_number(json_number(c, "min")), short_number(json_number(c, "max")),
                    short_number(json_number(c, "default")), short_number(json_number(c, "smoothing_ms", 20)) + " ms"});
  print_table(rows, std::vector<bool>(rows[0].size(), false));
}

}  // namespace

int cmd_info(const std::vector<std::string>& argv) {
  const Args a = parse_args(argv, {{"--help", false}, MAX_STREAM_OPTION, {"--json", false}, {"--rate", true}, {"--variant", true}});
  apply_stream_limit(a);
  if (a.has("--help")) {
    std::fputs(kHelp, stdout);
    return kExitOk;
  }
  if (a.positional.size() != 1)
    throw UsageError(a.positional.empty() ? "missing the effect FILE" : "expected one effect FILE, got " +
                                                                           std::to_string(a.positional.size()) +
                                                                           " arguments");
  const double rate = parse_rate_option(a);
  std::string variant;
  if (const std::string* v = a.last("--variant")) {
    variant = *v;
    check_variant(variant);
  }
  const std::string path = a.positional[0];
  const std::vector<unsigned char> bytes = read_effect_file(path);

  // A first stream only to learn the model rate, then the one we describe.
  double model_rate;
  {
    Stream probe(bytes, rate != 0 ? rate : 48000, variant, path);
    model_rate = json_number(probe.info(), "model_rate", 48000);
  }
  const bool model_rate_whole = model_rate == std::floor(model_rate) && stream_rate_ok(model_rate);
  const double host = rate != 0 ? rate : (model_rate_whole ? model_rate : 48000);
  Stream s(bytes, host, variant, path);
  const rapidjson::Document info = s.info();

  if (a.has("--json")) {
    std::printf("%s\n", earshot_info(s.get()));
    return kExitOk;
  }

  const rapidjson::Value empty(rapidjson::kObjectType);
  const rapidjson::Value* effect = member(info, "effect");
  if (!effect) effect = &empty;
  const rapidjson::Value* credits = member(*effect, "credits");
  if (!credits) credits = &empty;
  print_summary(info, *effect, *credits, path, model_rate);
  row("latency", latency_text(s, host, model_rate, bytes, variant, path));
  row("stream memory", format_fixed(json_number(info, "stream_bytes") / 1048576.0, 2) + " MiB at " + short_number(host) +
                           " Hz (limit " + format_fixed(double(stream_limit_bytes()) / 1048576.0, 0) + " MiB)");
  std::string vars;
  for (const std::string& v : supported_variants()) vars += (vars.empty() ? "" : ", ") + v;
  row("variant", json_string(info, "variant") + " (this CPU runs " + vars + ")");
  std::string load_error;
  const std::shared_ptr<const Model> model = load_model(bytes.data(), bytes.size(), load_error);
  if (!model) throw InputError(path + ": " + load_error);  // not reached: the stream above loaded it
  print_layers(*model);
  print_controls(*effect);
  return kExitOk;
}

}  // namespace cli
}  // namespace earshot
