// `earshot site CONFIG --out DIR`: builds the static demo site. Reads and
// validates the site config (docs/site.md), copies the page (web/), the
// worklet and loader (worklet/), both WebAssembly builds, the effects and the
// clips, and writes site.json: the config as the page needs it plus, per
// effect, the native reference for the page's self-check (the FNV-1a 64 hash
// of the effect's output on the standard test signal of test_signal.hpp,
// controls at the file's defaults, host rate = model rate, native scalar
// variant; a 64-sample excerpt; the whole output as reference/<id>.f32).
// The result is plain files: no server code, no special headers.
#include <fcntl.h>
#include <sndfile.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <cctype>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <exception>
#include <filesystem>
#include <fstream>
#include <memory>
#include <new>
#include <set>
#include <string>
#include <vector>

#include "cli.hpp"  // first: it configures rapidjson
#include "text_out.hpp"

#include <rapidjson/error/en.h>
#include <rapidjson/prettywriter.h>
#include <rapidjson/stringbuffer.h>

#include "json_fields.hpp"
#include "json_reader.hpp"
#include "output_file.hpp"
#include "site_grid.hpp"
#include "site_listening.hpp"
#include "test_signal.hpp"

#ifndef EARSHOT_VERSION
#define EARSHOT_VERSION "0.1.0"
#endif

namespace fs = std::filesystem;

namespace earshot {
namespace cli {
namespace {

const char* kHelp =
    "usage: earshot site CONFIG --out DIR [options]\n"
    "\n"
    "Builds the static demo site described by the JSON file CONFIG (format in\n"
    "docs/site.md) into DIR: the page, its worker and AudioWorklet, both\n"
    "WebAssembly builds, the effects and clips, and site.json with the native\n"
    "reference output of every effect on the standard test signal (what the\n"
    "page's self-check compares against). With \"listening\" in CONFIG, also the\n"
    "listening test definition and the audio files it names, for listen.html\n"
    "(docs/listening.md). DIR works on any static web host; it\n"
    "needs no server code and no cross-origin-isolation headers.\n"
    "\n"
    "Paths inside CONFIG (and inside its listening test definition) are relative,\n"
    "and every one must resolve, after symlinks, inside CONFIG's folder (or an\n"
    "--allow-root folder).\n"
    "\n"
    "DIR must be new, empty, or a site this command made before; replacing an\n"
    "earlier site needs --force. The site is built in a new folder beside DIR and\n"
    "swapped in by rename when complete, so a failed build leaves DIR as it was;\n"
    "the old site is then removed as a whole, without following symlinks. DIR\n"
    "must not be a symlink, nor be or hold CONFIG's folder or any input.\n"
    "\n"
    "options:\n"
    "  --out DIR           where to write the site (required)\n"
    "  --assets DIR        the earshot source tree holding web/ and worklet/\n"
    "                      (default: found upward from CONFIG, then from this program)\n"
    "  --wasm-simd PATH    earshot-simd.wasm (default: ASSETS/build/wasm-simd/)\n"
    "  --wasm-scalar PATH  earshot-scalar.wasm (default: ASSETS/build/wasm-scalar/)\n"
    "  --allow-root DIR    also accept CONFIG paths that resolve inside DIR (e.g. a\n"
    "                      shared folder of test files; repeatable)\n"
    "  --force             replace an earlier site in DIR\n"
    "  --quiet             no summary\n"
    "  -h, --help          this text\n";

constexpr double kSignalSeconds = 3.0;  // the length `earshot verify` uses by default
// The worklet/ files the page loads (web/ is copied whole, copy_page).
constexpr const char* kWorkletFiles[] = {"loader.js", "capabilities.js", "processor.js"};
constexpr int kExcerpt = 64;            // samples of the reference shown in a failing self-check
constexpr const char* kMarker = ".earshot-site";

// Links become <a href>: only absolute http and https addresses.
std::string url_field(const Where& w, const std::string& field, const rapidjson::Value* v) {
  const std::string s = text_field(w, field, v, false, 2000);
  if (!v) return s;
  const bool ok = (s.compare(0, 8, "https://") == 0 && s.size() > 8) || (s.compare(0, 7, "http://") == 0 && s.size() > 7);
  if (!ok) w.fail(field, "'" + s + "' is not an http:// or https:// address");
  for (unsigned char c : s)
    if (c <= 0x20 || c == 0x7f) w.fail(field, "'" + s + "' contains a space or control character");
  return s;
}

// An id from a file name: its stem, lower-cased, anything else → '-'.
std::string id_from(const std::string& path) {
  std::string stem = fs::path(path).stem().string(), id;
  for (unsigned char c : stem) id += std::isalnum(c) ? char(std::tolower(c)) : (c == '_' || c == '-') ? char(c) : '-';
  if (id.size() > 64) id.resize(64);
  return id.empty() ? "item" : id;
}


// ---- the parsed config -----------------------------------------------------

struct EffectEntry {
  std::string field;  // "effects[2]"
  std::string id, file, name, description;
  std::vector<std::pair<std::string, double>> controls;  // page defaults, in config order
};

struct ClipEntry {
  std::string field;
  std::string id, file, name, description;
  std::string reference;  // the clip's reference (e.g. the circuit's output), relative; "" for none
};

struct Config {
  std::string title, description, paper, code;
  std::vector<std::string> credits;
  std::vector<EffectEntry> effects;
  std::vector<ClipEntry> clips;
  rapidjson::Document doc;
  std::shared_ptr<const JsonDocument> source;  // as read, for the positions in refusals
  std::string listening;  // the listening test definition, relative to the config's folder
  GridSpec grid;          // the comparison grid (site_grid.hpp), when the config has one
};

// One entry of "effects": file, id (unique, from the file name by default),
// name, description and the page defaults of its controls.
EffectEntry parse_effect(const Where& w, const rapidjson::Value& e, rapidjson::SizeType i, std::set<std::string>& ids) {
  EffectEntry fx;
  fx.field = "effects[" + std::to_string(i) + "]";
  if (!e.IsObject()) w.fail(fx.field, std::string("must be an object, got ") + type_name(e));
  only_fields(w, fx.field, e, {"file", "id", "name", "description", "controls"});
  fx.file = text_field(w, fx.field + ".file", member(e, "file"), true, 1000, 1);
  fx.name = text_field(w, fx.field + ".name", member(e, "name"), false, 200);
  fx.description = text_field(w, fx.field + ".description", member(e, "description"), false, 4000);
  if (const rapidjson::Value* v = member(e, "id")) {
    fx.id = text_field(w, fx.field + ".id", v, true, 64, 1);
    if (!id_ok(fx.id)) w.fail(fx.field + ".id", "'" + fx.id + "' may hold only letters, digits, '-' and '_'");
  } else {
    fx.id = id_from(fx.file);
  }
  if (!ids.insert(fx.id).second)
    w.fail(fx.field + ".id", "'" + fx.id + "' is used by an earlier effect; give each effect its own \"id\"");
  if (const rapidjson::Value* v = member(e, "controls")) {
    if (!v->IsObject()) w.fail(fx.field + ".controls", std::string("must be an object of name: value, got ") + type_name(*v));
    for (auto it = v->MemberBegin(); it != v->MemberEnd(); ++it) {
      const std::string name = it->name.GetString();
      if (!it->value.IsNumber())
        w.fail(fx.field + ".controls." + name, std::string("must be a number, got ") + type_name(it->value));
      fx.controls.emplace_back(name, it->value.GetDouble());
    }
  }
  return fx;
}

// "clips": each a WAV or FLAC file with a name and description; ids from the
// file names, made unique.
std::vector<ClipEntry> parse_clips(const Where& w, const rapidjson::Value& clips) {
  std::vector<ClipEntry> out;
  if (!clips.IsArray()) w.fail("clips", std::string("must be an array, got ") + type_name(clips));
  if (clips.Size() > 64) w.fail("clips", "has " + std::to_string(clips.Size()) + " entries, over the limit of 64");
  std::set<std::string> clip_ids;
  for (rapidjson::SizeType i = 0; i < clips.Size(); ++i) {
    const rapidjson::Value& e = clips[i];
    ClipEntry cl;
    cl.field = "clips[" + std::to_string(i) + "]";
    if (!e.IsObject()) w.fail(cl.field, std::string("must be an object, got ") + type_name(e));
    only_fields(w, cl.field, e, {"file", "id", "name", "description", "reference"});
    cl.file = text_field(w, cl.field + ".file", member(e, "file"), true, 1000, 1);
    cl.name = text_field(w, cl.field + ".name", member(e, "name"), false, 200);
    cl.description = text_field(w, cl.field + ".description", member(e, "description"), false, 4000);
    cl.reference = text_field(w, cl.field + ".reference", member(e, "reference"), false, 1000, 1);
    if (cl.name.empty()) cl.name = fs::path(cl.file).filename().string();
    if (const rapidjson::Value* v = member(e, "id")) {
      cl.id = text_field(w, cl.field + ".id", v, true, 64, 1);
      if (!id_ok(cl.id)) w.fail(cl.field + ".id", "'" + cl.id + "' may hold only letters, digits, '-' and '_'");
      if (!clip_ids.insert(cl.id).second)
        w.fail(cl.field + ".id", "'" + cl.id + "' is used by an earlier clip; give each clip its own \"id\"");
    } else {
      cl.id = id_from(cl.file);
      for (int k = 2; !clip_ids.insert(cl.id).second; ++k) cl.id = id_from(cl.file) + "-" + std::to_string(k);
    }
    out.push_back(std::move(cl));
  }
  return out;
}

Config parse_config(const std::string& path) {
  Where w{path, nullptr};
  const std::string text = read_text_file(path, "site config");
  Config c;
  {
    // The shared reader (dsp/core/json_reader.hpp): iterative, capped, strict.
    auto parsed = std::make_shared<JsonDocument>();
    const std::string error = json_read(path, text.data(), text.size(), *parsed);
    if (!error.empty()) throw InputError(error);
    c.doc.CopyFrom(parsed->doc, c.doc.GetAllocator());
    c.source = parsed;
    w.doc = parsed;
  }
  if (!c.doc.IsObject()) w.fail("", std::string("the config must be a JSON object, got ") + type_name(c.doc));
  const rapidjson::Value& root = c.doc;
  only_fields(w, "", root,
              {"version", "title", "description", "paper", "code", "credits", "effects", "clips", "listening", "grid"});

  if (const rapidjson::Value* v = member(root, "version")) {
    if (!v->IsNumber() || v->GetDouble() != 1)
      w.fail("version", "must be 1 (the only site config version), got " +
                            (v->IsNumber() ? format_fixed(v->GetDouble(), 3) : std::string(type_name(*v))));
  }
  c.title = text_field(w, "title", member(root, "title"), true, 200, 1);
  c.description = text_field(w, "description", member(root, "description"), false, 4000);
  c.paper = url_field(w, "paper", member(root, "paper"));
  c.code = url_field(w, "code", member(root, "code"));

  if (const rapidjson::Value* v = member(root, "credits")) {
    if (v->IsString()) {
      c.credits.push_back(text_field(w, "credits", v, true, 1000, 1));
    } else if (v->IsArray()) {
      if (v->Size() > 50) w.fail("credits", "has " + std::to_string(v->Size()) + " entries, over the limit of 50");
      for (rapidjson::SizeType i = 0; i < v->Size(); ++i)
        c.credits.push_back(text_field(w, "credits[" + std::to_string(i) + "]", &(*v)[i], true, 1000, 1));
    } else {
      w.fail("credits", std::string("must be a string or an array of strings, got ") + type_name(*v));
    }
  }

  const rapidjson::Value* effects = member(root, "effects");
  if (!effects) w.fail("effects", "missing (an array of at least one effect is required)");
  if (!effects->IsArray()) w.fail("effects", std::string("must be an array, got ") + type_name(*effects));
  if (effects->Empty()) w.fail("effects", "is empty; list at least one effect");
  if (effects->Size() > 64) w.fail("effects", "has " + std::to_string(effects->Size()) + " entries, over the limit of 64");
  std::set<std::string> ids;
  for (rapidjson::SizeType i = 0; i < effects->Size(); ++i) c.effects.push_back(parse_effect(w, (*effects)[i], i, ids));

  if (const rapidjson::Value* clips = member(root, "clips")) c.clips = parse_clips(w, *clips);

  // The listening test definition is checked once the effects and clips are
  // known (plan_listening).
  c.listening = text_field(w, "listening", member(root, "listening"), false, 1000, 1);
  // The grid's structure here; what it names is checked once the effects and
  // clips are loaded (plan_site_grid).
  if (const rapidjson::Value* g = member(root, "grid")) c.grid = parse_grid(w, *g);
  return c;
}

// ---- files -----------------------------------------------------------------

std::vector<unsigned char> read_binary(const fs::path& p, const std::string& what) {
  std::ifstream f(p, std::ios::binary);
  if (!f) throw InputError("cannot read " + what + " '" + p.string() + "': " + std::strerror(errno));
  std::vector<unsigned char> b((std::istreambuf_iterator<char>(f)), std::istreambuf_iterator<char>());
  if (f.bad()) throw InputError("cannot read " + what + " '" + p.string() + "'");
  return b;
}

// The output folder: every file written goes through here, so the marker
// file can list them for the next rebuild.
class SiteFiles {
 public:
  explicit SiteFiles(fs::path root) : root_(std::move(root)) {}
  const fs::path& root() const { return root_; }
  const std::vector<std::string>& written() const { return written_; }

  // Writes DIR/rel (through output_file.hpp).
  void write(const std::string& rel, const void* data, size_t n) {
    const fs::path p = root_ / rel;
    written_.push_back(fs::path(rel).generic_string());
    OutputFile f(p.string());
    f.write(data, n);
    f.commit();
  }

  // Copies the file `from` to DIR/rel.
  void copy(const fs::path& from, const std::string& rel, const std::string& what) {
    std::error_code ec;
    if (!fs::is_regular_file(from, ec)) throw InputError("cannot read " + what + " '" + from.string() + "': not a file");
    const fs::path to = root_ / rel;
    fs::create_directories(to.parent_path(), ec);
    if (ec) throw InputError("cannot create '" + to.parent_path().string() + "': " + ec.message());
    written_.push_back(fs::path(rel).generic_string());
    std::ifstream in(from, std::ios::binary);
    if (!in) throw InputError("cannot read " + what + " '" + from.string() + "': " + std::strerror(errno));
    OutputFile f(to.string());
    char buf[65536];
    while (in.read(buf, sizeof buf) || in.gcount() > 0) f.write(buf, size_t(in.gcount()));
    if (in.bad()) throw InputError("cannot read " + what + " '" + from.string() + "'");
    f.commit();
  }

 private:
  fs::path root_;
  std::vector<std::string> written_;  // relative to root_, in writing order
};

bool is_assets_root(const fs::path& p) {
  std::error_code ec;
  return fs::is_regular_file(p / "web" / "index.html", ec) && fs::is_regular_file(p / "worklet" / "loader.js", ec);
}

fs::path find_assets(const fs::path& config_dir) {
  std::error_code ec;
  for (fs::path p = fs::absolute(config_dir, ec);; p = p.parent_path()) {
    if (is_assets_root(p)) return p;
    if (p == p.parent_path() || p.empty()) break;
  }
  char exe[4096];
  const ssize_t n = ::readlink("/proc/self/exe", exe, sizeof exe - 1);
  if (n > 0) {
    exe[n] = 0;
    for (fs::path p = fs::path(exe).parent_path();; p = p.parent_path()) {
      if (is_assets_root(p)) return p;
      if (p == p.parent_path() || p.empty()) break;
    }
  }
  throw UsageError("cannot find the earshot source tree (a folder with web/index.html and worklet/loader.js) above '" +
                   config_dir.string() + "' or this program; pass --assets DIR");
}

std::vector<unsigned char> read_wasm(const fs::path& p, const std::string& option, const std::string& preset) {
  std::error_code ec;
  if (!fs::is_regular_file(p, ec))
    throw InputError("no WebAssembly build at '" + p.string() + "'; build it with 'cmake --preset " + preset +
                     " && cmake --build --preset " + preset + "' or pass " + option + " PATH");
  std::vector<unsigned char> b = read_binary(p, "WebAssembly build");
  if (b.size() < 8 || std::memcmp(b.data(), "\0asm", 4) != 0)
    throw InputError("'" + p.string() + "' (" + option + ") is not a WebAssembly module (no \\0asm magic)");
  return b;
}

// The output folder DIR (docs/site.md, "Rebuilding"). DIR must be new, empty,
// or an earlier site (its marker file present) and then --force is needed. It
// must not be a symlink, nor be or hold CONFIG's folder or an input. The site
// is built in a fresh folder beside DIR and swapped in by rename only when
// complete. Files the site owner added to the old site (not in its marker
// list) are carried into the new one as hard links, symlinks as symlinks,
// never followed. The old site is then removed with std::filesystem::remove_all,
// which unlinks symlinks and never follows them. Nothing outside DIR is touched.
class SiteFolder {
 public:
  SiteFolder(const fs::path& out, bool force, const std::vector<std::pair<std::string, fs::path>>& inputs)
      : shown_(out.string()) {
    std::error_code ec;
    struct stat st;
    existed_ = ::lstat(out.c_str(), &st) == 0;
    if (existed_) {
      if (S_ISLNK(st.st_mode))
        throw UsageError("--out '" + out.string() + "' is a symbolic link; give the folder itself (a rebuild never "
                         "follows links)");
      if (!S_ISDIR(st.st_mode)) throw UsageError("--out '" + out.string() + "' exists and is not a folder");
      const bool empty = fs::is_empty(out, ec);
      if (ec) throw InputError("cannot list '" + out.string() + "': " + ec.message());
      if (!empty && !fs::is_regular_file(fs::symlink_status(out / kMarker, ec)))
        throw UsageError("--out '" + out.string() +
                         "' is not empty and was not made by 'earshot site'; choose a new or empty folder");
      if (!empty && !force)
        throw UsageError("--out '" + out.string() + "' holds a site built before; pass --force to replace it");
    }
    const fs::path real = fs::weakly_canonical(fs::absolute(out, ec), ec);
    if (ec || real.filename().empty() || real == real.root_path())
      throw UsageError("--out '" + out.string() + "': cannot build a site there; name a folder");
    for (const auto& in : inputs) {
      const fs::path r = fs::weakly_canonical(fs::absolute(in.second, ec), ec);
      if (!ec && path_within(r, real))
        throw UsageError("--out '" + out.string() + "' is or holds the " + in.first + " '" + in.second.string() +
                         "'; choose a folder outside it");
    }
    out_ = real;  // the swap works on the resolved folder (so "." or "dir/" work too)
    const fs::path parent = real.parent_path();
    fs::create_directories(parent, ec);
    if (ec) throw InputError("cannot create '" + parent.string() + "': " + ec.message());
    std::string tmpl = (parent / (real.filename().string() + ".earshot-tmp-XXXXXX")).string();
    std::vector<char> buf(tmpl.begin(), tmpl.end());
    buf.push_back('\0');
    if (!::mkdtemp(buf.data()))
      throw InputError("cannot create a folder beside '" + out.string() + "' to build in: " + std::strerror(errno));
    build_ = buf.data();
    const mode_t mask = ::umask(0);  // mkdtemp makes 0700; the site gets what mkdir(0777) would give
    ::umask(mask);
    ::chmod(build_.c_str(), 0777 & ~mask);
    for (const char* sub : {"js", "worklet", "wasm", "effects", "clips", "reference", "references"}) {
      fs::create_directories(build_ / sub, ec);
      if (ec) throw InputError("cannot create '" + (build_ / sub).string() + "': " + ec.message());
    }
  }

  ~SiteFolder() {
    if (build_.empty()) return;
    std::error_code ec;
    fs::remove_all(build_, ec);
  }

  SiteFolder(const SiteFolder&) = delete;
  SiteFolder& operator=(const SiteFolder&) = delete;

  const fs::path& build() const { return build_; }

  // Swaps the built site into DIR; the old one (now in the build folder's
  // place) is removed by the destructor.
  void commit() {
    struct stat st;
    const bool there = ::lstat(out_.c_str(), &st) == 0;
    if (there != existed_ || (there && !S_ISDIR(st.st_mode)))
      throw InputError("--out '" + shown_ + "' changed while the site was built; nothing was replaced");
    if (there) carry_over();
    if (!there) {
      if (std::rename(build_.c_str(), out_.c_str()) != 0)
        throw InputError("cannot move the built site into '" + shown_ + "': " + std::strerror(errno));
      build_.clear();
      return;
    }
    if (::renameat2(AT_FDCWD, build_.c_str(), AT_FDCWD, out_.c_str(), RENAME_EXCHANGE) == 0) return;
    if (errno != EINVAL && errno != ENOSYS)
      throw InputError("cannot swap the built site into '" + shown_ + "': " + std::strerror(errno));
    // No atomic exchange on this file system: move the old site aside, then the new one in.
    std::string tmpl = build_.string() + "-old-XXXXXX";
    std::vector<char> buf(tmpl.begin(), tmpl.end());
    buf.push_back('\0');
    if (!::mkdtemp(buf.data()) || std::rename(out_.c_str(), buf.data()) != 0)
      throw InputError("cannot move the old site '" + shown_ + "' aside: " + std::strerror(errno));
    if (std::rename(build_.c_str(), out_.c_str()) != 0) {
      const int err = errno;
      std::rename(buf.data(), out_.c_str());
      throw InputError("cannot move the built site into '" + shown_ + "': " + std::strerror(err));
    }
    build_ = buf.data();
  }

 private:
  // Hard-links every file of the old site that its last build did not write
  // into the same place in the new one, unless the new build wrote that path.
  void carry_over() {
    std::set<std::string> built_before = {kMarker};
    {
      std::ifstream list(out_ / kMarker);
      std::string line;
      while (std::getline(list, line))
        if (!line.empty() && line[0] != '#') built_before.insert(line);
    }
    std::error_code ec;
    for (auto it = fs::recursive_directory_iterator(out_, ec); !ec && it != fs::recursive_directory_iterator();
         it.increment(ec)) {
      const fs::file_status st = it->symlink_status(ec);  // the entry itself, never its target
      if (ec) break;
      if (fs::is_directory(st)) continue;  // recursed into (a symlink to a folder is not)
      const fs::path rel = it->path().lexically_relative(out_);
      if (built_before.count(rel.generic_string())) continue;
      const fs::path to = build_ / rel;
      struct stat there;
      if (::lstat(to.c_str(), &there) == 0) continue;  // the new build wrote this path
      fs::create_directories(to.parent_path(), ec);
      if (ec || ::linkat(AT_FDCWD, it->path().c_str(), AT_FDCWD, to.c_str(), 0) != 0)
        throw InputError("cannot keep '" + it->path().string() + "' (a file the site builder did not write) in the "
                         "rebuilt site: " + (ec ? ec.message() : std::string(std::strerror(errno))) +
                         "; nothing was replaced");
    }
    if (ec) throw InputError("cannot list '" + shown_ + "': " + ec.message() + "; nothing was replaced");
  }

  std::string shown_;  // DIR as given, for messages
  fs::path out_, build_;
  bool existed_ = false;
};

// Copies web/ (recursively) into the site: index.html, style.css, js/, ...
size_t copy_page(const fs::path& web, SiteFiles& out) {
  size_t n = 0;
  std::error_code ec;
  for (auto it = fs::recursive_directory_iterator(web, ec); !ec && it != fs::recursive_directory_iterator();
       it.increment(ec)) {
    if (!it->is_regular_file()) continue;
    out.copy(it->path(), fs::relative(it->path(), web).generic_string(), "page file");
    ++n;
  }
  if (ec) throw InputError("cannot list '" + web.string() + "': " + ec.message());
  return n;
}

// ---- reference output ------------------------------------------------------

std::string bits_hex(float v) {
  uint32_t u;
  std::memcpy(&u, &v, 4);
  char buf[16];
  std::snprintf(buf, sizeof buf, "%08x", u);
  return buf;
}

struct Reference {
  double rate = 0;
  size_t samples = 0;
  uint64_t signal_hash = 0, output_hash = 0;
  unsigned nonfinite = 0;
  std::vector<float> out;
};

// The effect's output on the standard test signal: native scalar variant, host
// rate = model rate, controls at the file's defaults, blocks of 512 (the core
// is block-size invariant, so any partition gives these bits).
Reference reference_of(const std::vector<unsigned char>& bytes, double rate, const std::string& path) {
  Reference r;
  r.rate = rate;
  Stream s(bytes, rate, "scalar", path);
  const std::vector<float> x = test_signal(rate, kSignalSeconds);
  r.samples = x.size();
  r.signal_hash = fnv1a64(x.data(), x.size());
  r.out.resize(x.size());
  s.process(x.data(), r.out.data(), x.size(), 512);
  r.output_hash = fnv1a64(r.out.data(), r.out.size());
  r.nonfinite = earshot_nonfinite_count(s.get());
  return r;
}

using Writer = rapidjson::PrettyWriter<rapidjson::StringBuffer>;

void write_string(Writer& w, const char* key, const std::string& v) {
  w.Key(key);
  w.String(v.c_str(), rapidjson::SizeType(v.size()));
}

void write_optional(Writer& w, const char* key, const std::string& v) {
  if (!v.empty()) write_string(w, key, v);
}

// ---- the steps of `earshot site` -------------------------------------------

struct SiteOptions {
  std::string config_path;
  fs::path config_dir;
  std::string out;
  bool force = false, quiet = false;
};

SiteOptions parse_site(const Args& a) {
  if (a.positional.size() != 1)
    throw UsageError(a.positional.empty() ? "missing the site CONFIG file"
                                          : "expected one CONFIG file, got " + std::to_string(a.positional.size()) +
                                                " arguments");
  const std::string* out_opt = a.last("--out");
  if (!out_opt || out_opt->empty()) throw UsageError("missing --out DIR (where to write the site)");
  SiteOptions o;
  o.config_path = a.positional[0];
  o.config_dir = fs::path(o.config_path).parent_path().empty() ? fs::path(".") : fs::path(o.config_path).parent_path();
  o.out = *out_opt;
  o.force = a.has("--force");
  o.quiet = a.has("--quiet");
  return o;
}

// The folders every config path must resolve inside: the config's own and each
// --allow-root; checks every path the config names (site_listening.hpp, confine).
std::vector<fs::path> confine_config(const Args& a, const SiteOptions& o, const Config& cfg) {
  std::error_code root_ec;
  const fs::path root = fs::canonical(o.config_dir, root_ec);
  if (root_ec) throw InputError("cannot resolve the folder of '" + o.config_path + "': " + root_ec.message());
  std::vector<fs::path> roots = {root};
  for (const std::string& r : a.all("--allow-root")) {
    std::error_code ec;
    const fs::path p = fs::canonical(r, ec);
    if (ec || !fs::is_directory(p, ec)) throw UsageError("--allow-root '" + r + "' is not an existing folder");
    roots.push_back(p);
  }
  for (const EffectEntry& fx : cfg.effects) confine(o.config_path, fx.field + ".file", roots, o.config_dir, fx.file);
  for (const ClipEntry& cl : cfg.clips) {
    confine(o.config_path, cl.field + ".file", roots, o.config_dir, cl.file);
    if (!cl.reference.empty()) confine(o.config_path, cl.field + ".reference", roots, o.config_dir, cl.reference);
  }
  if (!cfg.listening.empty()) confine(o.config_path, "listening", roots, o.config_dir, cfg.listening);
  return roots;
}

// The page's sources: the tree holding web/ and worklet/, and the two builds.
struct PageSources {
  fs::path assets, wasm_simd_path, wasm_scalar_path;
  std::vector<unsigned char> wasm_simd, wasm_scalar;
};

PageSources page_sources(const Args& a, const fs::path& config_dir) {
  PageSources s;
  if (const std::string* p = a.last("--assets")) {
    s.assets = *p;
    if (!is_assets_root(s.assets))
      throw UsageError("--assets '" + *p + "' does not hold web/index.html and worklet/loader.js");
  } else {
    s.assets = find_assets(config_dir);
  }
  s.wasm_simd_path =
      a.last("--wasm-simd") ? fs::path(*a.last("--wasm-simd")) : s.assets / "build/wasm-simd/earshot-simd.wasm";
  s.wasm_scalar_path =
      a.last("--wasm-scalar") ? fs::path(*a.last("--wasm-scalar")) : s.assets / "build/wasm-scalar/earshot-scalar.wasm";
  s.wasm_simd = read_wasm(s.wasm_simd_path, "--wasm-simd", "wasm-simd");
  s.wasm_scalar = read_wasm(s.wasm_scalar_path, "--wasm-scalar", "wasm-scalar");
  for (const char* f : kWorkletFiles) {
    std::error_code ec;
    if (!fs::is_regular_file(s.assets / "worklet" / f, ec))
      throw InputError("missing '" + (s.assets / "worklet" / f).string() + "' in the source tree");
  }
  return s;
}

struct LoadedEffect {
  std::vector<unsigned char> bytes;
  rapidjson::Document info;
  Reference ref;
};

// The page defaults of one effect, set on a probe stream: the core refuses
// an unknown name or a value out of range, and the message says which.
void check_defaults(const Where& where, const EffectEntry& fx, Stream& probe, const rapidjson::Document& info) {
  for (const auto& c : fx.controls) {
    const int index = earshot_control_index(probe.get(), c.first.c_str());
    const std::string field = fx.field + ".controls." + c.first;
    const rapidjson::Value& list = info["effect"]["controls"];
    if (index < 0) {
      std::string names;
      for (const auto& d : list.GetArray()) names += (names.empty() ? "" : ", ") + json_string(d, "name");
      where.fail(field, "the effect '" + fx.file + "' has no control named '" + c.first + "' (" +
                            (names.empty() ? std::string("it has no controls") : "its controls: " + names) + ")");
    }
    const int st = earshot_set_control(probe.get(), index, float(c.second));
    if (st != EARSHOT_OK) {
      const rapidjson::Value& d = list[rapidjson::SizeType(index)];
      char buf[200];
      std::snprintf(buf, sizeof buf, "%.10g is refused: %s (%s takes %.10g .. %.10g)", c.second,
                    earshot_status_text(st), c.first.c_str(), json_number(d, "min"), json_number(d, "max"));
      where.fail(field, buf);
    }
  }
}

// Effects: load each through the C ABI (the loader's message names any
// fault), check the page defaults, compute the reference. All before DIR is touched.
std::vector<LoadedEffect> load_effects(Config& cfg, const fs::path& config_dir, const Where& where) {
  std::vector<LoadedEffect> loaded(cfg.effects.size());
  for (size_t i = 0; i < cfg.effects.size(); ++i) {
    EffectEntry& fx = cfg.effects[i];
    const fs::path file = (config_dir / fx.file).lexically_normal();
    LoadedEffect& L = loaded[i];
    try {
      L.bytes = read_effect_file(file.string());
    } catch (const InputError& e) {
      where.fail(fx.field + ".file", e.what());
    }
    std::unique_ptr<Stream> probe;
    try {
      probe.reset(new Stream(L.bytes, 48000, "scalar", file.string()));
    } catch (const InputError& e) {
      where.fail(fx.field + ".file", e.what());
    }
    L.info = probe->info();
    const double model_rate = json_number(L.info, "model_rate", 48000);
    check_defaults(where, fx, *probe, L.info);
    probe.reset();
    if (fx.name.empty()) fx.name = json_string(L.info, "title", fx.id);
    L.ref = reference_of(L.bytes, model_rate, file.string());
    if (L.ref.nonfinite > 0)
      std::fprintf(stderr, "earshot site: warning: %s: %u block(s) of the test signal gave non-finite output\n",
                   terminal_text(fx.file).c_str(), L.ref.nonfinite);
  }
  return loaded;
}

struct ClipInfo {
  int rate = 0, channels = 0;
  int64_t frames = 0;
  std::string ext;
  std::string reference_ext;  // "" when the clip has no reference
};

// One bundled audio file (a clip or its reference): readable, mono or stereo,
// WAV or FLAC (both the page and browsers read them).
ClipInfo check_audio(const fs::path& file, const std::string& shown, const std::string& field, const Where& where) {
  std::string ext = file.extension().string();
  for (char& ch : ext) ch = char(std::tolower((unsigned char)ch));
  if (ext != ".wav" && ext != ".flac")
    where.fail(field, "'" + shown + "': a bundled clip must be a .wav or .flac file");
  SF_INFO info{};
  SNDFILE* f = sf_open(file.string().c_str(), SFM_READ, &info);
  if (!f) where.fail(field, "cannot read audio file '" + file.string() + "': " + sf_strerror(nullptr));
  sf_close(f);
  try {
    check_declared_length(file.string(), info.format, info.channels, int64_t(info.frames));
  } catch (const InputError& e) {
    where.fail(field, e.what());
  }
  if (info.channels < 1 || info.channels > 2)
    where.fail(field, "'" + shown + "' has " + std::to_string(info.channels) + " channels; the page renders mono or stereo only");
  if (!stream_rate_ok(info.samplerate))
    where.fail(field, "'" + shown + "' has sample rate " + std::to_string(info.samplerate) + " Hz; " + stream_rates_text());
  ClipInfo ci;
  ci.rate = info.samplerate;
  ci.channels = info.channels;
  ci.frames = int64_t(info.frames);
  ci.ext = ext;
  return ci;
}

// Clips, and each clip's reference: same rate and channel count as the clip
// (the page switches between them sample-aligned).
std::vector<ClipInfo> check_clips(const Config& cfg, const fs::path& config_dir, const Where& where) {
  std::vector<ClipInfo> clip_info(cfg.clips.size());
  for (size_t i = 0; i < cfg.clips.size(); ++i) {
    const ClipEntry& cl = cfg.clips[i];
    clip_info[i] = check_audio((config_dir / cl.file).lexically_normal(), cl.file, cl.field + ".file", where);
    if (cl.reference.empty()) continue;
    const ClipInfo ref =
        check_audio((config_dir / cl.reference).lexically_normal(), cl.reference, cl.field + ".reference", where);
    if (ref.rate != clip_info[i].rate || ref.channels != clip_info[i].channels)
      where.fail(cl.field + ".reference", "'" + cl.reference + "' is " + std::to_string(ref.channels) + " channel(s) at " +
                                              std::to_string(ref.rate) + " Hz; the clip '" + cl.file + "' is " +
                                              std::to_string(clip_info[i].channels) + " at " +
                                              std::to_string(clip_info[i].rate) + " Hz (a reference must match its clip)");
    clip_info[i].reference_ext = ref.ext;
  }
  return clip_info;
}

// The comparison grid: checked against the effects and clips, every cell
// rendered natively for its hash (site_grid.hpp).
GridPlan plan_site_grid(const Config& cfg, const std::vector<LoadedEffect>& loaded,
                        const std::vector<ClipInfo>& clip_info, const fs::path& config_dir, const Where& where,
                        std::vector<GridEffect>& effects, std::vector<GridClip>& clips) {
  if (!cfg.grid.present) return GridPlan{};
  for (size_t i = 0; i < cfg.effects.size(); ++i) {
    const EffectEntry& fx = cfg.effects[i];
    GridEffect g;
    g.id = fx.id;
    g.field = fx.field;
    g.path = (config_dir / fx.file).lexically_normal().string();
    g.bytes = &loaded[i].bytes;
    for (const auto& d : loaded[i].info["effect"]["controls"].GetArray()) {
      GridEffect::Control c{json_string(d, "name"), json_number(d, "min"), json_number(d, "max"), json_number(d, "default")};
      for (const auto& p : fx.controls)
        if (p.first == c.name) c.value = p.second;
      g.controls.push_back(c);
    }
    effects.push_back(std::move(g));
  }
  for (size_t i = 0; i < cfg.clips.size(); ++i) {
    const ClipEntry& cl = cfg.clips[i];
    GridClip g;
    g.id = cl.id;
    g.field = cl.field;
    g.file = (config_dir / cl.file).lexically_normal();
    if (!cl.reference.empty()) g.reference = (config_dir / cl.reference).lexically_normal();
    g.seconds = double(clip_info[i].frames) / clip_info[i].rate;
    clips.push_back(std::move(g));
  }
  return plan_grid(cfg.grid, effects, clips, where);
}

// The listening tests: checked against the effects and clips above, every
// audio file read (site_listening.hpp).
ListeningPlan plan_site_listening(const Config& cfg, const std::vector<LoadedEffect>& loaded,
                                  const std::vector<ClipInfo>& clip_info, const fs::path& config_dir,
                                  const std::vector<fs::path>& roots, const Where& where) {
  ListeningPlan listening;
  if (cfg.listening.empty()) return listening;
  const fs::path def = (config_dir / cfg.listening).lexically_normal();
  std::error_code ec;
  if (!fs::is_regular_file(def, ec))
    where.fail("listening", "no listening test definition at '" + def.string() + "' (the path is relative to the config's folder)");
  std::vector<ListeningEffect> fx(cfg.effects.size());
  for (size_t i = 0; i < cfg.effects.size(); ++i) {
    fx[i].id = cfg.effects[i].id;
    for (const auto& d : loaded[i].info["effect"]["controls"].GetArray())
      fx[i].controls.push_back({json_string(d, "name"), json_number(d, "min"), json_number(d, "max")});
  }
  std::vector<ListeningClip> bundled(cfg.clips.size());
  for (size_t i = 0; i < cfg.clips.size(); ++i)
    bundled[i] = {(config_dir / cfg.clips[i].file).lexically_normal(), "clips/" + cfg.clips[i].id + clip_info[i].ext};
  return plan_listening(def, fx, bundled, roots);
}

// site.json's opening fields: title, credits, the builds and the test signal.
void write_site_head(Writer& w, const Config& cfg) {
  write_string(w, "format", "earshot-site");
  w.Key("version");
  w.Int(1);
  write_string(w, "generator", "earshot " EARSHOT_VERSION);
  write_string(w, "title", cfg.title);
  write_optional(w, "description", cfg.description);
  write_optional(w, "paper", cfg.paper);
  write_optional(w, "code", cfg.code);
  w.Key("credits");
  w.StartArray();
  for (const std::string& c : cfg.credits) w.String(c.c_str(), rapidjson::SizeType(c.size()));
  w.EndArray();
  w.Key("wasm");
  w.StartObject();
  write_string(w, "simd", "wasm/earshot-simd.wasm");
  write_string(w, "scalar", "wasm/earshot-scalar.wasm");
  w.EndObject();
  w.Key("test_signal");
  w.StartObject();
  write_string(w, "definition", kTestSignalSummary);
  w.Key("seconds");
  w.Double(kSignalSeconds);
  write_string(w, "hash", "fnv1a64-float32le");
  w.EndObject();
}

// One effect: its file and native reference into the site, its entry in site.json.
void write_effect(Writer& w, SiteFiles& files, const EffectEntry& fx, const LoadedEffect& L) {
  const std::string site_file = "effects/" + fx.id + ".nfx";
  const std::string ref_file = "reference/" + fx.id + ".f32";
  files.write(site_file, L.bytes.data(), L.bytes.size());
  // reference/<id>.f32: the native output, float32 little-endian (x86 and
  // every WebAssembly engine are little-endian).
  files.write(ref_file, L.ref.out.data(), L.ref.out.size() * 4);

  w.StartObject();
  write_string(w, "id", fx.id);
  write_string(w, "name", fx.name);
  write_optional(w, "description", fx.description);
  write_string(w, "file", site_file);
  w.Key("bytes");
  w.Uint64(L.bytes.size());
  write_string(w, "title", json_string(L.info, "title"));
  w.Key("model_rate");
  w.Double(L.ref.rate);
  w.Key("defaults");
  w.StartObject();
  for (const auto& c : fx.controls) {
    w.Key(c.first.c_str());
    w.Double(c.second);
  }
  w.EndObject();
  w.Key("reference");
  w.StartObject();
  write_string(w, "variant", "native scalar");
  w.Key("rate");
  w.Double(L.ref.rate);
  w.Key("seconds");
  w.Double(kSignalSeconds);
  w.Key("samples");
  w.Uint64(L.ref.samples);
  write_string(w, "signal_hash", hex64(L.ref.signal_hash));
  write_string(w, "output_hash", hex64(L.ref.output_hash));
  w.Key("nonfinite_blocks");
  w.Uint(L.ref.nonfinite);
  write_string(w, "data", ref_file);
  w.Key("excerpt");
  w.StartArray();
  for (int k = 0; k < kExcerpt && size_t(k) < L.ref.out.size(); ++k) w.Double(double(L.ref.out[size_t(k)]));
  w.EndArray();
  w.Key("excerpt_bits");
  w.StartArray();
  for (int k = 0; k < kExcerpt && size_t(k) < L.ref.out.size(); ++k) {
    const std::string b = bits_hex(L.ref.out[size_t(k)]);
    w.String(b.c_str());
  }
  w.EndArray();
  w.EndObject();
  w.EndObject();
}

// One clip: copied into the site, its entry in site.json.
void write_clip(Writer& w, SiteFiles& files, const ClipEntry& cl, const ClipInfo& ci, const fs::path& config_dir) {
  const std::string site_file = "clips/" + cl.id + ci.ext;
  files.copy((config_dir / cl.file).lexically_normal(), site_file, "clip");
  w.StartObject();
  write_string(w, "id", cl.id);
  write_string(w, "name", cl.name);
  write_optional(w, "description", cl.description);
  write_string(w, "file", site_file);
  w.Key("rate");
  w.Int(ci.rate);
  w.Key("channels");
  w.Int(ci.channels);
  w.Key("seconds");
  w.Double(double(ci.frames) / ci.rate);
  if (!cl.reference.empty()) {
    const std::string ref_file = "references/" + cl.id + ci.reference_ext;
    files.copy((config_dir / cl.reference).lexically_normal(), ref_file, "clip reference");
    write_string(w, "reference", ref_file);
  }
  w.EndObject();
}

// The listening tests: their definition and files into the site, the summary in site.json.
void write_listening(Writer& w, SiteFiles& files, const ListeningPlan& listening) {
  files.write("listening.json", listening.json.data(), listening.json.size());
  for (const auto& c : listening.copies) files.copy(c.first, c.second, "listening test file");
  w.Key("listening");
  w.StartObject();
  write_string(w, "file", "listening.json");
  write_string(w, "page", "listen.html");
  write_string(w, "title", listening.title);
  w.Key("tests");
  w.StartArray();
  for (const auto& t : listening.tests) {
    w.StartObject();
    write_string(w, "id", t.id);
    write_string(w, "type", t.type);
    write_string(w, "title", t.title);
    w.EndObject();
  }
  w.EndArray();
  w.EndObject();
}

// Everything checked: the site is written into a fresh folder beside DIR and
// swapped in at the end (SiteFolder). Returns the number of page files.
size_t write_site(const fs::path& out, const SiteOptions& o, const Config& cfg, const PageSources& src,
                  const std::vector<fs::path>& roots, const std::vector<LoadedEffect>& loaded,
                  const std::vector<ClipInfo>& clip_info, const ListeningPlan& listening, const GridPlan& grid,
                  const std::vector<GridEffect>& grid_effects, const std::vector<GridClip>& grid_clips) {
  std::vector<std::pair<std::string, fs::path>> inputs = {{"config file", o.config_path}, {"config folder", roots[0]},
                                                          {"page source", src.assets / "web"},
                                                          {"worklet source", src.assets / "worklet"}};
  inputs.emplace_back("WebAssembly build", src.wasm_simd_path);
  inputs.emplace_back("WebAssembly build", src.wasm_scalar_path);
  for (const EffectEntry& fx : cfg.effects) inputs.emplace_back("effect", o.config_dir / fx.file);
  for (const ClipEntry& cl : cfg.clips) {
    inputs.emplace_back("clip", o.config_dir / cl.file);
    if (!cl.reference.empty()) inputs.emplace_back("clip reference", o.config_dir / cl.reference);
  }
  for (const auto& c : listening.copies) inputs.emplace_back("listening test file", c.first);
  for (size_t i = 1; i < roots.size(); ++i) inputs.emplace_back("--allow-root folder", roots[i]);
  SiteFolder folder(out, o.force, inputs);
  SiteFiles files(folder.build());
  const size_t page_files = copy_page(src.assets / "web", files);
  for (const char* f : kWorkletFiles) files.copy(src.assets / "worklet" / f, std::string("worklet/") + f, "worklet file");
  files.write("wasm/earshot-simd.wasm", src.wasm_simd.data(), src.wasm_simd.size());
  files.write("wasm/earshot-scalar.wasm", src.wasm_scalar.data(), src.wasm_scalar.size());

  rapidjson::StringBuffer sb;
  Writer w(sb);
  w.SetIndent(' ', 1);
  w.StartObject();
  write_site_head(w, cfg);
  w.Key("effects");
  w.StartArray();
  for (size_t i = 0; i < cfg.effects.size(); ++i) write_effect(w, files, cfg.effects[i], loaded[i]);
  w.EndArray();
  w.Key("clips");
  w.StartArray();
  for (size_t i = 0; i < cfg.clips.size(); ++i) write_clip(w, files, cfg.clips[i], clip_info[i], o.config_dir);
  w.EndArray();
  if (!cfg.listening.empty()) write_listening(w, files, listening);
  if (cfg.grid.present) write_grid(w, grid, grid_effects, grid_clips);
  w.EndObject();

  std::string json = sb.GetString();
  json += '\n';
  files.write("site.json", json.data(), json.size());
  std::string marker = "# made by 'earshot site'; the next run removes these files and rebuilds\n";
  for (const std::string& f : files.written()) marker += f + "\n";
  files.write(kMarker, marker.data(), marker.size());
  folder.commit();
  return page_files;
}

void print_site(const fs::path& out, const Config& cfg, size_t page_files, const std::vector<LoadedEffect>& loaded,
                const ListeningPlan& listening, const GridPlan& grid) {
  std::error_code ec;
  uintmax_t total = 0;
  for (auto it = fs::recursive_directory_iterator(out, ec); !ec && it != fs::recursive_directory_iterator();
       it.increment(ec))
    if (it->is_regular_file()) total += it->file_size();
  std::printf("wrote site %s: %zu effect(s), %zu clip(s), %zu page file(s), %s kB\n", out.string().c_str(),
              cfg.effects.size(), cfg.clips.size(), page_files, format_count(int64_t(total / 1024)).c_str());
  if (!cfg.listening.empty())
    std::printf("  listening tests: %zu in listening.json (%zu file(s) copied to listening/), page listen.html\n",
                listening.tests.size(), listening.copies.size());
  if (cfg.grid.present)
    std::printf("  comparison grid: %zu clip(s) x %zu column(s), %.0f s of audio rendered for the cell hashes\n",
                grid.rows.size(), grid.spec.columns.size(), grid.rendered_seconds);
  for (size_t i = 0; i < cfg.effects.size(); ++i)
    std::printf("  %-20s %6.0f Hz  reference %s (test signal %s)\n", terminal_text(cfg.effects[i].id).c_str(),
                loaded[i].ref.rate, hex64(loaded[i].ref.output_hash).c_str(), hex64(loaded[i].ref.signal_hash).c_str());
  std::printf("serve it: tools/serve.sh %s\n", out.string().c_str());
}

}  // namespace

int cmd_site(const std::vector<std::string>& argv) {
  const Args a = parse_args(argv, {{"--help", false},
                                   {"--out", true},
                                   {"--assets", true},
                                   {"--wasm-simd", true},
                                   {"--wasm-scalar", true},
                                   {"--force", false},
                                   {"--allow-root", true},
                                   {"--quiet", false}});
  if (a.has("--help")) {
    std::fputs(kHelp, stdout);
    return kExitOk;
  }
  const SiteOptions o = parse_site(a);
  Config cfg = parse_config(o.config_path);
  const Where where{o.config_path, cfg.source};
  const std::vector<fs::path> roots = confine_config(a, o, cfg);
  const PageSources src = page_sources(a, o.config_dir);
  const std::vector<LoadedEffect> loaded = load_effects(cfg, o.config_dir, where);
  const std::vector<ClipInfo> clip_info = check_clips(cfg, o.config_dir, where);
  const ListeningPlan listening = plan_site_listening(cfg, loaded, clip_info, o.config_dir, roots, where);
  std::vector<GridEffect> grid_effects;
  std::vector<GridClip> grid_clips;
  const GridPlan grid = plan_site_grid(cfg, loaded, clip_info, o.config_dir, where, grid_effects, grid_clips);

  fs::path out = fs::path(o.out).lexically_normal();
  if (!out.has_filename() && out.has_relative_path()) out = out.parent_path();  // "dir/" names "dir"
  const size_t page_files =
      write_site(out, o, cfg, src, roots, loaded, clip_info, listening, grid, grid_effects, grid_clips);
  if (!o.quiet) print_site(out, cfg, page_files, loaded, listening, grid);
  return kExitOk;
}

}  // namespace cli
}  // namespace earshot
