// `earshot tally RESULTS...`: reads the results files the listening page
// writes (format in docs/listening.md), checks that they belong to one test
// with the same stimuli, and prints the statistics:
//   mushra  per condition (all items, and per item): n, mean with a t-based
//           confidence interval, standard deviation, median, quartiles
//           (linear interpolation, Hyndman & Fan type 7), min, max — after the
//           ITU-R BS.1534-3 post-screening of assessors; per condition pair,
//           the paired score differences: mean with its t interval and the
//           Wilcoxon signed-rank test (stats.hpp);
//   abx     per condition pair (pooled and per participant): correct of N and
//           the one-tailed exact binomial p-value P(X >= correct | N, 1/2);
//   ab      per condition pair: preference counts, "no preference" counts,
//           and the two-sided exact binomial p-value with ties left out.
// Outputs: a text table on stdout, --csv FILE, --paired-csv FILE (MUSHRA),
// --svg DIR (box plots with the confidence interval of each mean, MUSHRA).
// Conditions are shown by their `name` (optional in the results), else their id.
// The statistics use libm freely: this is a native-only report.
#include <sys/stat.h>

#include <algorithm>
#include <cctype>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <exception>
#include <fstream>
#include <map>
#include <memory>
#include <new>
#include <set>
#include <sstream>
#include <string>
#include <vector>

#include "cli.hpp"  // first: it configures rapidjson
#include "json_fields.hpp"
#include "json_reader.hpp"
#include "text_out.hpp"
#include "output_file.hpp"
#include "stats.hpp"

#include <rapidjson/error/en.h>

namespace earshot {
namespace cli {
namespace {

const char* kHelp =
    "usage: earshot tally RESULTS... [options]\n"
    "\n"
    "Reads the results files (JSON, one per participant) that the listening page\n"
    "downloads, checks that they come from one test with the same stimuli, and\n"
    "prints the statistics (format and methods: docs/listening.md).\n"
    "\n"
    "  mushra  per condition, over all items and per item: n, mean and its\n"
    "          confidence interval (t distribution), standard deviation, median,\n"
    "          quartiles, range; after the ITU-R BS.1534-3 post-screening, which\n"
    "          excludes an assessor who rates the hidden reference below 90 for\n"
    "          more than 15% of the items, or the mid anchor above 90 for more than\n"
    "          15% of the items (who and why is listed); and for every pair of\n"
    "          conditions the paired differences of the scores: mean with its\n"
    "          confidence interval (t) and the Wilcoxon signed-rank test\n"
    "  abx     correct answers of N per condition pair, pooled and per participant,\n"
    "          with the one-tailed exact binomial p-value P(X >= correct)\n"
    "  ab      preference counts per condition pair, with the two-sided exact\n"
    "          binomial p-value; 'no preference' answers are counted and left out\n"
    "          of the test\n"
    "\n"
    "options:\n"
    "  --csv FILE        also write the statistics as CSV\n"
    "  --paired-csv FILE MUSHRA: also write the paired comparisons as CSV\n"
    "  --svg DIR         MUSHRA: write box plots, all.svg and one per item, into DIR\n"
    "                    (created if missing), each box with the confidence interval\n"
    "                    of its mean beside it\n"
    "  --force           replace existing --csv, --paired-csv and --svg files (never a\n"
    "                    RESULTS file)\n"
    "  --confidence C    confidence level of the intervals, 0.5 .. 0.999 (default 0.95)\n"
    "  --no-screening    keep every assessor (the screening is still reported)\n"
    "  --keep-incomplete tally participants who left items or ratings out (listed,\n"
    "                    with what they lack; refused by default)\n"
    "  -h, --help        this text\n"
    "\n"
    "exit codes: 0 success, 2 bad command line, 3 unreadable, malformed or\n"
    "            mismatched results file, or a write failure\n";

constexpr const char* kFormat = "earshot-listening-results";
constexpr int kVersion = 1;
constexpr size_t kMaxFileBytes = 64u << 20;
constexpr int kMaxMushraStimuli = 12;
constexpr size_t kMaxNameChars = 200;  // as the listening definition's condition names

// The statistics (t interval, exact binomial tests, quartiles) are in stats.hpp.
using stats::binom_half_two_sided;
using stats::binom_half_upper;
using stats::summarize;
using stats::Summary;

// ---- results files ------------------------------------------------------------

struct Condition {
  std::string id, role;  // role: reference, anchor-low, anchor-mid, test
  std::string name;      // the definition's name for people; "" when the file gives none
  std::string label;     // what the outputs show (label_conditions)
};
struct Stimulus {
  std::string item, condition, hash;
};
struct Trial {
  std::string item;
  std::vector<std::pair<std::string, double>> ratings;  // mushra: condition → score
  std::string a, b;                                      // abx, ab: condition ids presented as A and B
  char x = 0;                                            // abx: 'a' or 'b', which one X was
  char answer = 0;                                       // abx: 'a'/'b'; ab: 'a'/'b'/'n' (no preference)
};
// Answers a participant did not give: the definition (as recorded in the
// file's stimuli) asks for them, the trials lack them (docs/listening.md,
// "Incomplete participants").
struct Missing {
  std::string field;                    // where it shows, e.g. "trials[2].ratings"
  std::string item;
  std::vector<std::string> conditions;  // MUSHRA: the ratings missing; ABX/A/B: empty (no answers for the item)
  bool whole_item = false;              // no trial at all for the item
};
struct Result {
  std::string file;
  std::shared_ptr<const JsonDocument> doc;  // as read, for the positions in refusals
  std::vector<Missing> missing;
  std::string test_id, type;
  std::string participant;
  uint64_t seed = 0;
  std::vector<Condition> conditions;
  std::vector<Stimulus> stimuli;
  std::vector<Trial> trials;
  // The familiarisation step as this participant saw it (optional: files of
  // pages without it, or of tests without the step, have none).
  bool has_familiarisation = false;
  uint64_t familiarisation_seed = 0;
  std::vector<std::pair<std::string, std::vector<std::string>>> familiarisation_order;  // item → conditions as shown
};

// Refusals of a results file: "<file>: line L, column C: <field>: <what>" at
// the value `field` names (json_fields.hpp), the message escaped whole.
Where where_of(const std::string& file, std::shared_ptr<const JsonDocument> doc) {
  Where w{file, std::move(doc)};
  w.keep_line_breaks = false;
  return w;
}

// Input text inside a message: escaped for the terminal (text_out.hpp).
std::string quoted(const std::string& s) { return "'" + terminal_text(s) + "'"; }

bool valid_hash(const std::string& h) {
  const size_t colon = h.find(':');
  if (colon == std::string::npos || colon == 0 || colon + 1 == h.size()) return false;
  for (size_t i = 0; i < colon; ++i) {
    const char c = h[i];
    if (!((c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '-')) return false;
  }
  for (size_t i = colon + 1; i < h.size(); ++i) {
    const char c = h[i];
    if (!((c >= '0' && c <= '9') || (c >= 'a' && c <= 'f'))) return false;
  }
  return true;
}

std::string read_text(const std::string& path) {
  struct stat st;
  if (stat(path.c_str(), &st) != 0) throw InputError("cannot read results file '" + path + "': " + std::strerror(errno));
  if (S_ISDIR(st.st_mode)) throw InputError("'" + path + "' is a folder, not a results file");
  if (uintmax_t(st.st_size) > kMaxFileBytes)
    throw InputError("'" + path + "' is " + std::to_string(st.st_size) + " bytes; a results file is at most 64 MiB");
  std::ifstream f(path, std::ios::binary);
  if (!f) throw InputError("cannot read results file '" + path + "': " + std::strerror(errno));
  std::ostringstream ss;
  ss << f.rdbuf();
  if (f.bad()) throw InputError("cannot read results file '" + path + "'");
  return ss.str();
}

// format, version, test and participant.
void load_header(const Where& w, Result& r) {
  const rapidjson::Document& doc = w.doc->doc;
  const std::string format = w.nonempty_string(doc, "", "format");
  if (format != kFormat)
    w.fail("format", quoted(format) + " is not an earshot results file (expected " + quoted(kFormat) + ")");
  const rapidjson::Value& ver = w.required(doc, "", "version");
  if (!ver.IsInt()) w.fail("version", std::string("must be a whole number, not ") + type_name(ver));
  if (ver.GetInt() != kVersion)
    w.fail("version", std::to_string(ver.GetInt()) + " is not supported (this tally reads version " +
                              std::to_string(kVersion) + ")");

  const rapidjson::Value& test = w.object(doc, "", "test");
  r.test_id = w.nonempty_string(test, "test", "id");
  r.type = w.nonempty_string(test, "test", "type");
  if (r.type != "mushra" && r.type != "abx" && r.type != "ab")
    w.fail("test.type", quoted(r.type) + " is not a test type (mushra, abx or ab)");

  const rapidjson::Value& who = w.object(doc, "", "participant");
  r.participant = w.nonempty_string(who, "participant", "id");
  const rapidjson::Value& seed = w.required(who, "participant", "seed");
  if (!seed.IsUint64() || seed.GetUint64() > 9007199254740991ull)
    w.fail("participant.seed", "must be a whole number from 0 to 2^53 - 1");
  r.seed = seed.GetUint64();
}

// Conditions: unique ids, at most one of each special role, and a MUSHRA
// test's hidden reference.
void load_conditions(const Where& w, Result& r) {
  const rapidjson::Value& conds = w.array(w.doc->doc, "", "conditions");
  if (conds.Empty()) w.fail("conditions", "must list at least one condition");
  std::set<std::string> cond_ids;
  int n_ref = 0, n_low = 0, n_mid = 0;
  for (rapidjson::SizeType i = 0; i < conds.Size(); ++i) {
    const std::string p = "conditions[" + std::to_string(i) + "]";
    if (!conds[i].IsObject()) w.fail(p, std::string("must be an object, not ") + type_name(conds[i]));
    Condition c;
    c.id = w.nonempty_string(conds[i], p, "id");
    c.role = conds[i].HasMember("role") ? w.nonempty_string(conds[i], p, "role") : "test";
    if (conds[i].HasMember("name")) {
      c.name = w.nonempty_string(conds[i], p, "name");
      if (utf8_length(c.name) > kMaxNameChars)
        w.fail(p + ".name", "is longer than " + std::to_string(kMaxNameChars) + " characters");
    }
    if (c.role != "reference" && c.role != "anchor-low" && c.role != "anchor-mid" && c.role != "test")
      w.fail(p + ".role", quoted(c.role) + " is not a role (reference, anchor-low, anchor-mid or test)");
    if (!cond_ids.insert(c.id).second) w.fail(p + ".id", quoted(c.id) + " is listed twice");
    n_ref += c.role == "reference";
    n_low += c.role == "anchor-low";
    n_mid += c.role == "anchor-mid";
    r.conditions.push_back(c);
  }
  if (n_ref > 1 || n_low > 1 || n_mid > 1)
    w.fail("conditions", "at most one condition may have each of the roles reference, anchor-low, anchor-mid");
  if (r.type == "mushra" && n_ref != 1)
    w.fail("conditions", "a mushra test needs exactly one condition with role 'reference' (the hidden reference)");
}

// What the stimuli hold: each (item, condition) pair, and stimuli per item.
struct StimulusIndex {
  std::set<std::pair<std::string, std::string>> have;
  std::map<std::string, int> per_item;
};

// Stimuli: one per (item, condition), each of a listed condition with a hash.
StimulusIndex load_stimuli(const Where& w, Result& r) {
  std::set<std::string> cond_ids;
  for (const Condition& c : r.conditions) cond_ids.insert(c.id);
  const rapidjson::Value& stims = w.array(w.doc->doc, "", "stimuli");
  if (stims.Empty()) w.fail("stimuli", "must list at least one stimulus");
  StimulusIndex ix;
  for (rapidjson::SizeType i = 0; i < stims.Size(); ++i) {
    const std::string p = "stimuli[" + std::to_string(i) + "]";
    if (!stims[i].IsObject()) w.fail(p, std::string("must be an object, not ") + type_name(stims[i]));
    Stimulus s;
    s.item = w.nonempty_string(stims[i], p, "item");
    s.condition = w.nonempty_string(stims[i], p, "condition");
    s.hash = w.nonempty_string(stims[i], p, "hash");
    if (!cond_ids.count(s.condition))
      w.fail(p + ".condition", quoted(s.condition) + " is not one of the conditions");
    if (!valid_hash(s.hash))
      w.fail(p + ".hash", quoted(s.hash) + " is not ALGORITHM:HEX (e.g. fnv1a64-float32le:0123456789abcdef)");
    if (!ix.have.insert({s.item, s.condition}).second)
      w.fail(p, "item " + quoted(s.item) + " has condition " + quoted(s.condition) + " twice");
    ++ix.per_item[s.item];
    r.stimuli.push_back(s);
  }
  if (r.type == "mushra")
    for (const auto& kv : ix.per_item)
      if (kv.second > kMaxMushraStimuli)
        w.fail("stimuli", "item " + quoted(kv.first) + " has " + std::to_string(kv.second) +
                                  " stimuli; a MUSHRA trial has at most 12 (ITU-R BS.1534-3)");
  return ix;
}

// One MUSHRA trial's ratings (0 .. 100, one per stimulus of its item); a
// stimulus left unrated is recorded in r.missing.
void load_ratings(const Where& w, const rapidjson::Value& tv, const std::string& p, const StimulusIndex& ix,
                  Result& r, Trial& t) {
  const rapidjson::Value& ratings = w.object(tv, p, "ratings");
  std::set<std::string> seen;
  for (auto m = ratings.MemberBegin(); m != ratings.MemberEnd(); ++m) {
    const std::string cid(m->name.GetString(), m->name.GetStringLength());
    const std::string f = p + ".ratings." + cid;
    if (!seen.insert(cid).second) w.fail(f, "rated twice");
    if (!ix.have.count({t.item, cid}))
      w.fail(f, "item " + quoted(t.item) + " has no stimulus of condition " + quoted(cid));
    if (!m->value.IsNumber()) w.fail(f, std::string("must be a number, not ") + type_name(m->value));
    const double v = m->value.GetDouble();
    if (!(v >= 0 && v <= 100)) {
      char buf[40];
      std::snprintf(buf, sizeof buf, "%.10g", v);
      w.fail(f, std::string(buf) + " is outside the scale 0 .. 100");
    }
    t.ratings.push_back({cid, v});
  }
  Missing gap;
  for (const Condition& c : r.conditions)
    if (ix.have.count({t.item, c.id}) && !seen.count(c.id)) gap.conditions.push_back(c.id);
  if (!gap.conditions.empty()) {
    gap.item = t.item;
    gap.field = p + ".ratings";
    r.missing.push_back(gap);
  }
}

// One ABX or AB trial: two different conditions of its item and the answer.
void load_choice(const Where& w, const rapidjson::Value& tv, const std::string& p, const StimulusIndex& ix,
                 const std::string& type, Trial& t) {
  t.a = w.nonempty_string(tv, p, "a");
  t.b = w.nonempty_string(tv, p, "b");
  if (t.a == t.b) w.fail(p, "a and b are the same condition " + quoted(t.a));
  for (const std::string* c : {&t.a, &t.b})
    if (!ix.have.count({t.item, *c}))
      w.fail(p + (c == &t.a ? ".a" : ".b"), "item " + quoted(t.item) + " has no stimulus of condition " + quoted(*c));
  const std::string answer = w.nonempty_string(tv, p, "answer");
  if (type == "abx") {
    const std::string x = w.nonempty_string(tv, p, "x");
    if (x != "a" && x != "b") w.fail(p + ".x", quoted(x) + " must be 'a' or 'b' (which stimulus X was)");
    if (answer != "a" && answer != "b")
      w.fail(p + ".answer", quoted(answer) + " must be 'a' or 'b' (ABX is a forced choice)");
    t.x = x[0];
    t.answer = answer[0];
  } else {
    if (answer != "a" && answer != "b" && answer != "none")
      w.fail(p + ".answer", quoted(answer) + " must be 'a', 'b' or 'none'");
    t.answer = answer == "none" ? 'n' : answer[0];
  }
}

// The optional familiarisation record: {"seed": whole number, "order":
// [{"item": id, "conditions": [condition ids as shown]}, ...]}, every item of
// the stimuli once, each with exactly the conditions it has stimuli of.
void load_familiarisation(const Where& w, const StimulusIndex& ix, Result& r) {
  const rapidjson::Value* f = member(w.doc->doc, "familiarisation");
  if (!f) return;
  if (!f->IsObject()) w.fail("familiarisation", std::string("must be an object, not ") + type_name(*f));
  r.has_familiarisation = true;
  const rapidjson::Value& seed = w.required(*f, "familiarisation", "seed");
  if (!seed.IsUint64() || seed.GetUint64() > 9007199254740991ull)
    w.fail("familiarisation.seed", "must be a whole number from 0 to 2^53 - 1");
  r.familiarisation_seed = seed.GetUint64();
  const rapidjson::Value& order = w.array(*f, "familiarisation", "order");
  std::set<std::string> items_seen;
  for (rapidjson::SizeType i = 0; i < order.Size(); ++i) {
    const std::string p = "familiarisation.order[" + std::to_string(i) + "]";
    if (!order[i].IsObject()) w.fail(p, std::string("must be an object, not ") + type_name(order[i]));
    const std::string item = w.nonempty_string(order[i], p, "item");
    if (!ix.per_item.count(item)) w.fail(p + ".item", quoted(item) + " has no stimuli");
    if (!items_seen.insert(item).second) w.fail(p + ".item", quoted(item) + " is listed twice");
    const rapidjson::Value& conds = w.array(order[i], p, "conditions");
    std::vector<std::string> shown;
    std::set<std::string> seen;
    for (rapidjson::SizeType k = 0; k < conds.Size(); ++k) {
      const std::string pk = p + ".conditions[" + std::to_string(k) + "]";
      if (!conds[k].IsString()) w.fail(pk, std::string("must be a string, not ") + type_name(conds[k]));
      const std::string c(conds[k].GetString(), conds[k].GetStringLength());
      if (!ix.have.count({item, c}))
        w.fail(pk, "item " + quoted(item) + " has no stimulus of condition " + quoted(c));
      if (!seen.insert(c).second) w.fail(pk, quoted(c) + " is listed twice");
      shown.push_back(c);
    }
    if (int(shown.size()) != ix.per_item.at(item))
      w.fail(p + ".conditions", "lists " + std::to_string(shown.size()) + " of the " +
                                    std::to_string(ix.per_item.at(item)) + " stimuli of item " + quoted(item));
    r.familiarisation_order.push_back({item, shown});
  }
  for (const auto& kv : ix.per_item)
    if (!items_seen.count(kv.first)) w.fail("familiarisation.order", "does not list item " + quoted(kv.first));
}

void load_trials(const Where& w, const StimulusIndex& ix, Result& r) {
  const rapidjson::Value& trials = w.array(w.doc->doc, "", "trials");
  if (trials.Empty()) w.fail("trials", "holds no answers");
  std::set<std::string> rated_items;
  for (rapidjson::SizeType i = 0; i < trials.Size(); ++i) {
    const std::string p = "trials[" + std::to_string(i) + "]";
    const rapidjson::Value& tv = trials[i];
    if (!tv.IsObject()) w.fail(p, std::string("must be an object, not ") + type_name(tv));
    Trial t;
    t.item = w.nonempty_string(tv, p, "item");
    if (!ix.per_item.count(t.item)) w.fail(p + ".item", quoted(t.item) + " has no stimuli");
    if (r.type == "mushra") {
      if (!rated_items.insert(t.item).second)
        w.fail(p + ".item", quoted(t.item) + " was already rated in an earlier trial");
      load_ratings(w, tv, p, ix, r, t);
    } else {
      load_choice(w, tv, p, ix, r.type, t);
    }
    r.trials.push_back(t);
  }
}

// Items of the stimuli without any trial, in the stimuli's order, into r.missing.
void find_unanswered_items(Result& r) {
  std::set<std::string> answered;
  for (const Trial& t : r.trials) answered.insert(t.item);
  std::map<std::string, size_t> gap_of;
  for (const Stimulus& st : r.stimuli) {
    if (answered.count(st.item)) continue;
    if (!gap_of.count(st.item)) {
      gap_of[st.item] = r.missing.size();
      Missing gap;
      gap.item = st.item;
      gap.whole_item = true;
      gap.field = "trials";
      r.missing.push_back(gap);
    }
    if (r.type == "mushra") r.missing[gap_of[st.item]].conditions.push_back(st.condition);
  }
}

Result load(const std::string& path) {
  const std::string text = read_text(path);
  // The shared reader (dsp/core/json_reader.hpp): iterative, depth and size
  // capped, NUL and trailing text refused, UTF-8 validated.
  auto parsed = std::make_shared<JsonDocument>();
  const std::string error = json_read(path, text.data(), text.size(), *parsed);
  if (!error.empty()) throw InputError(error);
  const Where w = where_of(path, parsed);
  if (!parsed->doc.IsObject()) w.fail("(top level)", std::string("must be a JSON object, not ") + type_name(parsed->doc));
  Result r;
  r.file = path;
  r.doc = parsed;
  load_header(w, r);
  load_conditions(w, r);
  const StimulusIndex ix = load_stimuli(w, r);
  load_familiarisation(w, ix, r);
  load_trials(w, ix, r);
  find_unanswered_items(r);
  return r;
}

// Every file must describe the same test with the same stimuli as the first.
void check_consistent(const std::vector<Result>& rs) {
  const Result& f = rs[0];
  std::map<std::string, std::string> participants;
  std::vector<const Result*> named_by;  // per condition: the first file that names it
  for (const Condition& c : f.conditions) named_by.push_back(c.name.empty() ? nullptr : &f);
  for (const Result& r : rs) {
    auto it = participants.find(r.participant);
    if (it != participants.end())
      where_of(r.file, r.doc).fail("participant.id", quoted(r.participant) + " also appears in " + it->second +
                                         " (the same participant twice: remove one file)");
    participants[r.participant] = r.file;
    if (&r == &f) continue;
    if (r.test_id != f.test_id)
      where_of(r.file, r.doc).fail("test.id", quoted(r.test_id) + " differs from " + quoted(f.test_id) + " in " + f.file +
                                  " (results of different tests)");
    if (r.type != f.type)
      where_of(r.file, r.doc).fail("test.type", quoted(r.type) + " differs from " + quoted(f.type) + " in " + f.file);
    if (r.conditions.size() != f.conditions.size())
      where_of(r.file, r.doc).fail("conditions", std::to_string(r.conditions.size()) + " conditions, but " + f.file + " has " +
                                     std::to_string(f.conditions.size()));
    for (size_t i = 0; i < f.conditions.size(); ++i) {
      const std::string p = "conditions[" + std::to_string(i) + "]";
      if (r.conditions[i].id != f.conditions[i].id)
        where_of(r.file, r.doc).fail(p + ".id", quoted(r.conditions[i].id) + " differs from " + quoted(f.conditions[i].id) + " in " +
                                    f.file);
      if (r.conditions[i].role != f.conditions[i].role)
        where_of(r.file, r.doc).fail(p + ".role", quoted(r.conditions[i].role) + " differs from " + quoted(f.conditions[i].role) +
                                      " in " + f.file);
      // A name may be absent (files of older pages) but never different.
      if (!r.conditions[i].name.empty()) {
        const Result* o = named_by[i];
        if (!o)
          named_by[i] = &r;
        else if (o->conditions[i].name != r.conditions[i].name)
          where_of(r.file, r.doc).fail(p + ".name", quoted(r.conditions[i].name) + " differs from " +
                                                      quoted(o->conditions[i].name) + " in " + o->file);
      }
    }
    std::map<std::pair<std::string, std::string>, const Stimulus*> first;
    for (const Stimulus& s : f.stimuli) first[{s.item, s.condition}] = &s;
    std::set<std::pair<std::string, std::string>> seen;
    for (size_t i = 0; i < r.stimuli.size(); ++i) {
      const Stimulus& s = r.stimuli[i];
      const std::string p = "stimuli[" + std::to_string(i) + "]";
      auto it2 = first.find({s.item, s.condition});
      if (it2 == first.end())
        where_of(r.file, r.doc).fail(p, "item " + quoted(s.item) + ", condition " + quoted(s.condition) + " is not in " + f.file);
      if (it2->second->hash != s.hash)
        where_of(r.file, r.doc).fail(p + ".hash", "item " + quoted(s.item) + ", condition " + quoted(s.condition) + " has hash " +
                                      s.hash + " but " + f.file + " has " + it2->second->hash +
                                      " (the participants heard different audio)");
      seen.insert({s.item, s.condition});
    }
    for (const Stimulus& s : f.stimuli)
      if (!seen.count({s.item, s.condition}))
        where_of(r.file, r.doc).fail("stimuli", "item " + quoted(s.item) + ", condition " + quoted(s.condition) + " of " + f.file +
                                    " is missing");
  }
}

// What the outputs call each condition (in rs[0].conditions[i].label): its
// name from any file that gives one (check_consistent made sure they agree),
// else its id; a label two conditions would share gets the id added, so no
// label stands for two conditions.
void label_conditions(std::vector<Result>& rs) {
  std::vector<Condition>& conds = rs[0].conditions;
  for (size_t i = 0; i < conds.size(); ++i) {
    for (const Result& r : rs)
      if (!r.conditions[i].name.empty()) {
        conds[i].name = r.conditions[i].name;
        break;
      }
    conds[i].label = conds[i].name.empty() ? conds[i].id : conds[i].name;
  }
  std::map<std::string, int> uses;
  for (const Condition& c : conds) ++uses[c.label];
  for (Condition& c : conds)
    if (uses[c.label] > 1 && !c.name.empty()) c.label = c.name + " (" + c.id + ")";
}

// The label of condition `id` (conditions of rs[0], labelled).
const std::string& label_of(const std::vector<Condition>& conds, const std::string& id) {
  for (const Condition& c : conds)
    if (c.id == id) return c.label;
  return id;
}

// ---- incomplete participants ------------------------------------------------------

// How many ratings (MUSHRA) or items without answers (ABX, A/B) `r` lacks.
size_t missing_count(const Result& r) {
  size_t n = 0;
  for (const Missing& m : r.missing) n += r.type == "mushra" ? m.conditions.size() : 1;
  return n;
}

std::string quoted_list(const std::vector<std::string>& v) {
  std::string o;
  for (const std::string& x : v) o += (o.empty() ? "" : ", ") + quoted(x);
  return o;
}

// One gap in words, e.g. "no rating for condition 'gru', which item 'keys' has".
std::string missing_text(const Result& r, const Missing& m) {
  if (r.type != "mushra") return "no answers for item " + quoted(m.item);
  const std::string n = std::to_string(m.conditions.size());
  if (m.whole_item)
    return "no trial for item " + quoted(m.item) + " (" + n + (m.conditions.size() == 1 ? " rating" : " ratings") +
           " missing: " + quoted_list(m.conditions) + ")";
  return std::string("no rating for ") + (m.conditions.size() == 1 ? "condition " : "conditions ") +
         quoted_list(m.conditions) + ", which item " + quoted(m.item) + " has";
}

// docs/listening.md, "Incomplete participants": refused unless
// --keep-incomplete. Every gap is named with its file, position, participant
// and item.
// At most kMaxGapsListed gaps are listed: each position costs a walk over the
// file's values, and a 64 MiB file may hold millions of gaps.
constexpr size_t kMaxGapsListed = 20;
void refuse_incomplete(const std::vector<Result>& rs) {
  std::string list;
  size_t n = 0, gaps = 0;
  for (const Result& r : rs) {
    if (r.missing.empty()) continue;
    ++n;
    for (const Missing& m : r.missing)
      if (++gaps <= kMaxGapsListed)
        list += "\n  " + json_path_error(*r.doc, m.field, "participant " + quoted(r.participant) + " has " + missing_text(r, m));
  }
  if (gaps > kMaxGapsListed) list += "\n  ... and " + std::to_string(gaps - kMaxGapsListed) + " more";
  if (n > 0)
    throw InputError(std::to_string(n) + (n == 1 ? " participant is" : " participants are") +
                     " incomplete (--keep-incomplete tallies what they answered):" + list);
}

// With --keep-incomplete: who is incomplete and what they lack, before the statistics.
void report_incomplete(const std::vector<Result>& rs) {
  bool any = false;
  for (const Result& r : rs) any = any || !r.missing.empty();
  if (!any) return;
  const char* unit = rs[0].type == "mushra" ? " rating" : " item";
  std::printf("incomplete participants (kept: --keep-incomplete)\n");
  for (const Result& r : rs) {
    if (r.missing.empty()) continue;
    const size_t k = missing_count(r);
    std::printf("  %s (%s): %zu%s%s missing\n", terminal_text(r.participant).c_str(), terminal_text(r.file).c_str(),
                k, unit, k == 1 ? "" : "s");
    for (const Missing& m : r.missing) std::printf("    %s\n", missing_text(r, m).c_str());
  }
  std::printf("\n");
}

// ---- output helpers ----------------------------------------------------------------

// " (familiarisation order recorded in K)" when any file records it (the field is optional).
std::string familiarisation_note(const std::vector<Result>& rs) {
  size_t k = 0;
  for (const Result& r : rs) k += r.has_familiarisation;
  return k == 0 ? "" : " (familiarisation order recorded in " + std::to_string(k) + ")";
}

// A fixed-point figure for the tables, or "-" where there is none (NaN).
std::string fixed_or_dash(double v, int decimals) { return std::isnan(v) ? "-" : format_fixed(v, decimals); }

std::string csv_num(double v) {
  if (std::isnan(v)) return "";
  char buf[40];
  std::snprintf(buf, sizeof buf, "%.12g", v);
  return buf;
}

std::string p_text(double p) {
  char buf[32];
  if (p < 0.0001)
    std::snprintf(buf, sizeof buf, "%.2e", p);
  else
    std::snprintf(buf, sizeof buf, "%.4f", p);
  return buf;
}

std::string svg_num(double v) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.3f", v);
  return buf;
}

// `s` padded with spaces to `width` characters (UTF-8 aware; longer text is kept whole).
std::string pad(const std::string& s, size_t width) {
  const size_t n = utf8_length(s);
  return n >= width ? s : s + std::string(width - n, ' ');
}

// Width of the condition column: at least `min`, as wide as the longest label as printed.
size_t label_width(const std::vector<Condition>& conds, size_t min) {
  size_t w = min;
  for (const Condition& c : conds) w = std::max(w, utf8_length(terminal_text(c.label)));
  return w;
}

std::string safe_name(const std::string& s) {
  std::string o;
  for (char c : s) o += (std::isalnum((unsigned char)c) || c == '-' || c == '_' || c == '.') ? c : '_';
  return o;
}

// The run's output files (output_file.hpp): each is checked against the
// overwrite policy and the results files, written to its temporary file, and
// committed by cmd_tally only when every output is ready.
struct Outputs {
  bool force = false;
  std::vector<std::pair<std::string, std::string>> inputs;  // ("RESULTS", path)
  std::vector<std::unique_ptr<OutputFile>> pending;
};
Outputs& outputs() {
  static Outputs o;
  return o;
}

void write_file(const std::string& path, const std::string& text) {
  Outputs& o = outputs();
  refuse_same_file("output", path, o.inputs);
  check_overwrite(path, o.force);
  o.pending.emplace_back(new OutputFile(path));
  o.pending.back()->write(text);
}

// ---- MUSHRA ----------------------------------------------------------------------------

struct Screening {
  bool excluded = false;
  std::vector<std::string> reasons;
};

// ITU-R BS.1534-3 post-screening (§4.1.2, as quoted in docs/listening.md):
// exclude an assessor who rates the hidden reference below 90 for more than
// 15 % of the items, or the mid anchor above 90 for more than 15 % of the items.
Screening screen(const Result& r, const std::string& ref_id, const std::string& mid_id) {
  Screening s;
  const size_t items = r.trials.size();
  std::vector<std::string> ref_low, mid_high;
  for (const Trial& t : r.trials)
    for (const auto& kv : t.ratings) {
      if (kv.first == ref_id && kv.second < 90) ref_low.push_back(t.item + " " + fixed_or_dash(kv.second, 0));
      if (!mid_id.empty() && kv.first == mid_id && kv.second > 90) mid_high.push_back(t.item + " " + fixed_or_dash(kv.second, 0));
    }
  auto judge = [&](const std::vector<std::string>& hits, const std::string& what) {
    const double share = double(hits.size()) / double(items);
    if (hits.size() * 100 > items * 15) {  // more than 15 %, in exact integers
      s.excluded = true;
      std::string list;
      for (const std::string& h : hits) list += (list.empty() ? "" : ", ") + h;
      s.reasons.push_back(what + " in " + std::to_string(hits.size()) + " of " + std::to_string(items) + " items (" +
                          format_fixed(100 * share, 0) + "% > 15%): " + list);
    }
  };
  judge(ref_low, "hidden reference rated below 90");
  judge(mid_high, "mid anchor rated above 90");
  return s;
}

// The first `max` characters of `s` (UTF-8), with "…" when cut.
std::string shortened(const std::string& s, size_t max) {
  if (utf8_length(s) <= max) return s;
  size_t chars = 0, i = 0;
  for (; i < s.size(); ++i)
    if ((static_cast<unsigned char>(s[i]) & 0xc0) != 0x80 && chars++ == max - 1) break;
  return s.substr(0, i) + "\xE2\x80\xA6";
}

std::string box_plot_svg(const std::string& title, const std::vector<Condition>& conds,
                         const std::vector<Summary>& sums, const std::vector<size_t>& missing, double confidence) {
  const double left = 110, top = 50, plot_h = 400, slot = 90, box_w = 44;
  const double width = std::max(left + slot * double(conds.size()) + 30, 560.0), height = top + plot_h + 96;
  auto y = [&](double v) { return top + plot_h * (1 - v / 100); };
  std::ostringstream o;
  o << "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"" << svg_num(width) << "\" height=\"" << svg_num(height)
    << "\" viewBox=\"0 0 " << svg_num(width) << " " << svg_num(height) << "\" font-family=\"sans-serif\""
    << " font-size=\"12\">\n";
  o << "<title>" << xml_text(title) << "</title>\n";
  o << "<rect x=\"0\" y=\"0\" width=\"" << svg_num(width) << "\" height=\"" << svg_num(height)
    << "\" fill=\"#ffffff\"/>\n";
  o << "<text x=\"" << svg_num(left) << "\" y=\"24\" font-size=\"15\" fill=\"#1b1b1b\">" << xml_text(title)
    << "</text>\n";
  // The five labelled bands of the BS.1534 scale, lightly shaded in turn.
  static const char* bands[] = {"Bad", "Poor", "Fair", "Good", "Excellent"};
  for (int b = 0; b < 5; ++b) {
    const double y0 = y(20.0 * (b + 1)), y1 = y(20.0 * b);
    o << "<rect class=\"band\" x=\"" << svg_num(left) << "\" y=\"" << svg_num(y0) << "\" width=\""
      << svg_num(slot * double(conds.size())) << "\" height=\"" << svg_num(y1 - y0) << "\" fill=\""
      << (b % 2 ? "#f2f4f3" : "#fafbfa") << "\"/>\n";
    o << "<text x=\"8\" y=\"" << svg_num((y0 + y1) / 2 + 4) << "\" fill=\"#5a5f5c\">" << bands[b] << "</text>\n";
  }
  for (int v = 0; v <= 100; v += 20) {
    o << "<line x1=\"" << svg_num(left - 5) << "\" y1=\"" << svg_num(y(v)) << "\" x2=\""
      << svg_num(left + slot * double(conds.size())) << "\" y2=\"" << svg_num(y(v))
      << "\" stroke=\"#c9cecb\" stroke-width=\"1\"/>\n";
    o << "<text x=\"" << svg_num(left - 9) << "\" y=\"" << svg_num(y(v) + 4) << "\" text-anchor=\"end\""
      << " fill=\"#5a5f5c\">" << v << "</text>\n";
  }
  for (size_t i = 0; i < conds.size(); ++i) {
    const Summary& s = sums[i];
    const double cx = left + slot * (double(i) + 0.5);
    // The condition's label, cut to fit its slot; the whole label in a <title> when cut.
    const std::string shown = shortened(conds[i].label, 11);  // about the 90 px of a slot at 12 px
    o << "<text class=\"condition\" x=\"" << svg_num(cx) << "\" y=\"" << svg_num(top + plot_h + 20)
      << "\" text-anchor=\"middle\" fill=\"#1b1b1b\">";
    if (shown != conds[i].label) o << "<title>" << xml_text(conds[i].label) << "</title>";
    o << xml_text(shown) << "</text>\n";
    o << "<text x=\"" << svg_num(cx) << "\" y=\"" << svg_num(top + plot_h + 36) << "\" text-anchor=\"middle\""
      << " fill=\"#5a5f5c\">n = " << s.n << "</text>\n";
    if (s.n == 0) continue;
    o << "<g class=\"box\" data-condition=\"" << xml_text(conds[i].id) << "\" data-name=\"" << xml_text(conds[i].label)
      << "\" data-n=\"" << s.n
      << "\" data-missing=\"" << missing[i]
      << "\" data-q1=\"" << csv_num(s.q1) << "\" data-median=\"" << csv_num(s.median) << "\" data-q3=\""
      << csv_num(s.q3) << "\" data-whisker-low=\"" << csv_num(s.whisker_lo) << "\" data-whisker-high=\""
      << csv_num(s.whisker_hi) << "\" data-mean=\"" << csv_num(s.mean) << "\">\n";
    o << "  <line class=\"whisker\" x1=\"" << svg_num(cx) << "\" y1=\"" << svg_num(y(s.whisker_hi)) << "\" x2=\""
      << svg_num(cx) << "\" y2=\"" << svg_num(y(s.whisker_lo)) << "\" stroke=\"#2d3a34\" stroke-width=\"1.2\"/>\n";
    for (double w : {s.whisker_lo, s.whisker_hi})
      o << "  <line x1=\"" << svg_num(cx - box_w / 4) << "\" y1=\"" << svg_num(y(w)) << "\" x2=\""
        << svg_num(cx + box_w / 4) << "\" y2=\"" << svg_num(y(w)) << "\" stroke=\"#2d3a34\" stroke-width=\"1.2\"/>\n";
    o << "  <rect class=\"iqr\" x=\"" << svg_num(cx - box_w / 2) << "\" y=\"" << svg_num(y(s.q3)) << "\" width=\""
      << svg_num(box_w) << "\" height=\"" << svg_num(y(s.q1) - y(s.q3))
      << "\" fill=\"#9cc7b4\" stroke=\"#2d3a34\" stroke-width=\"1.2\"/>\n";
    o << "  <line class=\"median\" x1=\"" << svg_num(cx - box_w / 2) << "\" y1=\"" << svg_num(y(s.median))
      << "\" x2=\"" << svg_num(cx + box_w / 2) << "\" y2=\"" << svg_num(y(s.median))
      << "\" stroke=\"#10201a\" stroke-width=\"2.4\"/>\n";
    const double my = y(s.mean);
    o << "  <path class=\"mean\" d=\"M" << svg_num(cx) << " " << svg_num(my - 5) << " L" << svg_num(cx + 5) << " "
      << svg_num(my) << " L" << svg_num(cx) << " " << svg_num(my + 5) << " L" << svg_num(cx - 5) << " "
      << svg_num(my) << " Z\" fill=\"#ffffff\" stroke=\"#10201a\" stroke-width=\"1.2\"/>\n";
    for (double v : s.outliers)
      o << "  <circle class=\"outlier\" cx=\"" << svg_num(cx) << "\" cy=\"" << svg_num(y(v))
        << "\" r=\"3\" fill=\"none\" stroke=\"#2d3a34\"/>\n";
    if (!std::isnan(s.ci_lo)) {
      // The confidence interval of the mean, a capped bar beside the box; drawn
      // within the 0 .. 100 scale (the data attributes keep the exact figures).
      const double cix = cx + box_w / 2 + 10, lo = y(std::max(0.0, s.ci_lo)), hi = y(std::min(100.0, s.ci_hi));
      o << "  <g class=\"ci\" data-ci-low=\"" << csv_num(s.ci_lo) << "\" data-ci-high=\"" << csv_num(s.ci_hi)
        << "\" data-confidence=\"" << csv_num(confidence) << "\" stroke=\"#8a3b12\" stroke-width=\"2\">\n";
      o << "    <line class=\"ci-bar\" x1=\"" << svg_num(cix) << "\" y1=\"" << svg_num(hi) << "\" x2=\"" << svg_num(cix)
        << "\" y2=\"" << svg_num(lo) << "\"/>\n";
      for (double cy : {hi, lo})
        o << "    <line x1=\"" << svg_num(cix - 4) << "\" y1=\"" << svg_num(cy) << "\" x2=\"" << svg_num(cix + 4)
          << "\" y2=\"" << svg_num(cy) << "\"/>\n";
      o << "  </g>\n";
    }
    o << "</g>\n";
  }
  o << "<text x=\"" << svg_num(left) << "\" y=\"" << svg_num(height - 28) << "\" fill=\"#5a5f5c\" font-size=\"11\">"
    << "box: quartiles, line: median, diamond: mean, whiskers: furthest data within 1.5 IQR</text>\n";
  // Legend of the interval bar, with a sample of the mark itself.
  const double ly = height - 12;
  o << "<g class=\"legend-ci\" stroke=\"#8a3b12\" stroke-width=\"2\"><line x1=\"" << svg_num(left + 4) << "\" y1=\""
    << svg_num(ly - 9) << "\" x2=\"" << svg_num(left + 4) << "\" y2=\"" << svg_num(ly + 1) << "\"/><line x1=\""
    << svg_num(left) << "\" y1=\"" << svg_num(ly - 9) << "\" x2=\"" << svg_num(left + 8) << "\" y2=\"" << svg_num(ly - 9)
    << "\"/><line x1=\"" << svg_num(left) << "\" y1=\"" << svg_num(ly + 1) << "\" x2=\"" << svg_num(left + 8)
    << "\" y2=\"" << svg_num(ly + 1) << "\"/></g>\n";
  o << "<text class=\"legend-ci\" x=\"" << svg_num(left + 16) << "\" y=\"" << svg_num(ly) << "\" fill=\"#5a5f5c\""
    << " font-size=\"11\">bar beside the box: " << format_fixed(100 * confidence, 0)
    << "% confidence interval of the mean (Student's t)</text>\n";
  o << "</svg>\n";
  return o.str();
}

// The post-screening report (ITU-R BS.1534-3); returns the assessors kept
// (every one with --no-screening).
std::vector<const Result*> screen_assessors(const std::vector<Result>& rs, const std::string& ref_id,
                                            const std::string& mid_id, bool screening) {
  std::vector<const Result*> kept;
  std::printf("post-screening (ITU-R BS.1534-3): hidden reference %s, mid anchor %s%s\n", quoted(ref_id).c_str(),
              mid_id.empty() ? "(none declared: that criterion is not applied)" : quoted(mid_id).c_str(),
              screening ? "" : "; --no-screening: every assessor is kept");
  int n_excluded = 0;
  for (const Result& r : rs) {
    const Screening s = screen(r, ref_id, mid_id);
    if (s.excluded) {
      ++n_excluded;
      std::printf("  %s %s (%s, seed %llu):\n", screening ? "excluded" : "would exclude",
                  terminal_text(r.participant).c_str(), terminal_text(r.file).c_str(), (unsigned long long)r.seed);
      for (const std::string& why : s.reasons) std::printf("    %s\n", terminal_text(why).c_str());
    }
    if (!s.excluded || !screening) kept.push_back(&r);
  }
  if (n_excluded == 0) std::printf("  no assessor excluded\n");
  std::printf("  %zu of %zu assessors kept\n\n", kept.size(), rs.size());
  return kept;
}

struct MushraRow {
  std::string scope;  // "all" or an item
  std::vector<Summary> sums;
  std::vector<size_t> missing;  // per condition: ratings kept incomplete assessors lack
};

// The items in the order of the first file's stimuli.
std::vector<std::string> item_order(const Result& r) {
  std::vector<std::string> items;
  std::set<std::string> seen;
  for (const Stimulus& s : r.stimuli)
    if (seen.insert(s.item).second) items.push_back(s.item);
  return items;
}

// One row for all items, then one per item in the order of the first file's stimuli.
std::vector<MushraRow> mushra_rows(const std::vector<Result>& rs, const std::vector<const Result*>& kept,
                                   double confidence) {
  const std::vector<Condition>& conds = rs[0].conditions;
  const std::vector<std::string> items = item_order(rs[0]);
  // Ratings kept assessors lack, by (item, condition); item "" is the total.
  // (Item ids are never empty: Where::nonempty_string refuses empty strings.)
  std::map<std::pair<std::string, std::string>, size_t> gaps;
  for (const Result* r : kept)
    for (const Missing& m : r->missing)
      for (const std::string& c : m.conditions) {
        ++gaps[{m.item, c}];
        ++gaps[{std::string(), c}];
      }
  std::vector<MushraRow> rows;
  auto gather = [&](const std::string* item) {
    MushraRow row;
    row.scope = item ? *item : "all";
    for (const Condition& c : conds) {
      std::vector<double> v;
      for (const Result* r : kept)
        for (const Trial& t : r->trials)
          if (!item || t.item == *item)
            for (const auto& kv : t.ratings)
              if (kv.first == c.id) v.push_back(kv.second);
      row.sums.push_back(summarize(v, confidence));
      auto g = gaps.find({item ? *item : std::string(), c.id});
      row.missing.push_back(g == gaps.end() ? 0 : g->second);
    }
    rows.push_back(row);
  };
  gather(nullptr);
  for (const std::string& it : items) gather(&it);
  return rows;
}

void print_mushra_rows(const std::vector<MushraRow>& rows, const std::vector<Condition>& conds, double confidence) {
  const std::string ci_head = format_fixed(100 * confidence, 0) + "% CI (t)";
  const size_t width = label_width(conds, 16);
  for (const MushraRow& row : rows) {
    std::printf("%s\n", row.scope == "all" ? "all items" : ("item " + terminal_text(row.scope)).c_str());
    std::printf("  %s %-10s %5s %7s %17s %6s %7s %16s %12s\n", pad("condition", width).c_str(), "role", "n", "mean",
                ci_head.c_str(), "sd", "median", "IQR (Q1 .. Q3)", "range");
    for (size_t i = 0; i < conds.size(); ++i) {
      const Summary& s = row.sums[i];
      if (s.n == 0 && row.missing[i] == 0) continue;
      const std::string ci = std::isnan(s.ci_lo) ? "-" : fixed_or_dash(s.ci_lo, 1) + " .. " + fixed_or_dash(s.ci_hi, 1);
      const std::string iqr = fixed_or_dash(s.q1, 1) + " .. " + fixed_or_dash(s.q3, 1);
      const std::string range = fixed_or_dash(s.min, 0) + " .. " + fixed_or_dash(s.max, 0);
      std::printf("  %s %-10s %5zu %7s %17s %6s %7s %16s %12s\n", pad(terminal_text(conds[i].label), width).c_str(), conds[i].role.c_str(), s.n,
                  fixed_or_dash(s.mean, 1).c_str(), ci.c_str(), fixed_or_dash(s.sd, 1).c_str(), fixed_or_dash(s.median, 1).c_str(), iqr.c_str(),
                  range.c_str());
    }
    std::string gaps;
    for (size_t i = 0; i < conds.size(); ++i)
      if (row.missing[i] > 0) gaps += (gaps.empty() ? "" : ", ") + terminal_text(conds[i].label) + " " + std::to_string(row.missing[i]);
    if (!gaps.empty()) std::printf("  ratings missing (incomplete assessors kept): %s\n", gaps.c_str());
    std::printf("\n");
  }
}

std::string mushra_csv(const std::vector<MushraRow>& rows, const std::vector<Condition>& conds, double confidence) {
  // `name` (the condition's label) is the last column: readers of the earlier columns are unaffected.
  std::string o = "scope,condition,role,n,mean,sd,ci_low,ci_high,confidence,median,q1,q3,min,max,missing,name\n";
  for (const MushraRow& row : rows)
    for (size_t i = 0; i < conds.size(); ++i) {
      const Summary& s = row.sums[i];
      if (s.n == 0 && row.missing[i] == 0) continue;
      o += csv_cell(row.scope) + "," + csv_cell(conds[i].id) + "," + conds[i].role + "," + std::to_string(s.n) +
           "," + csv_num(s.mean) + "," + csv_num(s.sd) + "," + csv_num(s.ci_lo) + "," + csv_num(s.ci_hi) + "," +
           csv_num(confidence) + "," + csv_num(s.median) + "," + csv_num(s.q1) + "," + csv_num(s.q3) + "," +
           csv_num(s.min) + "," + csv_num(s.max) + "," + std::to_string(row.missing[i]) + "," + csv_cell(conds[i].label) +
           "\n";
    }
  return o;
}

// ---- MUSHRA paired comparisons ------------------------------------------------------
//
// For every pair of conditions (a before b in declared order) and every scope
// (all items, then each item): the differences d = score(a) − score(b) over
// the trials of the kept assessors that rated both — one per assessor and item
// (per item: one per assessor) — their mean with the t-based confidence
// interval (stats::summarize), and the Wilcoxon signed-rank test
// (stats::signed_rank: zero differences dropped, exact or normal as stated there).

struct PairedRow {
  std::string scope;  // "all" or an item
  size_t a = 0, b = 0;  // condition indices, a < b
  Summary diff;
  stats::SignedRank test;
};

// Every trial rates at most 12 stimuli (load_stimuli), so the pairs are
// gathered trial by trial — at most 66 per trial — whatever the number of
// conditions a file declares.
std::vector<PairedRow> paired_rows(const std::vector<Result>& rs, const std::vector<const Result*>& kept,
                                   const std::vector<std::string>& items, double confidence) {
  const std::vector<Condition>& conds = rs[0].conditions;
  std::map<std::string, size_t> index;
  for (size_t i = 0; i < conds.size(); ++i) index[conds[i].id] = i;
  using Key = std::pair<size_t, size_t>;
  std::map<Key, std::vector<double>> all;
  std::map<std::string, std::map<Key, std::vector<double>>> per_item;
  for (const Result* r : kept)
    for (const Trial& t : r->trials) {
      std::vector<std::pair<size_t, double>> v;  // (condition index, score), in declared order
      for (const auto& kv : t.ratings) {
        auto it = index.find(kv.first);
        if (it != index.end()) v.push_back({it->second, kv.second});
      }
      std::sort(v.begin(), v.end());
      std::map<Key, std::vector<double>>& mine = per_item[t.item];
      for (size_t i = 0; i < v.size(); ++i)
        for (size_t j = i + 1; j < v.size(); ++j) {
          const double d = v[i].second - v[j].second;
          all[{v[i].first, v[j].first}].push_back(d);
          mine[{v[i].first, v[j].first}].push_back(d);
        }
    }
  std::vector<PairedRow> rows;
  auto emit = [&](const std::string& scope, std::map<Key, std::vector<double>>& pairs) {
    for (auto& kv : pairs) {
      PairedRow row;
      row.scope = scope;
      row.a = kv.first.first;
      row.b = kv.first.second;
      row.test = stats::signed_rank(kv.second);
      row.diff = summarize(std::move(kv.second), confidence);
      rows.push_back(std::move(row));
    }
  };
  emit("all", all);
  for (const std::string& it : items) {
    auto p = per_item.find(it);
    if (p != per_item.end()) emit(it, p->second);
  }
  return rows;
}

std::string method_name(const stats::SignedRank& w) {
  if (w.used == 0) return "none";
  return w.exact ? "exact" : "normal";
}

void print_paired_rows(const std::vector<PairedRow>& rows, const std::vector<Condition>& conds, double confidence) {
  if (rows.empty()) return;
  const std::string ci_head = format_fixed(100 * confidence, 0) + "% CI (t)";
  std::printf("paired comparisons: first minus second, over the trials that rated both (all items: one\n"
              "difference per assessor and item; per item: per assessor)\n"
              "Wilcoxon signed-rank test, two-sided: zero differences are dropped (n0) before ranking;\n"
              "'exact': the exact null distribution (no zeros, no ties, at most %zu differences);\n"
              "'normal': normal approximation with tie and continuity corrections\n\n",
              stats::kSignedRankExactMax);
  size_t width = 20;
  for (const PairedRow& r : rows)
    width = std::max(width, utf8_length(terminal_text(conds[r.a].label) + " - " + terminal_text(conds[r.b].label)));
  std::string scope;
  for (const PairedRow& r : rows) {
    if (&r == &rows[0] || r.scope != scope) {
      if (&r != &rows[0]) std::printf("\n");
      scope = r.scope;
      std::printf("%s\n", r.scope == "all" ? "all items" : ("item " + terminal_text(r.scope)).c_str());
      std::printf("  %s %5s %9s %19s %4s %8s %8s %9s %s\n", pad("pair", width).c_str(), "n", "mean diff",
                  ci_head.c_str(), "n0", "W+", "W-", "p", "method");
    }
    const Summary& s = r.diff;
    const stats::SignedRank& w = r.test;
    const std::string pair = terminal_text(conds[r.a].label) + " - " + terminal_text(conds[r.b].label);
    const std::string ci = std::isnan(s.ci_lo) ? "-" : fixed_or_dash(s.ci_lo, 1) + " .. " + fixed_or_dash(s.ci_hi, 1);
    std::printf("  %s %5zu %9s %19s %4zu %8s %8s %9s %s\n", pad(pair, width).c_str(), s.n, fixed_or_dash(s.mean, 1).c_str(),
                ci.c_str(), w.zeros, fixed_or_dash(w.w_plus, 1).c_str(), fixed_or_dash(w.w_minus, 1).c_str(),
                std::isnan(w.p) ? "-" : p_text(w.p).c_str(), method_name(w).c_str());
  }
  std::printf("\n");
}

std::string paired_csv(const std::vector<PairedRow>& rows, const std::vector<Condition>& conds, double confidence) {
  std::string o =
      "scope,condition_a,condition_b,name_a,name_b,n,zeros,mean_diff,sd_diff,ci_low,ci_high,confidence,median_diff,"
      "w_plus,w_minus,statistic,z,p_two_sided,method\n";
  for (const PairedRow& r : rows) {
    const Summary& s = r.diff;
    const stats::SignedRank& w = r.test;
    o += csv_cell(r.scope) + "," + csv_cell(conds[r.a].id) + "," + csv_cell(conds[r.b].id) + "," +
         csv_cell(conds[r.a].label) + "," + csv_cell(conds[r.b].label) + "," + std::to_string(s.n) + "," +
         std::to_string(w.zeros) + "," + csv_num(s.mean) + "," + csv_num(s.sd) + "," + csv_num(s.ci_lo) + "," +
         csv_num(s.ci_hi) + "," + csv_num(confidence) + "," + csv_num(s.median) + "," + csv_num(w.w_plus) + "," +
         csv_num(w.w_minus) + "," + csv_num(w.statistic) + "," + csv_num(w.z) + "," + csv_num(w.p) + "," +
         method_name(w) + "\n";
  }
  return o;
}

// One box plot per row: DIR/all.svg and DIR/item-<id>.svg.
void write_mushra_svgs(const std::string& dir, const std::vector<MushraRow>& rows, const std::vector<Result>& rs,
                       const std::vector<const Result*>& kept, double confidence) {
  std::set<std::string> names;
  for (const MushraRow& row : rows) {
    std::string name = row.scope == "all" ? "all" : "item-" + safe_name(row.scope);
    while (!names.insert(name).second) name += "_";
    size_t gaps = 0, incomplete = 0;
    for (size_t g : row.missing) gaps += g;
    for (const Result* r : kept)
      for (const Missing& m : r->missing)
        if (row.scope == "all" || m.item == row.scope) {
          ++incomplete;
          break;
        }
    std::string title = "MUSHRA " + rs[0].test_id + ": " + (row.scope == "all" ? "all items" : "item " + row.scope) +
                        " (" + std::to_string(kept.size()) + " assessors";
    if (incomplete > 0)
      title += ", " + std::to_string(incomplete) + " incomplete: " + std::to_string(gaps) +
               (gaps == 1 ? " rating" : " ratings") + " missing";
    write_file(dir + "/" + name + ".svg", box_plot_svg(title + ")", rs[0].conditions, row.sums, row.missing, confidence));
  }
}

int tally_mushra(const std::vector<Result>& rs, const Args& a, double confidence) {
  const std::vector<Condition>& conds = rs[0].conditions;
  std::string ref_id, mid_id;
  for (const Condition& c : conds) {
    if (c.role == "reference") ref_id = c.id;
    if (c.role == "anchor-mid") mid_id = c.id;
  }
  std::printf("MUSHRA test '%s': %zu results files%s\n\n", terminal_text(rs[0].test_id).c_str(), rs.size(),
              familiarisation_note(rs).c_str());
  report_incomplete(rs);
  const std::vector<const Result*> kept = screen_assessors(rs, ref_id, mid_id, !a.has("--no-screening"));
  const std::vector<MushraRow> rows = mushra_rows(rs, kept, confidence);
  print_mushra_rows(rows, conds, confidence);
  const std::vector<PairedRow> pairs = paired_rows(rs, kept, item_order(rs[0]), confidence);
  print_paired_rows(pairs, conds, confidence);
  if (kept.empty()) std::printf("no assessor is left after the post-screening: there are no statistics\n");
  if (const std::string* csv = a.last("--csv")) write_file(*csv, mushra_csv(rows, conds, confidence));
  if (const std::string* csv = a.last("--paired-csv")) write_file(*csv, paired_csv(pairs, conds, confidence));
  if (const std::string* dir = a.last("--svg")) write_mushra_svgs(*dir, rows, rs, kept, confidence);
  return kExitOk;
}

// ---- ABX and A/B -----------------------------------------------------------------------

// Pairs of conditions, unordered, keyed in the conditions' declared order.
std::pair<std::string, std::string> pair_key(const std::vector<Condition>& conds, const std::string& a,
                                             const std::string& b) {
  size_t ia = 0, ib = 0;
  for (size_t i = 0; i < conds.size(); ++i) {
    if (conds[i].id == a) ia = i;
    if (conds[i].id == b) ib = i;
  }
  return ia < ib ? std::make_pair(a, b) : std::make_pair(b, a);
}

int tally_abx(const std::vector<Result>& rs, const Args& a) {
  const std::vector<Condition>& conds = rs[0].conditions;
  struct Count {
    long correct = 0, trials = 0;
  };
  std::map<std::pair<std::string, std::string>, Count> pooled;
  std::map<std::pair<std::string, std::string>, std::vector<std::pair<const Result*, Count>>> per;
  std::vector<std::pair<std::string, std::string>> order;
  for (const Result& r : rs) {
    std::map<std::pair<std::string, std::string>, Count> mine;
    for (const Trial& t : r.trials) {
      const auto k = pair_key(conds, t.a, t.b);
      if (!pooled.count(k)) order.push_back(k);
      Count& c = pooled[k];
      ++c.trials;
      ++mine[k].trials;
      if (t.answer == t.x) {
        ++c.correct;
        ++mine[k].correct;
      }
    }
    for (const auto& kv : mine) per[kv.first].push_back({&r, kv.second});
  }
  std::printf("ABX test '%s': %zu results files%s\n", terminal_text(rs[0].test_id).c_str(), rs.size(),
              familiarisation_note(rs).c_str());
  report_incomplete(rs);
  std::printf("p: one-tailed exact binomial test, P(X >= correct) with X ~ Binomial(trials, 1/2)\n\n");
  std::printf("  %-34s %-22s %8s %7s %9s\n", "pair", "participant", "correct", "trials", "p");
  // missing_items: items without answers, of that participant or, pooled, of all (--keep-incomplete).
  size_t all_missing = 0;
  for (const Result& r : rs) all_missing += missing_count(r);
  // name_a, name_b (the pair's labels) come last: readers of the earlier columns are unaffected.
  std::string csv = "pair_a,pair_b,participant,seed,correct,trials,p_one_tailed,missing_items,name_a,name_b\n";
  for (const auto& k : order) {
    const Count& c = pooled[k];
    const std::string names = "," + csv_cell(label_of(conds, k.first)) + "," + csv_cell(label_of(conds, k.second)) + "\n";
    const std::string pair = terminal_text(label_of(conds, k.first)) + " vs " + terminal_text(label_of(conds, k.second));
    const double p = binom_half_upper(c.correct, c.trials);
    std::printf("  %-34s %-22s %8ld %7ld %9s\n", pair.c_str(), "(all)", c.correct, c.trials, p_text(p).c_str());
    csv += csv_cell(k.first) + "," + csv_cell(k.second) + ",," + "," + std::to_string(c.correct) + "," +
           std::to_string(c.trials) + "," + csv_num(p) + "," + std::to_string(all_missing) + names;
    for (const auto& pr : per[k]) {
      const double pp = binom_half_upper(pr.second.correct, pr.second.trials);
      std::printf("  %-34s %-22s %8ld %7ld %9s\n", "", terminal_text(pr.first->participant).c_str(), pr.second.correct,
                  pr.second.trials, p_text(pp).c_str());
      csv += csv_cell(k.first) + "," + csv_cell(k.second) + "," + csv_cell(pr.first->participant) + "," +
             std::to_string(pr.first->seed) + "," + std::to_string(pr.second.correct) + "," +
             std::to_string(pr.second.trials) + "," + csv_num(pp) + "," + std::to_string(missing_count(*pr.first)) +
             names;
    }
  }
  if (const std::string* f = a.last("--csv")) write_file(*f, csv);
  return kExitOk;
}

int tally_ab(const std::vector<Result>& rs, const Args& a) {
  const std::vector<Condition>& conds = rs[0].conditions;
  struct Count {
    long first = 0, second = 0, none = 0;
  };
  std::map<std::pair<std::string, std::string>, Count> counts;
  std::vector<std::pair<std::string, std::string>> order;
  for (const Result& r : rs)
    for (const Trial& t : r.trials) {
      const auto k = pair_key(conds, t.a, t.b);
      if (!counts.count(k)) order.push_back(k);
      Count& c = counts[k];
      if (t.answer == 'n') {
        ++c.none;
        continue;
      }
      const std::string& chosen = t.answer == 'a' ? t.a : t.b;
      if (chosen == k.first)
        ++c.first;
      else
        ++c.second;
    }
  std::printf("A/B preference test '%s': %zu results files%s\n", terminal_text(rs[0].test_id).c_str(), rs.size(),
              familiarisation_note(rs).c_str());
  report_incomplete(rs);
  std::printf("p: two-sided exact binomial test of the preferences against 1/2; 'no preference'\n"
              "answers are counted but left out of the test\n\n");
  std::printf("  %-34s %10s %10s %8s %9s\n", "pair (first vs second)", "prefer 1st", "prefer 2nd", "no pref",
              "p");
  // missing_items: items without answers over all participants (--keep-incomplete).
  size_t all_missing = 0;
  for (const Result& r : rs) all_missing += missing_count(r);
  // name_a, name_b (the pair's labels) come last: readers of the earlier columns are unaffected.
  std::string csv = "pair_a,pair_b,prefer_a,prefer_b,no_preference,p_two_sided,missing_items,name_a,name_b\n";
  for (const auto& k : order) {
    const Count& c = counts[k];
    const double p = binom_half_two_sided(c.first, c.first + c.second);
    const std::string pair = terminal_text(label_of(conds, k.first)) + " vs " + terminal_text(label_of(conds, k.second));
    std::printf("  %-34s %10ld %10ld %8ld %9s\n", pair.c_str(), c.first, c.second, c.none, p_text(p).c_str());
    csv += csv_cell(k.first) + "," + csv_cell(k.second) + "," + std::to_string(c.first) + "," +
           std::to_string(c.second) + "," + std::to_string(c.none) + "," + csv_num(p) + "," +
           std::to_string(all_missing) + "," + csv_cell(label_of(conds, k.first)) + "," +
           csv_cell(label_of(conds, k.second)) + "\n";
  }
  if (const std::string* f = a.last("--csv")) write_file(*f, csv);
  return kExitOk;
}

}  // namespace

int cmd_tally(const std::vector<std::string>& argv) {
  const Args a = parse_args(argv, {{"--help", false},
                                   {"--csv", true},
                                   {"--paired-csv", true},
                                   {"--svg", true},
                                   {"--confidence", true},
                                   {"--no-screening", false},
                                   {"--keep-incomplete", false},
                                   {"--force", false}});
  if (a.has("--help")) {
    std::fputs(kHelp, stdout);
    return kExitOk;
  }
  if (a.positional.empty()) throw UsageError("give at least one RESULTS file");
  double confidence = 0.95;
  if (const std::string* c = a.last("--confidence")) confidence = parse_number("--confidence", *c, 0.5, 0.999);
  std::vector<Result> rs;
  for (const std::string& p : a.positional) rs.push_back(load(p));
  check_consistent(rs);
  label_conditions(rs);
  if (!a.has("--keep-incomplete")) refuse_incomplete(rs);
  if (rs[0].type != "mushra") {
    if (a.has("--svg")) throw UsageError("--svg draws MUSHRA box plots; these are " + rs[0].type + " results");
    if (a.has("--paired-csv"))
      throw UsageError("--paired-csv compares MUSHRA scores; these are " + rs[0].type + " results");
    if (a.has("--no-screening")) throw UsageError("--no-screening applies to MUSHRA results only");
  }
  if (const std::string* dir = a.last("--svg")) {
    struct stat st;
    if (stat(dir->c_str(), &st) == 0) {
      if (!S_ISDIR(st.st_mode)) throw UsageError("--svg '" + *dir + "' exists and is not a folder");
    } else if (mkdir(dir->c_str(), 0777) != 0) {
      throw InputError("cannot create folder '" + *dir + "': " + std::strerror(errno));
    }
  }
  Outputs& o = outputs();
  struct Discard {  // an output not committed is removed, whatever ends the run
    ~Discard() { outputs() = Outputs(); }
  } discard;
  o.force = a.has("--force");
  for (const std::string& p : a.positional) o.inputs.emplace_back("RESULTS", p);
  const int rc = rs[0].type == "mushra" ? tally_mushra(rs, a, confidence)
                 : rs[0].type == "abx"  ? tally_abx(rs, a)
                                        : tally_ab(rs, a);
  for (auto& f : o.pending) f->commit();
  return rc;
}

}  // namespace cli
}  // namespace earshot
