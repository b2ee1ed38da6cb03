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
        "site.json: effects[1].controls.drive (line 3, column 36): must be a number, got a string");
  CHECK(earshot::json_value_position(d, &d.doc["effects"][1]).column == 3);
}
