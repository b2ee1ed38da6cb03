// Checking JSON documents field by field (the site config, the listening test
// definition, the results files of `tally`): every refusal names the file, where the field's value starts
// and the field, in the shape of the shared reader (dsp/core/json_reader.hpp), e.g.
// "demos/site.json: line 12, column 17: effects[1].controls.drive: must be a number, got a string".
#pragma once
#include <algorithm>
#include <cctype>
#include <cerrno>
#include <cstring>
#include <fstream>
#include <iterator>
#include <memory>
#include <string>
#include <vector>

#include "cli.hpp"  // configures rapidjson
#include "json_reader.hpp"
#include "text_out.hpp"

namespace earshot {
namespace cli {

struct Where {
  std::string file;
  // The parsed document, once there is one: refusals then carry the line and
  // column where the field's value starts (json_path_error).
  std::shared_ptr<const JsonDocument> doc;
  // Field and message may quote the document's text: escaped for the terminal
  // here (text_out.hpp), before a NUL could cut the message short.
  // true: a line break in a message is kept (the site's own messages);
  // false: escaped like any other control character (results files).
  bool keep_line_breaks = true;

  [[noreturn]] void fail(const std::string& field, const std::string& msg) const {
    const std::string f = terminal_text(field), m = keep_line_breaks ? terminal_lines(msg) : terminal_text(msg);
    if (doc) throw InputError(json_field_error(*doc, json_find_path(*doc, field), f, m));
    throw InputError(file + ": " + (f.empty() ? "" : f + ": ") + m);
  }

  // Member `key` of `obj`, the object at `path` ("" for the top level);
  // refused as "<path>.<key>: missing". The typed forms refuse another type
  // as "must be a string, not a number" and an empty string as empty.
  const rapidjson::Value& required(const rapidjson::Value& obj, const std::string& path, const char* key) const;
  std::string nonempty_string(const rapidjson::Value& obj, const std::string& path, const char* key) const;
  const rapidjson::Value& object(const rapidjson::Value& obj, const std::string& path, const char* key) const;
  const rapidjson::Value& array(const rapidjson::Value& obj, const std::string& path, const char* key) const;
};

inline const char* type_name(const rapidjson::Value& v) {
  switch (v.GetType()) {
    case rapidjson::kNullType: return "null";
    case rapidjson::kFalseType:
    case rapidjson::kTrueType: return "a boolean";
    case rapidjson::kObjectType: return "an object";
    case rapidjson::kArrayType: return "an array";
    case rapidjson::kStringType: return "a string";
    default: return "a number";
  }
}

inline std::string field_path(const std::string& path, const char* key) { return path.empty() ? key : path + "." + key; }

inline const rapidjson::Value& Where::required(const rapidjson::Value& obj, const std::string& path,
                                               const char* key) const {
  auto it = obj.FindMember(key);
  if (it == obj.MemberEnd()) fail(field_path(path, key), "missing");
  return it->value;
}

inline std::string Where::nonempty_string(const rapidjson::Value& obj, const std::string& path, const char* key) const {
  const rapidjson::Value& v = required(obj, path, key);
  if (!v.IsString()) fail(field_path(path, key), std::string("must be a string, not ") + type_name(v));
  std::string s(v.GetString(), v.GetStringLength());
  if (s.empty()) fail(field_path(path, key), "must not be empty");
  return s;
}

inline const rapidjson::Value& Where::object(const rapidjson::Value& obj, const std::string& path, const char* key) const {
  const rapidjson::Value& v = required(obj, path, key);
  if (!v.IsObject()) fail(field_path(path, key), std::string("must be an object, not ") + type_name(v));
  return v;
}

inline const rapidjson::Value& Where::array(const rapidjson::Value& obj, const std::string& path, const char* key) const {
  const rapidjson::Value& v = required(obj, path, key);
  if (!v.IsArray()) fail(field_path(path, key), std::string("must be an array, not ") + type_name(v));
  return v;
}

inline void only_fields(const Where& w, const std::string& field, const rapidjson::Value& obj,
                        const std::vector<std::string>& allowed) {
  for (auto it = obj.MemberBegin(); it != obj.MemberEnd(); ++it) {
    const std::string key = it->name.GetString();
    if (std::find(allowed.begin(), allowed.end(), key) == allowed.end()) {
      std::string list;
      for (const std::string& a : allowed) list += (list.empty() ? "" : ", ") + a;
      w.fail(field, "unknown field '" + key + "' (allowed: " + list + ")");
    }
  }
}

inline const rapidjson::Value* member(const rapidjson::Value& obj, const char* key) {
  auto it = obj.FindMember(key);
  return it == obj.MemberEnd() ? nullptr : &it->value;
}

inline size_t utf8_length(const std::string& s) {
  size_t n = 0;
  for (unsigned char c : s)
    if ((c & 0xc0) != 0x80) ++n;
  return n;
}

// A string field of at most max_chars characters (and at least min_chars);
// "" when absent and not required. Refuses another type, a NUL, a wrong length.
inline std::string text_field(const Where& w, const std::string& field, const rapidjson::Value* v, bool required,
                       size_t max_chars, size_t min_chars = 0) {
  if (!v) {
    if (required) w.fail(field, "missing (a string is required)");
    return "";
  }
  if (!v->IsString()) w.fail(field, std::string("must be a string, got ") + type_name(*v));
  const std::string s(v->GetString(), v->GetStringLength());
  if (s.find('\0') != std::string::npos) w.fail(field, "contains a NUL character");
  const size_t n = utf8_length(s);
  if (n < min_chars) w.fail(field, min_chars == 1 ? "is empty" : "is shorter than " + std::to_string(min_chars));
  if (n > max_chars)
    w.fail(field, "is " + std::to_string(n) + " characters long, over the limit of " + std::to_string(max_chars));
  return s;
}

// An id: 1 .. 64 of [A-Za-z0-9_-] (it names files in a site and page addresses).
inline bool id_ok(const std::string& id) {
  if (id.empty() || id.size() > 64) return false;
  for (unsigned char c : id)
    if (!(std::isalnum(c) || c == '-' || c == '_')) return false;
  return true;
}

// A whole text file; InputError naming `what`, the path and the OS reason.
inline std::string read_text_file(const std::string& path, const std::string& what) {
  std::ifstream f(path, std::ios::binary);
  if (!f) throw InputError("cannot read " + what + " '" + path + "': " + std::strerror(errno));
  std::string s((std::istreambuf_iterator<char>(f)), std::istreambuf_iterator<char>());
  if (f.bad()) throw InputError("cannot read " + what + " '" + path + "'");
  return s;
}

// "line L, column C" of a byte offset, for parse errors.
inline std::string position(const std::string& text, size_t offset) {
  size_t line = 1, col = 1;
  for (size_t i = 0; i < offset && i < text.size(); ++i) {
    if (text[i] == '\n') {
      ++line;
      col = 1;
    } else if ((static_cast<unsigned char>(text[i]) & 0xc0) != 0x80) {
      ++col;
    }
  }
  return "line " + std::to_string(line) + ", column " + std::to_string(col);
}

}  // namespace cli
}  // namespace earshot
