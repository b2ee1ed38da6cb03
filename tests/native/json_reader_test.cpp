// The shared JSON reader: limits and the one error shape (dsp/core/json_reader.hpp).
#include <catch2/catch.hpp>
#include "json_reader.hpp"

#include <string>

using earshot::JsonDocument;
using earshot::json_read;

static std::string read(const std::string& text) {
  JsonDocument d;
  return json_read("t.json", text.data(), text.size(), d);
}

TEST_CASE("json_reader: one million levels of nesting are refused, not a crash") {
  std::string deep(1000000, '[');
  CHECK(read(deep) == "t.json: line 1, column 129: nesting deeper than 128 levels");
}

TEST_CASE("json_reader: NUL and text after the value are refused") {
  CHECK(read(std::string("{}\0garbage", 10)) == "t.json: line 1, column 3: NUL byte in the text");
  CHECK(read("{} x") == "t.json: line 1, column 4: text after the end of the JSON value");
  CHECK(read("{}\n \t") == "");
}

TEST_CASE("json_reader: invalid UTF-8 (RFC 3629) is refused at its position") {
  CHECK(read("{\"a\":\n \"\xc3\xa9\xff\"}").rfind("t.json: line 2, column ", 0) == 0);
}

TEST_CASE("json_reader: duplicate keys are refused naming the key") {
  CHECK(read("{\"a\":1,\"a\":2}") == "t.json: line 1, column 11: duplicate key \"a\"");
}

TEST_CASE("json_reader: values parse") {
  JsonDocument d;
  REQUIRE(json_read("t.json", "{\"a\":[1,2]}", 11, d) == "");
  CHECK(d.doc["a"][1].GetInt() == 2);
  CHECK(d.offsets.size() == 4);
}

TEST_CASE("json_reader: field errors name the path and where the value starts") {
  JsonDocument d;
  std::string text = "{\"effects\": [\n  {},\n  {\"controls\": {\"dr\xc3\xa9\": 1, \"drive\": \"x\"}}\n]}";
  REQUIRE(json_read("site.json", text.data(), text.size(), d) == "");
  const rapidjson::Value& v = d.doc["effects"][1]["controls"]["drive"];
  CHECK(earshot::json_field_error(d, &v, "effects[1].controls.drive", "must be a number, got a string") ==
        "site.json: line 3, column 36: effects[1].controls.drive: must be a number, got a string");
  CHECK(earshot::json_value_position(d, &d.doc["effects"][1]).column == 3);
  // A path finds its value; a missing field is reported where its parent starts
  // (the "{" after `"controls": ` is character 16 of line 3);
  // a key holding '.' is matched whole.
  CHECK(earshot::json_find_path(d, "effects[1].controls.drive") == &v);
  CHECK(earshot::json_path_error(d, "effects[1].controls.tone", "missing") ==
        "site.json: line 3, column 16: effects[1].controls.tone: missing");
  CHECK(earshot::json_find_path(d, "effects[7]") == &d.doc["effects"]);
  JsonDocument k;
  std::string keyed = "{\"a.b\": {\"c\": 1}, \"a\": {\"b\": 2}}";
  REQUIRE(json_read("k.json", keyed.data(), keyed.size(), k) == "");
  CHECK(earshot::json_find_path(k, "a.b.c") == &k.doc["a.b"]["c"]);
  CHECK(earshot::json_find_path(k, "a.b") == &k.doc["a.b"]);
}
