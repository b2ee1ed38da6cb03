// Proves the loader accepts the worked example of dsp/FORMAT.md and rejects every
// malformed file of the rejection list with a message naming the fault.
#include <catch2/catch.hpp>
#include <cmath>
#include <limits>

#include "cases.hpp"
#include "stream_util.hpp"

using namespace testfx;

namespace {

std::string create_error(const std::vector<unsigned char>& bytes) {
  char err[1024] = {0};
  earshot_stream* s = earshot_create(bytes.data(), bytes.size(), 48000, nullptr, err, sizeof err);
  if (s) {
    earshot_destroy(s);
    return "";
  }
  return err;
}

std::vector<unsigned char> with_header(const std::string& header, const std::vector<unsigned char>& data) {
  std::vector<unsigned char> out(8);
  const uint64_t n = header.size();
  for (int i = 0; i < 8; ++i) out[size_t(i)] = uint8_t(n >> (8 * i));
  out.insert(out.end(), header.begin(), header.end());
  out.insert(out.end(), data.begin(), data.end());
  return out;
}

Effect gain_example() {
  Builder b(1);
  b.input_skip = true;
  b.title = "half";
  linear(b, 1, 1, false);
  Effect fx = b.build();
  fx.tensors.begin()->second.values = {0.5f};
  return fx;
}

const char* kMeta =
    "{\"__metadata__\":{\"earshot.effect\":\"{\\\"format\\\":\\\"earshot-effect\\\",\\\"version\\\":1,"
    "\\\"sample_rate\\\":48000,\\\"controls\\\":[],\\\"credits\\\":{\\\"title\\\":\\\"half\\\"},"
    "\\\"graph\\\":{\\\"inputs\\\":[\\\"audio\\\"],\\\"layers\\\":[{\\\"type\\\":\\\"linear\\\",\\\"name\\\":\\\"g\\\","
    "\\\"in\\\":1,\\\"out\\\":1,\\\"bias\\\":false}],\\\"input_skip\\\":true}}\"}";

}  // namespace

TEST_CASE("the worked example of FORMAT.md loads and computes y = 1.5 x") {
  // Byte for byte as written in dsp/FORMAT.md.
  const std::string header = std::string(kMeta) + ",\"g.weight\":{\"dtype\":\"F32\",\"shape\":[1,1],\"data_offsets\":[0,4]}}";
  const auto bytes = with_header(header, {0x00, 0x00, 0x00, 0x3f});
  std::string err;
  auto s = open(bytes, "", 48000, &err);
  INFO(err);
  REQUIRE(s);
  const std::vector<float> x = test_signal(1000);
  const std::vector<float> y = run(s.get(), x, fixed(100));
  for (size_t i = 0; i < x.size(); ++i) REQUIRE(y[i] == 0.5f * x[i] + x[i]);
  // F16 weights are converted at load: 0x3800 is 0.5 in IEEE 754 binary16.
  const std::string h16 = std::string(kMeta) + ",\"g.weight\":{\"dtype\":\"F16\",\"shape\":[1,1],\"data_offsets\":[0,2]}}";
  auto s16 = open(with_header(h16, {0x00, 0x38}), "", 48000, &err);
  INFO(err);
  REQUIRE(s16);
  const std::vector<float> y16 = run(s16.get(), x, fixed(100));
  CHECK(identical(y, y16));
}

TEST_CASE("the loader rejects each malformed file with a specific message") {
  const Effect good = gain_example();
  const auto ok = good.bytes();
  REQUIRE(create_error(ok).empty());
  const std::string tensor = ",\"linear0.weight\":{\"dtype\":\"F32\",\"shape\":[1,1],\"data_offsets\":[0,4]}}";
  const std::vector<unsigned char> data{0, 0, 0, 0x3f};
  auto meta_of = [&](const std::string& desc) {
    rapidjson::StringBuffer sb;
    rapidjson::Writer<rapidjson::StringBuffer> w(sb);
    w.String(desc);
    return std::string("{\"__metadata__\":{\"earshot.effect\":") + sb.GetString() + "}";
  };
  const std::string meta = meta_of(good.description);

  struct Row {
    const char* what;
    std::vector<unsigned char> bytes;
    const char* expect;  // substring of the message
  };
  std::vector<Row> rows;
  rows.push_back({"truncated before the header length", {1, 2, 3}, "truncated"});
  rows.push_back({"truncated inside the data", std::vector<unsigned char>(ok.begin(), ok.end() - 2), "outside the data section"});
  {
    auto b = ok;
    b[0] = 0xff;
    b[1] = 0x00;
    b[2] = 0x10;  // ~1 MiB header length in a small file
    rows.push_back({"header length beyond the file", b, "runs past the end of the file"});
  }
  {
    auto b = ok;
    b[7] = 0x01;
    rows.push_back({"header length over the limit", b, "exceeds the 16 MiB limit"});
  }
  rows.push_back({"offsets outside the data",
                  with_header(meta + ",\"linear0.weight\":{\"dtype\":\"F32\",\"shape\":[1,1],\"data_offsets\":[4,8]}}", data),
                  "outside the data section"});
  {
    Builder b(3);
    linear(b, 1, 2);
    linear(b, 2, 1, false);
    Effect fx = b.build();
    const std::string m2 = meta_of(fx.description);
    // linear0.bias [2] at [0,8) overlaps linear0.weight [2,1] at [4,12).
    const std::string h = m2 + ",\"linear0.bias\":{\"dtype\":\"F32\",\"shape\":[2],\"data_offsets\":[0,8]}" +
                          ",\"linear0.weight\":{\"dtype\":\"F32\",\"shape\":[2,1],\"data_offsets\":[4,12]}" +
                          ",\"linear1.weight\":{\"dtype\":\"F32\",\"shape\":[1,2],\"data_offsets\":[12,20]}}";
    rows.push_back({"overlapping offsets", with_header(h, std::vector<unsigned char>(20, 0)), "overlaps"});
  }
  rows.push_back({"unknown dtype",
                  with_header(meta + ",\"linear0.weight\":{\"dtype\":\"I8\",\"shape\":[1,1],\"data_offsets\":[0,1]}}", data),
                  "unknown dtype 'I8'"});
  rows.push_back({"shape not matching the graph",
                  with_header(meta + ",\"linear0.weight\":{\"dtype\":\"F32\",\"shape\":[1],\"data_offsets\":[0,4]}}", data),
                  "does not match the graph"});
  rows.push_back({"offsets not matching the shape",
                  with_header(meta + ",\"linear0.weight\":{\"dtype\":\"F32\",\"shape\":[1,1],\"data_offsets\":[0,2]}}", data),
                  "needs 4"});
  rows.push_back({"missing tensor", with_header(meta + "}", {}), "tensor 'linear0.weight' is missing"});
  rows.push_back({"extra tensor",
                  with_header(meta + tensor.substr(0, tensor.size() - 1) +
                                  ",\"stray\":{\"dtype\":\"F32\",\"shape\":[1],\"data_offsets\":[4,8]}}",
                              {0, 0, 0, 0x3f, 0, 0, 0, 0}),
                  "tensor 'stray' is not used"});
  {
    const float nan = std::numeric_limits<float>::quiet_NaN();
    uint32_t u;
    std::memcpy(&u, &nan, 4);
    rows.push_back({"non-finite weight",
                    with_header(meta + tensor, {uint8_t(u), uint8_t(u >> 8), uint8_t(u >> 16), uint8_t(u >> 24)}),
                    "is not finite"});
    rows.push_back({"F16 infinity",
                    with_header(meta + ",\"linear0.weight\":{\"dtype\":\"F16\",\"shape\":[1,1],\"data_offsets\":[0,2]}}",
                                {0x00, 0x7c}),
                    "is not finite"});
  }
  rows.push_back({"dimension over the limit",
                  with_header(meta + ",\"linear0.weight\":{\"dtype\":\"F32\",\"shape\":[1,70000],\"data_offsets\":[0,4]}}", data),
                  "each dimension must be an integer from 1 to 65536"});
  auto replaced = [&](const std::string& from, const std::string& to) {
    std::string d = good.description;
    const size_t at = d.find(from);
    REQUIRE(at != std::string::npos);
    d.replace(at, from.size(), to);
    return with_header(meta_of(d) + tensor, data);
  };
  rows.push_back({"unknown layer type", replaced("\"type\":\"linear\"", "\"type\":\"transformer\""),
                  "unknown layer type 'transformer'"});
  rows.push_back({"format version too new", replaced("\"version\":1", "\"version\":2"), "format version 2 is too new"});
  rows.push_back({"channel count mismatch", replaced("\"in\":1", "\"in\":2"), "previous stage gives 1"});
  rows.push_back({"sample rate out of range", replaced("\"sample_rate\":48000", "\"sample_rate\":100"), "'sample_rate'"});
  rows.push_back({"invalid JSON header", with_header("{\"__metadata__\": {", {}), "effect file header: line 1, column "});
  rows.push_back({"invalid JSON description", with_header("{\"__metadata__\":{\"earshot.effect\":\"{not json\"}}", {}),
                  "effect description: line 1, column "});
  rows.push_back({"no effect description", with_header(std::string("{\"__metadata__\":{}}") , {}), "not an earshot effect file"});
  {
    std::string d = good.description;
    d.replace(d.find("\"controls\":[]"), 13,
              "\"controls\":[{\"name\":\"x\",\"min\":1,\"max\":0,\"default\":0.5}]");
    rows.push_back({"control with min above max", with_header(meta_of(d) + tensor, data), "control 'x': 'min' must be below 'max'"});
  }

  for (const Row& r : rows) {
    CAPTURE(r.what);
    const std::string e = create_error(r.bytes);
    CAPTURE(e);
    CHECK(e.find(r.expect) != std::string::npos);
  }
}

TEST_CASE("bad stream arguments are refused with a message") {
  const auto ok = gain_example().bytes();
  char err[256];
  CHECK(earshot_create(ok.data(), ok.size(), 1000, nullptr, err, sizeof err) == nullptr);
  CHECK(std::string(err).find("host sample rate") != std::string::npos);
  CHECK(earshot_create(ok.data(), ok.size(), 48000, "avx9000", err, sizeof err) == nullptr);
  CHECK(std::string(err).find("unknown variant 'avx9000'") != std::string::npos);
  CHECK(earshot_create(nullptr, 0, 48000, nullptr, err, sizeof err) == nullptr);
  CHECK(std::string(err).find("no data") != std::string::npos);
  // A tiny error buffer is still NUL-terminated.
  char small[4] = {'x', 'x', 'x', 'x'};
  CHECK(earshot_create(nullptr, 0, 48000, nullptr, small, sizeof small) == nullptr);
  CHECK(small[3] == 0);
}
