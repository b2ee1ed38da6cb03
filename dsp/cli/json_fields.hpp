// Checking JSON documents field by field (the site config, the listening test
// definition): every refusal names the file and the field, e.g.
// "demos/site.json: effects[1].controls.drive: must be a number, got a string".
#pragma once
#include <algorithm>
#include <cerrno>
#include <cstring>
#include <fstream>
#include <iterator>
#include <string>
#include <vector>

#include "cli.hpp"  // configures rapidjson

namespace earshot {
namespace cli {

struct Where {
  std::string file;
  [[noreturn]] void fail(const std::string& field, const std::string& msg) const {
    throw InputError(file + ": " + (field.empty() ? "" : field + ": ") + msg);
  }
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
