// Checks a listening test definition for `earshot site` and plans its files.
// The rules are those of the listening page (web/js/listen-config.js), so a
// definition the builder accepts is one the page runs; the builder adds what
// only it can check before anyone listens: unknown fields, the effects and
// their control ranges, and every audio file (readable WAV, mono or stereo,
// long enough to measure, not silent, the same rate, channels and length
// across an item's stimuli). tests/browser/builder.test.js holds both sides
// to the same refusals.
#include "site_listening.hpp"

#include <sndfile.h>

#include <cctype>
#include <cmath>
#include <cstdio>
#include <map>
#include <set>

#include "json_fields.hpp"
#include "json_reader.hpp"

#include <rapidjson/error/en.h>
#include <rapidjson/prettywriter.h>
#include <rapidjson/stringbuffer.h>

namespace fs = std::filesystem;

namespace earshot {
namespace cli {
namespace {

constexpr int kMushraMax = 12;  // stimuli per trial, ITU-R BS.1534-3 (hidden reference and anchors included)
constexpr const char* kAnchorIds[] = {"lp3500", "lp7000"};  // the page's generated anchors
constexpr double kBlockSeconds = 0.4;                        // one gating block of ITU-R BS.1770-4

std::string json_text(const rapidjson::Value& v) {
  rapidjson::StringBuffer sb;
  rapidjson::Writer<rapidjson::StringBuffer> w(sb);
  v.Accept(w);
  return sb.GetString();
}

std::string number_text(double v) {
  char buf[40];
  std::snprintf(buf, sizeof buf, "%.10g", v);
  return buf;
}

class Checker {
 public:
  Checker(const fs::path& def, const std::vector<ListeningEffect>& effects, const std::vector<ListeningClip>& clips,
          const std::vector<fs::path>& roots)
      : w_{def.string(), nullptr}, dir_(def.parent_path().empty() ? fs::path(".") : def.parent_path()), effects_(effects),
        clips_(clips), roots_(roots) {
    if (roots_.empty()) {
      std::error_code ec;
      roots_.push_back(fs::canonical(dir_, ec));
      if (ec) throw InputError("cannot resolve the folder '" + dir_.string() + "': " + ec.message());
    }
  }

  ListeningPlan run() {
    const std::string text = read_text_file(w_.file, "listening test definition");
    // The shared reader (dsp/core/json_reader.hpp): iterative, capped, strict.
    auto parsed = std::make_shared<JsonDocument>();
    const std::string error = json_read(w_.file, text.data(), text.size(), *parsed);
    if (!error.empty()) throw InputError(error);
    w_.doc = parsed;
    rapidjson::Document& doc = parsed->doc;
    if (!doc.IsObject()) w_.fail("", std::string("must be a JSON object, got ") + type_name(doc));
    only_fields(w_, "", doc, {"format", "version", "title", "tests"});
    const rapidjson::Value* format = member(doc, "format");
    if (!format || !format->IsString() || std::string(format->GetString()) != "earshot-listening-tests")
      w_.fail("format", "must be \"earshot-listening-tests\"");
    const rapidjson::Value* version = member(doc, "version");
    if (!version || !version->IsNumber() || version->GetDouble() != 1)
      w_.fail("version", "is " + (version ? json_text(*version) : std::string("missing")) +
                             "; the listening page reads version 1");
    plan_.title = str(member(doc, "title"), "title", true, 200);
    if (plan_.title.empty()) plan_.title = "Listening test";
    rapidjson::Value* tests = mutable_member(doc, "tests");
    if (!tests || !tests->IsArray() || tests->Empty()) w_.fail("tests", "must be a non-empty array");
    if (tests->Size() > 100) w_.fail("tests", "has " + std::to_string(tests->Size()) + " tests, over the limit of 100");
    std::set<std::string> ids;
    for (rapidjson::SizeType i = 0; i < tests->Size(); ++i) {
      test((*tests)[i], "tests[" + std::to_string(i) + "]", doc.GetAllocator());
      if (!ids.insert(plan_.tests.back().id).second)
        w_.fail("tests", "test id '" + plan_.tests.back().id + "' is used twice");
    }
    rapidjson::StringBuffer sb;
    rapidjson::PrettyWriter<rapidjson::StringBuffer> out(sb);
    out.SetIndent(' ', 1);
    doc.Accept(out);
    plan_.json = std::string(sb.GetString()) + "\n";
    return std::move(plan_);
  }

 private:
  struct Conditions {
    std::vector<std::string> ids;  // declared, then the generated anchors
    std::set<std::string> anchors;
  };
  struct Shape {
    int rate = 0, channels = 0;
    size_t frames = 0;
  };

  static rapidjson::Value* mutable_member(rapidjson::Value& obj, const char* key) {
    auto it = obj.FindMember(key);
    return it == obj.MemberEnd() ? nullptr : &it->value;
  }

  // A non-empty string of at most `max` characters ("" when optional and absent).
  std::string str(const rapidjson::Value* v, const std::string& field, bool optional, size_t max) const {
    if (!v && optional) return "";
    if (!v || !v->IsString() || v->GetStringLength() == 0)
      w_.fail(field, "must be a non-empty string, got " + (v ? json_text(*v) : std::string("nothing")));
    const std::string s(v->GetString(), v->GetStringLength());
    if (s.find('\0') != std::string::npos) w_.fail(field, "contains a NUL character");
    if (utf8_length(s) > max) w_.fail(field, "is longer than " + std::to_string(max) + " characters");
    return s;
  }

  std::string ident(const rapidjson::Value* v, const std::string& field) const {
    const std::string s = str(v, field, false, 64);
    bool ok = std::isalnum(static_cast<unsigned char>(s[0])) != 0;
    for (unsigned char c : s) ok = ok && (std::isalnum(c) || c == '.' || c == '_' || c == '-');
    if (!ok) w_.fail(field, "'" + s + "' may hold only letters, digits, '.', '_' and '-'");
    return s;
  }

  bool boolean(const rapidjson::Value* v, const std::string& field, bool dflt) const {
    if (!v) return dflt;
    if (!v->IsBool()) w_.fail(field, std::string("must be true or false, got ") + json_text(*v));
    return v->GetBool();
  }

  int whole(const rapidjson::Value* v, const std::string& field, int dflt, int lo, int hi, const std::string& what) const {
    if (!v) return dflt;
    const bool ok = v->IsNumber() && std::floor(v->GetDouble()) == v->GetDouble() && v->GetDouble() >= lo &&
                    v->GetDouble() <= hi;
    if (!ok) w_.fail(field, "must be " + what + ", " + std::to_string(lo) + " .. " + std::to_string(hi) + ", got " + json_text(*v));
    return int(v->GetDouble());
  }

  void test(rapidjson::Value& t, const std::string& f, rapidjson::Document::AllocatorType& alloc) {
    if (!t.IsObject()) w_.fail(f, "must be an object");
    ListeningPlan::Test summary;
    summary.id = ident(member(t, "id"), f + ".id");
    summary.type = str(member(t, "type"), f + ".type", false, 200);
    const std::string& type = summary.type;
    if (type != "mushra" && type != "abx" && type != "ab")
      w_.fail(f + ".type", "'" + type + "' is not one of mushra, abx, ab");
    std::vector<std::string> allowed = {"id", "type", "title", "instructions", "target_lufs", "post",
                                        "familiarisation", "conditions", "items"};
    if (type == "mushra") allowed.push_back("anchors");
    if (type == "abx") allowed.insert(allowed.end(), {"pairs", "trials"});
    if (type == "ab") allowed.insert(allowed.end(), {"pairs", "repeats", "no_preference"});
    only_fields(w_, f, t, allowed);
    summary.title = str(member(t, "title"), f + ".title", true, 200);
    if (summary.title.empty()) summary.title = summary.id;
    str(member(t, "instructions"), f + ".instructions", true, 4000);
    const rapidjson::Value* target = member(t, "target_lufs");
    if (!target || !target->IsNumber() || !(target->GetDouble() >= -70 && target->GetDouble() <= 0))
      w_.fail(f + ".target_lufs", "must be a number from -70 to 0 (LKFS), got " +
                                      (target ? json_text(*target) : std::string("nothing")));
    if (const rapidjson::Value* post = member(t, "post")) {
      const std::string u = str(post, f + ".post", false, 2000);
      if (u.compare(0, 8, "https://") != 0)
        w_.fail(f + ".post", "results are only sent to an https address, not '" + u + "'");
      if (u.size() == 8 || u[8] == '/') w_.fail(f + ".post", "'" + u + "' names no host");
      for (unsigned char c : u)
        if (c <= 0x20 || c == 0x7f) w_.fail(f + ".post", "'" + u + "' contains a space or control character");
    }
    boolean(member(t, "familiarisation"), f + ".familiarisation", true);

    const Conditions cond = conditions(t, f, type);
    if (type != "mushra") {
      pairs(member(t, "pairs"), f + ".pairs", cond);
      if (type == "abx")
        whole(member(t, "trials"), f + ".trials", 8, 1, 100, "a whole number of ABX trials per pair and item");
      else
        whole(member(t, "repeats"), f + ".repeats", 1, 1, 20, "a whole number of A/B trials per pair and item");
      if (type == "ab") boolean(member(t, "no_preference"), f + ".no_preference", false);
    }

    rapidjson::Value* items = mutable_member(t, "items");
    if (!items || !items->IsArray() || items->Empty()) w_.fail(f + ".items", "must be a non-empty array");
    std::set<std::string> item_ids;
    for (rapidjson::SizeType i = 0; i < items->Size(); ++i) {
      const std::string fi = f + ".items[" + std::to_string(i) + "]";
      rapidjson::Value& it = (*items)[i];
      if (!it.IsObject()) w_.fail(fi, "must be {\"id\": ..., \"title\"?: ..., \"stimuli\": {...}}");
      only_fields(w_, fi, it, {"id", "title", "stimuli"});
      const std::string id = ident(member(it, "id"), fi + ".id");
      str(member(it, "title"), fi + ".title", true, 200);  // shown to participants instead of the id
      rapidjson::Value* stimuli = mutable_member(it, "stimuli");
      if (!stimuli || !stimuli->IsObject()) w_.fail(fi + ".stimuli", "must be an object of condition id: stimulus");
      for (auto m = stimuli->MemberBegin(); m != stimuli->MemberEnd(); ++m) {
        const std::string k = m->name.GetString();
        if (std::find(cond.ids.begin(), cond.ids.end(), k) == cond.ids.end() || cond.anchors.count(k))
          w_.fail(fi + ".stimuli." + k, "'" + k + "' is not a declared condition");
      }
      const Shape* first = nullptr;
      std::string first_id;
      for (const std::string& c : cond.ids) {
        if (cond.anchors.count(c)) continue;
        rapidjson::Value* s = mutable_member(*stimuli, c.c_str());
        if (!s) w_.fail(fi + ".stimuli", "has no stimulus for condition '" + c + "'");
        const Shape& shape = stimulus(*s, fi + ".stimuli." + c, alloc);
        if (!first) {
          first = &shape;
          first_id = c;
        } else {
          const char* what = shape.rate != first->rate ? "sample rate" : shape.channels != first->channels ? "channels" : "frames";
          const long a = shape.rate != first->rate ? shape.rate : shape.channels != first->channels ? shape.channels : long(shape.frames);
          const long b = shape.rate != first->rate ? first->rate : shape.channels != first->channels ? first->channels : long(first->frames);
          if (a != b)
            w_.fail(fi + ".stimuli." + c, std::string("has ") + what + " " + std::to_string(a) + " but the stimulus of '" +
                                              first_id + "' has " + std::to_string(b) +
                                              "; all stimuli of an item must match so they can be switched sample-aligned");
        }
      }
      if (!item_ids.insert(id).second) w_.fail(f + ".items", "item '" + id + "' is declared twice");
    }
    plan_.tests.push_back(summary);
  }

  Conditions conditions(const rapidjson::Value& t, const std::string& f, const std::string& type) const {
    const rapidjson::Value* list = member(t, "conditions");
    if (!list || !list->IsArray() || list->Empty()) w_.fail(f + ".conditions", "must be a non-empty array");
    Conditions out;
    int references = 0;
    for (rapidjson::SizeType i = 0; i < list->Size(); ++i) {
      const std::string fc = f + ".conditions[" + std::to_string(i) + "]";
      const rapidjson::Value& c = (*list)[i];
      if (!c.IsObject()) w_.fail(fc, "must be {\"id\": ..., \"role\": ...}");
      only_fields(w_, fc, c, {"id", "role", "name"});
      const rapidjson::Value* role = member(c, "role");
      const std::string r = !role ? "test" : role->IsString() ? role->GetString() : "";
      if (r != "reference" && r != "test")
        w_.fail(fc + ".role", "must be 'reference' or 'test' (the page makes the anchors), got " + json_text(*role));
      const std::string id = ident(member(c, "id"), fc + ".id");
      str(member(c, "name"), fc + ".name", true, 200);
      if (std::find(out.ids.begin(), out.ids.end(), id) != out.ids.end())
        w_.fail(f + ".conditions", "condition '" + id + "' is declared twice");
      out.ids.push_back(id);
      references += r == "reference";
    }
    if (references > 1) w_.fail(f + ".conditions", "has more than one reference");
    if (type == "mushra") {
      if (references == 0) w_.fail(f + ".conditions", "a MUSHRA test needs a condition with role \"reference\"");
      if (boolean(member(t, "anchors"), f + ".anchors", true)) {
        for (const char* a : kAnchorIds) {
          if (std::find(out.ids.begin(), out.ids.end(), a) != out.ids.end())
            w_.fail(f + ".conditions", std::string("'") + a + "' is the name of a generated anchor; choose another id");
          out.ids.push_back(a);
          out.anchors.insert(a);
        }
      }
      if (out.ids.size() > size_t(kMushraMax))
        w_.fail(f + ".conditions", std::to_string(out.ids.size()) + " stimuli per trial (anchors included) is over the " +
                                       std::to_string(kMushraMax) + " of ITU-R BS.1534-3");
    }
    return out;
  }

  void pairs(const rapidjson::Value* v, const std::string& f, const Conditions& cond) const {
    if (!v || !v->IsArray() || v->Empty()) w_.fail(f, "must be a non-empty array of [condition, condition]");
    std::string list;
    for (const std::string& id : cond.ids) list += (list.empty() ? "" : ", ") + id;
    for (rapidjson::SizeType i = 0; i < v->Size(); ++i) {
      const std::string fp = f + "[" + std::to_string(i) + "]";
      const rapidjson::Value& p = (*v)[i];
      if (!p.IsArray() || p.Size() != 2) w_.fail(fp, "must be a pair [condition, condition]");
      for (const auto& c : p.GetArray()) {
        const std::string id = c.IsString() ? c.GetString() : json_text(c);
        if (!c.IsString() || std::find(cond.ids.begin(), cond.ids.end(), id) == cond.ids.end())
          w_.fail(fp, "'" + id + "' is not a declared condition (" + list + ")");
      }
      if (std::string(p[0].GetString()) == p[1].GetString()) w_.fail(fp, "pairs a condition with itself");
    }
  }

  // One stimulus: a file played as it is, or a dry clip rendered by an effect.
  // Rewrites the path to the file's place in the site.
  const Shape& stimulus(rapidjson::Value& s, const std::string& f, rapidjson::Document::AllocatorType& alloc) {
    if (!s.IsObject()) w_.fail(f, "must be an object: {\"file\": ...} or {\"effect\": ..., \"clip\": ...}");
    rapidjson::Value* file = mutable_member(s, "file");
    if (file) {
      only_fields(w_, f, s, {"file"});
      return place(*file, f + ".file", alloc, true);
    }
    only_fields(w_, f, s, {"effect", "clip", "controls"});
    rapidjson::Value* clip = mutable_member(s, "clip");
    const rapidjson::Value* effect = member(s, "effect");
    if (!effect) {
      if (!clip) w_.fail(f, "must be an object: {\"file\": ...} or {\"effect\": ..., \"clip\": ...}");
      if (member(s, "controls")) w_.fail(f + ".controls", "controls need an \"effect\" to set");
      return place(*clip, f + ".clip", alloc, true);  // a clip alone is played as it is
    }
    const std::string id = ident(effect, f + ".effect");
    const ListeningEffect* fx = nullptr;
    std::string names;
    for (const ListeningEffect& e : effects_) {
      if (e.id == id) fx = &e;
      names += (names.empty() ? "" : ", ") + e.id;
    }
    if (!fx) w_.fail(f + ".effect", "'" + id + "' is not an effect of the site (" + names + ")");
    if (!clip) w_.fail(f + ".clip", "must be a non-empty string, got nothing");
    if (const rapidjson::Value* controls = member(s, "controls")) {
      if (!controls->IsObject()) w_.fail(f + ".controls", "must be an object of control name: value");
      for (auto m = controls->MemberBegin(); m != controls->MemberEnd(); ++m) {
        const std::string name = m->name.GetString();
        const std::string fc = f + ".controls." + name;
        if (!m->value.IsNumber()) w_.fail(fc, "must be a number, got " + json_text(m->value));
        const ListeningControl* ctl = nullptr;
        std::string cnames;
        for (const ListeningControl& c : fx->controls) {
          if (c.name == name) ctl = &c;
          cnames += (cnames.empty() ? "" : ", ") + c.name;
        }
        if (!ctl)
          w_.fail(fc, "the effect '" + id + "' has no control named '" + name + "' (" +
                          (cnames.empty() ? std::string("it has no controls") : "its controls: " + cnames) + ")");
        const double v = m->value.GetDouble();
        if (!(v >= ctl->min && v <= ctl->max))
          w_.fail(fc, number_text(v) + " is outside " + number_text(ctl->min) + " .. " + number_text(ctl->max));
      }
    }
    return place(*clip, f + ".clip", alloc, false);
  }

  // Checks the audio file a path names and replaces the path by its place in
  // the site. played: heard as it is (so it must not be silent); otherwise a
  // dry clip the page renders (which may be silent: the rendered stimulus is
  // checked in the page).
  const Shape& place(rapidjson::Value& v, const std::string& field, rapidjson::Document::AllocatorType& alloc,
                     bool played) {
    const std::string rel = str(&v, field, false, 500);
    if (rel[0] == '/' || rel.find('\\') != std::string::npos)
      w_.fail(field, "'" + rel + "' must be a path relative to the definition's folder, with '/' between folders");
    confine(w_.file, field, roots_, dir_, rel);
    const fs::path src = (dir_ / rel).lexically_normal();
    std::error_code ec;
    if (!fs::is_regular_file(src, ec)) w_.fail(field, "'" + rel + "': no such file (looked for '" + src.string() + "')");
    const fs::path key = fs::canonical(src, ec);
    auto known = files_.find(key);
    if (known == files_.end()) {
      Entry e;
      for (const ListeningClip& c : clips_)
        if (fs::equivalent(c.source, src, ec)) e.site = c.site_file;
      Audio a;
      try {
        a = read_audio(src.string());
      } catch (const InputError& err) {
        w_.fail(field, err.what());
      }
      const int major = a.format & SF_FORMAT_TYPEMASK, sub = a.format & SF_FORMAT_SUBMASK;
      if (major != SF_FORMAT_WAV && major != SF_FORMAT_WAVEX)
        w_.fail(field, "'" + rel + "' is not a WAV file; the listening page reads WAV only");
      if (sub != SF_FORMAT_PCM_U8 && sub != SF_FORMAT_PCM_16 && sub != SF_FORMAT_PCM_24 && sub != SF_FORMAT_PCM_32 &&
          sub != SF_FORMAT_FLOAT && sub != SF_FORMAT_DOUBLE)
        w_.fail(field, "'" + rel + "': the listening page reads 8/16/24/32-bit integer or 32/64-bit float WAV only");
      if (a.channels > 2)
        w_.fail(field, "'" + rel + "' has " + std::to_string(a.channels) + " channels; the listening page plays mono or stereo");
      if (double(a.frames) < kBlockSeconds * a.rate)
        w_.fail(field, "'" + rel + "' lasts " + number_text(double(a.frames) / a.rate) +
                           " s, shorter than one 0.4 s block of ITU-R BS.1770-4, so it cannot be loudness-matched");
      e.shape = {a.rate, a.channels, a.frames};
      e.lkfs = earshot_loudness_lkfs(a.samples.data(), a.frames, a.channels, a.rate);
      if (e.site.empty()) {
        e.site = site_name(src);
        plan_.copies.emplace_back(src, e.site);
      }
      known = files_.emplace(key, e).first;
    }
    if (played && !(known->second.lkfs > -1e300))
      w_.fail(field, "'" + rel + "' is silent (no 400 ms block above -70 LKFS), so it cannot be loudness-matched");
    v.SetString(known->second.site.c_str(), rapidjson::SizeType(known->second.site.size()), alloc);
    return known->second.shape;
  }

  // listening/<name>.wav: the file's name in lower case, characters other
  // than letters, digits, '-' and '_' as '-', numbered when two files share it.
  std::string site_name(const fs::path& src) {
    std::string stem;
    for (unsigned char c : src.stem().string())
      stem += std::isalnum(c) ? char(std::tolower(c)) : (c == '_' || c == '-') ? char(c) : '-';
    if (stem.size() > 64) stem.resize(64);
    if (stem.empty()) stem = "stimulus";
    std::string name = "listening/" + stem + ".wav";
    for (int k = 2; !names_.insert(name).second; ++k) name = "listening/" + stem + "-" + std::to_string(k) + ".wav";
    return name;
  }

  struct Entry {
    std::string site;
    Shape shape;
    double lkfs = 0;
  };

  Where w_;
  fs::path dir_;
  const std::vector<ListeningEffect>& effects_;
  const std::vector<ListeningClip>& clips_;
  std::vector<fs::path> roots_;  // resolved folders every path must stay inside
  std::map<fs::path, Entry> files_;
  std::set<std::string> names_;
  ListeningPlan plan_;
};

}  // namespace

ListeningPlan plan_listening(const fs::path& definition, const std::vector<ListeningEffect>& effects,
                             const std::vector<ListeningClip>& clips, const std::vector<fs::path>& roots) {
  return Checker(definition, effects, clips, roots).run();
}

bool path_within(const fs::path& inner, const fs::path& outer) {
  auto o = outer.begin(), i = inner.begin();
  for (; o != outer.end() && i != inner.end(); ++o, ++i)
    if (*o != *i) return false;
  return o == outer.end();
}

fs::path confine(const std::string& file, const std::string& field, const std::vector<fs::path>& roots,
                 const fs::path& base, const std::string& rel) {
  const Where w{file, nullptr};
  const std::string where = "the site config's folder '" + roots.at(0).string() + "'" +
                            (roots.size() > 1 ? " or an --allow-root folder" : "");
  if (fs::path(rel).is_absolute())
    w.fail(field, "'" + rel + "' is an absolute path; paths must be relative and stay inside " + where);
  std::error_code ec;
  const fs::path resolved = fs::weakly_canonical(base / rel, ec);
  if (ec) w.fail(field, "cannot resolve '" + rel + "': " + ec.message());
  for (const fs::path& root : roots)
    if (path_within(resolved, root)) return resolved;
  w.fail(field, "'" + rel + "' resolves to '" + resolved.string() + "', outside " + where +
                    "; every file a site uses must be inside it");
}

}  // namespace cli
}  // namespace earshot
