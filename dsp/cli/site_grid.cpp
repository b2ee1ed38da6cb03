// The comparison grid of `earshot site` (site_grid.hpp, docs/site.md).
#include "site_grid.hpp"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <cstdio>
#include <set>

#include "test_signal.hpp"  // fnv1a64

namespace earshot {
namespace cli {
namespace {

GridColumn parse_column(const Where& w, const rapidjson::Value& c, size_t i) {
  GridColumn col;
  col.field = "grid.columns[" + std::to_string(i) + "]";
  if (!c.IsObject()) w.fail(col.field, std::string("must be an object, got ") + type_name(c));
  only_fields(w, col.field, c, {"name", "description", "input", "reference", "effect", "controls"});
  col.name = text_field(w, col.field + ".name", member(c, "name"), true, 80, 1);
  col.description = text_field(w, col.field + ".description", member(c, "description"), false, 1000);
  int kinds = 0;
  for (const char* flag : {"input", "reference"}) {
    if (const rapidjson::Value* v = member(c, flag)) {
      if (!v->IsTrue())
        w.fail(col.field + "." + flag, std::string("must be true (leave it out otherwise), got ") +
                                           (v->IsFalse() ? "false" : type_name(*v)));
      col.kind = flag;
      ++kinds;
    }
  }
  if (const rapidjson::Value* v = member(c, "effect")) {
    col.effect = text_field(w, col.field + ".effect", v, true, 64, 1);
    col.kind = "effect";
    ++kinds;
  }
  if (kinds != 1)
    w.fail(col.field, kinds == 0 ? "says what the column plays: \"input\": true, \"reference\": true or \"effect\": ID"
                                 : "names more than one of \"input\", \"reference\" and \"effect\"; a column plays one");
  if (const rapidjson::Value* v = member(c, "controls")) {
    if (col.kind != "effect") w.fail(col.field + ".controls", "only an \"effect\" column has controls");
    if (!v->IsObject()) w.fail(col.field + ".controls", std::string("must be an object of name: value, got ") + type_name(*v));
    for (auto it = v->MemberBegin(); it != v->MemberEnd(); ++it) {
      const std::string name(it->name.GetString(), it->name.GetStringLength());
      if (!it->value.IsNumber())
        w.fail(col.field + ".controls." + name, std::string("must be a number, got ") + type_name(it->value));
      col.controls.emplace_back(name, it->value.GetDouble());
    }
  }
  return col;
}

// The samples of an audio file, channel after channel (as the page holds them).
std::vector<std::vector<float>> planar(const Audio& a) {
  std::vector<std::vector<float>> ch(size_t(a.channels), std::vector<float>(a.frames));
  for (size_t t = 0; t < a.frames; ++t)
    for (int c = 0; c < a.channels; ++c) ch[size_t(c)][t] = a.samples[t * size_t(a.channels) + size_t(c)];
  return ch;
}

GridCell cell_of(const std::vector<std::vector<float>>& ch) {
  GridCell cell;
  cell.available = true;
  cell.channels = int(ch.size());
  cell.frames = ch.empty() ? 0 : int64_t(ch[0].size());
  cell.hash = 14695981039346656037ull;
  for (const auto& c : ch) cell.hash = fnv1a64(c.data(), c.size(), cell.hash);
  return cell;
}

// `earshot render` of a clip: one stream of the clip's channels in lockstep
// at its rate, with the column's controls, mix 1, gains 0 dB, started
// unramped; the input followed by `latency` zeros, the first `latency` output
// samples dropped.
std::vector<std::vector<float>> render_cell(const GridEffect& fx,
                                            const std::vector<std::pair<std::string, double>>& controls,
                                            const std::vector<std::vector<float>>& dry, int rate) {
  Stream s(*fx.bytes, rate, "scalar", fx.path, int(dry.size()));
  for (const auto& c : controls) {
    const int st = earshot_set_control(s.get(), earshot_control_index(s.get(), c.first.c_str()), float(c.second));
    if (st != EARSHOT_OK)
      throw InputError(fx.path + ": control " + c.first + " = " + format_fixed(c.second, 6) + " is refused: " +
                       earshot_status_text(st));
  }
  earshot_reset(s.get());
  const size_t latency = size_t(s.latency());
  const size_t n = dry.empty() ? 0 : dry[0].size();
  std::vector<std::vector<float>> in(dry.size(), std::vector<float>(n + latency, 0.0f));
  std::vector<std::vector<float>> out(dry.size(), std::vector<float>(n + latency));
  for (size_t c = 0; c < dry.size(); ++c) std::copy(dry[c].begin(), dry[c].end(), in[c].begin());
  s.process_channels(in, out, n + latency, 4096);
  for (auto& ch : out) ch.erase(ch.begin(), ch.begin() + std::ptrdiff_t(latency));
  return out;
}

// Every control of an effect column: the column's value, else the page default.
std::vector<std::pair<std::string, double>> column_controls(const GridColumn& col, const GridEffect& fx,
                                                            const Where& w) {
  std::vector<std::pair<std::string, double>> out;
  for (const auto& c : col.controls) {
    const auto it = std::find_if(fx.controls.begin(), fx.controls.end(),
                                 [&](const GridEffect::Control& d) { return d.name == c.first; });
    const std::string field = col.field + ".controls." + c.first;
    if (it == fx.controls.end()) {
      std::string names;
      for (const auto& d : fx.controls) names += (names.empty() ? "" : ", ") + d.name;
      w.fail(field, "the effect '" + fx.id + "' has no control named '" + c.first + "' (" +
                        (names.empty() ? std::string("it has no controls") : "its controls: " + names) + ")");
    }
    if (!(c.second >= it->min && c.second <= it->max)) {
      char buf[200];
      std::snprintf(buf, sizeof buf, "%.10g is outside the range of %s (%.10g .. %.10g)", c.second, c.first.c_str(),
                    it->min, it->max);
      w.fail(field, buf);
    }
  }
  for (const auto& d : fx.controls) {
    double v = d.value;
    for (const auto& c : col.controls)
      if (c.first == d.name) v = c.second;
    out.emplace_back(d.name, v);
  }
  return out;
}

void write_text(rapidjson::PrettyWriter<rapidjson::StringBuffer>& w, const char* key, const std::string& v) {
  w.Key(key);
  w.String(v.c_str(), rapidjson::SizeType(v.size()));
}

}  // namespace

GridSpec parse_grid(const Where& w, const rapidjson::Value& g) {
  GridSpec spec;
  spec.present = true;
  if (!g.IsObject()) w.fail("grid", std::string("must be an object, got ") + type_name(g));
  only_fields(w, "grid", g, {"title", "description", "rows", "columns"});
  spec.title = text_field(w, "grid.title", member(g, "title"), false, 200);
  spec.description = text_field(w, "grid.description", member(g, "description"), false, 4000);
  if (const rapidjson::Value* rows = member(g, "rows")) {
    if (!rows->IsArray()) w.fail("grid.rows", std::string("must be an array of clip ids, got ") + type_name(*rows));
    if (rows->Empty()) w.fail("grid.rows", "is empty; leave it out to use every clip");
    if (rows->Size() > kGridMaxRows)
      w.fail("grid.rows", "has " + std::to_string(rows->Size()) + " entries, over the limit of " + std::to_string(kGridMaxRows));
    std::set<std::string> seen;
    for (rapidjson::SizeType i = 0; i < rows->Size(); ++i) {
      const std::string f = "grid.rows[" + std::to_string(i) + "]";
      const std::string id = text_field(w, f, &(*rows)[i], true, 64, 1);
      if (!seen.insert(id).second) w.fail(f, "'" + id + "' is listed twice");
      spec.rows.push_back(id);
    }
  }
  const rapidjson::Value* cols = member(g, "columns");
  if (!cols) w.fail("grid.columns", "missing (an array of at least one column is required)");
  if (!cols->IsArray()) w.fail("grid.columns", std::string("must be an array, got ") + type_name(*cols));
  if (cols->Empty()) w.fail("grid.columns", "is empty; list at least one column");
  if (cols->Size() > kGridMaxColumns)
    w.fail("grid.columns", "has " + std::to_string(cols->Size()) + " entries, over the limit of " + std::to_string(kGridMaxColumns));
  for (rapidjson::SizeType i = 0; i < cols->Size(); ++i) spec.columns.push_back(parse_column(w, (*cols)[i], i));
  return spec;
}

GridPlan plan_grid(const GridSpec& spec, const std::vector<GridEffect>& effects, const std::vector<GridClip>& clips,
                   const Where& w) {
  GridPlan plan;
  plan.spec = spec;
  if (clips.empty()) w.fail("grid", "the site has no clips; a grid's rows are clips (list them in \"clips\")");
  if (spec.rows.empty()) {
    for (size_t i = 0; i < clips.size(); ++i) plan.rows.push_back(i);
  } else {
    for (size_t r = 0; r < spec.rows.size(); ++r) {
      const auto it = std::find_if(clips.begin(), clips.end(), [&](const GridClip& c) { return c.id == spec.rows[r]; });
      if (it == clips.end()) {
        std::string ids;
        for (const GridClip& c : clips) ids += (ids.empty() ? "" : ", ") + c.id;
        w.fail("grid.rows[" + std::to_string(r) + "]", "no clip has the id '" + spec.rows[r] + "' (the clips: " + ids + ")");
      }
      plan.rows.push_back(size_t(it - clips.begin()));
    }
  }
  bool wants_reference = false;
  plan.column_controls.resize(spec.columns.size());
  plan.column_effect.assign(spec.columns.size(), 0);
  size_t effect_columns = 0;
  for (size_t k = 0; k < spec.columns.size(); ++k) {
    const GridColumn& col = spec.columns[k];
    if (col.kind == "reference") wants_reference = true;
    if (col.kind != "effect") continue;
    ++effect_columns;
    const auto it = std::find_if(effects.begin(), effects.end(), [&](const GridEffect& e) { return e.id == col.effect; });
    if (it == effects.end()) {
      std::string ids;
      for (const GridEffect& e : effects) ids += (ids.empty() ? "" : ", ") + e.id;
      w.fail(col.field + ".effect", "no effect has the id '" + col.effect + "' (the effects: " + ids + ")");
    }
    plan.column_effect[k] = size_t(it - effects.begin());
    plan.column_controls[k] = column_controls(col, *it, w);
  }
  if (wants_reference && std::none_of(plan.rows.begin(), plan.rows.end(),
                                      [&](size_t r) { return !clips[r].reference.empty(); }))
    w.fail("grid.columns", "has a \"reference\" column but no clip of the grid has a \"reference\" file");
  for (size_t r : plan.rows) plan.rendered_seconds += clips[r].seconds * double(effect_columns);
  if (plan.rendered_seconds > kGridMaxRenderSeconds) {
    char buf[200];
    std::snprintf(buf, sizeof buf, "needs %.0f s of audio rendered (clip lengths x effect columns), over the limit of %.0f s",
                  plan.rendered_seconds, kGridMaxRenderSeconds);
    w.fail("grid", buf);
  }

  // The page reads WAV itself, sample for sample as libsndfile does
  // (web/js/wav.js); other containers go through the browser's decoder, whose
  // samples a cell's hash could not vouch for.
  for (size_t r = 0; r < plan.rows.size(); ++r) {
    const GridClip& clip = clips[plan.rows[r]];
    for (const std::filesystem::path& f : {clip.file, clip.reference}) {
      std::string ext = f.extension().string();
      for (char& ch : ext) ch = char(std::tolower(static_cast<unsigned char>(ch)));
      if (!f.empty() && ext != ".wav")
        w.fail(spec.rows.empty() ? "grid" : "grid.rows[" + std::to_string(r) + "]",
               "the clip '" + clip.id + "' uses '" + f.filename().string() +
                   "'; a grid plays WAV files only (the page reads them sample-exactly, so every cell can be "
                   "checked against native): convert it to WAV");
    }
  }
  plan.cells.resize(plan.rows.size(), std::vector<GridCell>(spec.columns.size()));
  for (size_t r = 0; r < plan.rows.size(); ++r) {
    const GridClip& clip = clips[plan.rows[r]];
    Audio audio;
    try {
      audio = read_audio(clip.file.string());
    } catch (const InputError& e) {
      w.fail(clip.field + ".file", e.what());
    }
    const std::vector<std::vector<float>> dry = planar(audio);
    for (size_t k = 0; k < spec.columns.size(); ++k) {
      const GridColumn& col = spec.columns[k];
      GridCell& cell = plan.cells[r][k];
      if (col.kind == "input") {
        cell = cell_of(dry);
      } else if (col.kind == "reference") {
        if (clip.reference.empty()) continue;
        try {
          cell = cell_of(planar(read_audio(clip.reference.string())));
        } catch (const InputError& e) {
          w.fail(clip.field + ".reference", e.what());
        }
      } else {
        const GridEffect& fx = effects[plan.column_effect[k]];
        cell = cell_of(render_cell(fx, plan.column_controls[k], dry, audio.rate));
      }
    }
  }
  return plan;
}

void write_grid(rapidjson::PrettyWriter<rapidjson::StringBuffer>& w, const GridPlan& plan,
                const std::vector<GridEffect>& effects, const std::vector<GridClip>& clips) {
  const GridSpec& spec = plan.spec;
  w.Key("grid");
  w.StartObject();
  write_text(w, "title", spec.title.empty() ? std::string("Compare") : spec.title);
  if (!spec.description.empty()) write_text(w, "description", spec.description);
  write_text(w, "hash", "fnv1a64-float32le, channel after channel");
  w.Key("columns");
  w.StartArray();
  for (size_t k = 0; k < spec.columns.size(); ++k) {
    const GridColumn& col = spec.columns[k];
    w.StartObject();
    write_text(w, "name", col.name);
    if (!col.description.empty()) write_text(w, "description", col.description);
    write_text(w, "kind", col.kind);
    if (col.kind == "effect") {
      write_text(w, "effect", effects[plan.column_effect[k]].id);
      w.Key("controls");
      w.StartObject();
      for (const auto& c : plan.column_controls[k]) {
        w.Key(c.first.c_str(), rapidjson::SizeType(c.first.size()));
        w.Double(c.second);
      }
      w.EndObject();
    }
    w.EndObject();
  }
  w.EndArray();
  w.Key("rows");
  w.StartArray();
  for (size_t r = 0; r < plan.rows.size(); ++r) {
    const GridClip& clip = clips[plan.rows[r]];
    w.StartObject();
    write_text(w, "clip", clip.id);
    w.Key("cells");
    w.StartArray();
    for (const GridCell& cell : plan.cells[r]) {
      if (!cell.available) {
        w.Null();
        continue;
      }
      w.StartObject();
      write_text(w, "hash", hex64(cell.hash));
      w.Key("frames");
      w.Int64(cell.frames);
      w.Key("channels");
      w.Int(cell.channels);
      w.EndObject();
    }
    w.EndArray();
    w.EndObject();
  }
  w.EndArray();
  w.EndObject();
}

}  // namespace cli
}  // namespace earshot
