// One JSON reader for every document earshot reads (effect description and
// safetensors header, site config, listening definition, tally results).
// Errors are values (the core is built with -fno-exceptions for WebAssembly).
//
// Limits (docs: this header is the reference):
//   - size: at most json_reader_max_bytes (16 MiB) per document;
//   - nesting: at most json_reader_max_depth (128) open arrays/objects;
//   - the stream has an explicit length: a NUL byte is an error, not an end;
//   - UTF-8 is validated (kParseValidateEncodingFlag);
//   - anything but whitespace after the top-level value is refused;
//   - a key repeated in one object is refused, naming the key.
// Every error reads "<name>: line L, column C: <message>", columns counted in
// characters (UTF-8 code points), both from 1.
#pragma once

#include <rapidjson/document.h>
#include <rapidjson/error/en.h>
#include <rapidjson/reader.h>

#include <cstddef>
#include <cstring>
#include <string>
#include <vector>

namespace earshot {

constexpr std::size_t json_reader_max_bytes = std::size_t(16) << 20;
constexpr unsigned json_reader_max_depth = 128;

struct JsonPosition {
  std::size_t line = 1, column = 1;
};

// Line and column (characters) of byte `offset` in `text`.
inline JsonPosition json_position(const char* text, std::size_t size, std::size_t offset) {
  JsonPosition p;
  if (offset > size) offset = size;
  for (std::size_t i = 0; i < offset; ++i) {
    unsigned char c = static_cast<unsigned char>(text[i]);
    if (c == '\n') {
      ++p.line;
      p.column = 1;
    } else if ((c & 0xC0) != 0x80) {
      ++p.column;
    }
  }
  return p;
}

inline std::string json_error_at(const std::string& name, const char* text, std::size_t size,
                                 std::size_t offset, const std::string& message) {
  JsonPosition p = json_position(text, size, offset);
  return name + ": line " + std::to_string(p.line) + ", column " + std::to_string(p.column) +
         ": " + message;
}

namespace json_detail {

// Stream over [begin, begin+size): Peek() past the end yields '\0', which
// RapidJSON treats as end of input; a NUL inside the text is caught before
// parsing (json_read refuses it with its position).
struct BoundedStream {
  typedef char Ch;
  const char* begin;
  const char* cur;
  const char* end;
  Ch Peek() const { return cur < end ? *cur : '\0'; }
  Ch Take() { return cur < end ? *cur++ : '\0'; }
  std::size_t Tell() const { return std::size_t(cur - begin); }
  Ch* PutBegin() { return nullptr; }
  void Put(Ch) {}
  void Flush() {}
  std::size_t PutEnd(Ch*) { return 0; }
};

// The iterative parser calls Start*/End* with the stream still on the bracket
// (checked by tests/native/json_reader_test.cpp), hence the "+ 1"s below.
// Forwards SAX events to the Document, caps depth, refuses duplicate keys and
// records the byte offset where each value ends, in event order.
struct Handler {
  rapidjson::Document& doc;
  const BoundedStream& in;
  std::vector<std::size_t>& offsets;
  unsigned depth = 0;
  std::string problem;
  std::size_t problem_offset = 0;
  std::vector<std::vector<std::string>> keys;
  std::size_t last = 0;  // stream offset where the previous event ended

  bool fail(const std::string& m) {
    problem = m;
    problem_offset = in.Tell();
    return false;
  }
  // Records where the value starts: the first byte after the previous event
  // that is not whitespace, ',' or ':'.
  void mark() {
    std::size_t i = last;
    while (in.begin + i < in.end && std::strchr(" \t\r\n,:", in.begin[i]) && in.begin[i] != 0) ++i;
    offsets.push_back(i);
    last = in.Tell();
  }
  bool Null() { mark(); return doc.Null(); }
  bool Bool(bool b) { mark(); return doc.Bool(b); }
  bool Int(int i) { mark(); return doc.Int(i); }
  bool Uint(unsigned u) { mark(); return doc.Uint(u); }
  bool Int64(int64_t i) { mark(); return doc.Int64(i); }
  bool Uint64(uint64_t u) { mark(); return doc.Uint64(u); }
  bool Double(double d) { mark(); return doc.Double(d); }
  bool RawNumber(const char* s, rapidjson::SizeType n, bool c) { mark(); return doc.RawNumber(s, n, c); }
  bool String(const char* s, rapidjson::SizeType n, bool c) { mark(); return doc.String(s, n, c); }
  bool StartObject() {
    if (++depth > json_reader_max_depth)
      return fail("nesting deeper than " + std::to_string(json_reader_max_depth) + " levels");
    mark();
    last = offsets.back() + 1;
    keys.emplace_back();
    return doc.StartObject();
  }
  bool Key(const char* s, rapidjson::SizeType n, bool c) {
    std::string k(s, n);
    for (const std::string& seen : keys.back())
      if (seen == k) return fail("duplicate key \"" + k + "\"");
    keys.back().push_back(k);
    last = in.Tell();
    return doc.Key(s, n, c);
  }
  bool EndObject(rapidjson::SizeType n) {
    --depth;
    keys.pop_back();
    last = in.Tell() + 1;
    return doc.EndObject(n);
  }
  bool StartArray() {
    if (++depth > json_reader_max_depth)
      return fail("nesting deeper than " + std::to_string(json_reader_max_depth) + " levels");
    mark();
    last = offsets.back() + 1;
    return doc.StartArray();
  }
  bool EndArray(rapidjson::SizeType n) {
    --depth;
    last = in.Tell() + 1;
    return doc.EndArray(n);
  }
};

}  // namespace json_detail

// A parsed document, the text it came from (for positions) and the offset
// where each value was seen, in pre-order (the order of json_value_offsets).
struct JsonDocument {
  rapidjson::Document doc;
  std::string name;
  std::string text;
  std::vector<std::size_t> offsets;
};

// Parses `size` bytes named `name`. Returns "" on success, else the error
// text in the one shape described above.
inline std::string json_read(const std::string& name, const char* text, std::size_t size,
                             JsonDocument& out) {
  out.name = name;
  out.offsets.clear();
  if (size > json_reader_max_bytes)
    return name + ": line 1, column 1: document is " + std::to_string(size) +
           " bytes, more than the limit of " + std::to_string(json_reader_max_bytes);
  out.text.assign(text, size);
  const void* nul = std::memchr(text, 0, size);
  if (nul)
    return json_error_at(name, text, size, std::size_t(static_cast<const char*>(nul) - text),
                         "NUL byte in the text");
  json_detail::BoundedStream in{text, text, text + size};
  json_detail::Handler h{out.doc, in, out.offsets, 0, {}, 0, {}, 0};
  rapidjson::ParseResult r;
  auto generate = [&](rapidjson::Document&) {
    rapidjson::Reader reader;
    r = reader.Parse<rapidjson::kParseIterativeFlag | rapidjson::kParseValidateEncodingFlag |
                     rapidjson::kParseStopWhenDoneFlag>(in, h);
    return !r.IsError();
  };
  out.doc.Populate(generate);
  if (!h.problem.empty()) return json_error_at(name, text, size, h.problem_offset, h.problem);
  if (r.IsError())
    return json_error_at(name, text, size, r.Offset(), rapidjson::GetParseError_En(r.Code()));
  while (in.cur < in.end && (*in.cur == ' ' || *in.cur == '\t' || *in.cur == '\n' || *in.cur == '\r'))
    ++in.cur;
  if (in.cur < in.end)
    return json_error_at(name, text, size, in.Tell(), "text after the end of the JSON value");
  return "";
}

namespace json_detail {
inline bool find_offset(const rapidjson::Value& v, const rapidjson::Value* target,
                        const std::vector<std::size_t>& offsets, std::size_t& i,
                        std::size_t& found) {
  if (&v == target) {
    found = i < offsets.size() ? offsets[i] : 0;
    return true;
  }
  ++i;
  if (v.IsObject()) {
    for (const auto& m : v.GetObject())
      if (find_offset(m.value, target, offsets, i, found)) return true;
  } else if (v.IsArray()) {
    for (const auto& e : v.GetArray())
      if (find_offset(e, target, offsets, i, found)) return true;
  }
  return false;
}
}  // namespace json_detail

// Where value `v` of `d` starts (line, column in characters). The pre-order
// walk matches the SAX event order in which offsets were recorded. Recursive,
// but depth is capped at json_reader_max_depth by json_read.
inline JsonPosition json_value_position(const JsonDocument& d, const rapidjson::Value* v) {
  std::size_t i = 0, found = 0;
  json_detail::find_offset(d.doc, v, d.offsets, i, found);
  return json_position(d.text.data(), d.text.size(), found);
}

// "<name>: line L, column C: <path>: <message>", the shape of every reader
// error above, e.g.
// "demos/site.json: line 12, column 17: effects[1].controls.drive: must be a number, got a string".
inline std::string json_field_error(const JsonDocument& d, const rapidjson::Value* v,
                                    const std::string& path, const std::string& message) {
  JsonPosition p = json_value_position(d, v);
  return d.name + ": line " + std::to_string(p.line) + ", column " + std::to_string(p.column) + ": " +
         (path.empty() ? "" : path + ": ") + message;
}

// The value a field path such as "tests[0].items[2].stimuli.ref" names in
// `d`, or the deepest value on the way when the rest is absent (a missing
// field is reported at its parent). A key holding '.' or '[' is matched
// whole: at each object the longest member name that the path continues
// with is taken.
inline const rapidjson::Value* json_find_path(const JsonDocument& d, const std::string& path) {
  const rapidjson::Value* v = &d.doc;
  std::size_t i = 0;
  while (i < path.size()) {
    if (path[i] == '[') {
      const std::size_t close = path.find(']', i);
      if (close == std::string::npos || !v->IsArray()) break;
      std::size_t k = 0;
      bool digits = close > i + 1;
      for (std::size_t j = i + 1; j < close; ++j) {
        if (path[j] < '0' || path[j] > '9' || k > 100000000) digits = false;
        else k = k * 10 + std::size_t(path[j] - '0');
      }
      if (!digits || k >= v->Size()) break;
      v = &(*v)[rapidjson::SizeType(k)];
      i = close + 1;
      continue;
    }
    if (path[i] == '.') ++i;
    if (!v->IsObject()) break;
    const rapidjson::Value* best = nullptr;
    std::size_t best_len = 0;
    for (const auto& m : v->GetObject()) {
      const std::size_t n = m.name.GetStringLength();
      if (n < best_len || path.compare(i, n, m.name.GetString(), n) != 0) continue;
      if (i + n < path.size() && path[i + n] != '.' && path[i + n] != '[') continue;
      best = &m.value;
      best_len = n;
    }
    if (!best) break;
    v = best;
    i += best_len;
  }
  return v;
}

// json_field_error at the value `path` names (see json_find_path).
inline std::string json_path_error(const JsonDocument& d, const std::string& path, const std::string& message) {
  return json_field_error(d, json_find_path(d, path), path, message);
}

}  // namespace earshot
