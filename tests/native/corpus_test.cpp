// The conformance corpus (tests/data/effects/, README.md there): every valid
// file loads in every parity variant this CPU runs, its description JSON
// (earshot_info without the variant name) equals the golden one and the FNV-1a
// 64 hash of its output for the standard test signal (dsp/cli/test_signal.hpp,
// the one `earshot verify` uses) equals the golden hash; every invalid file is
// refused with exactly the golden message. tests/node/corpus.test.mjs and
// tests/python/test_corpus.py read the same index.json and expected.json.
//
// Bless (writes expected.json and signal.f32 from this build, for review by
// diff): EARSHOT_CORPUS_BLESS=1 build/native/earshot_tests "[corpus]"
#include <catch2/catch.hpp>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include "../../dsp/cli/test_signal.hpp"
#include "cpu_variants.hpp"
#include "stream_util.hpp"  // first: it sets rapidjson's std::string option

#include <rapidjson/document.h>
#include <rapidjson/prettywriter.h>
#include <rapidjson/stringbuffer.h>
#include <rapidjson/writer.h>
#include <cmath>
#include <cstring>

namespace {

const std::string kDir = std::string(EARSHOT_SOURCE_DIR) + "/tests/data/effects/";
// The standard test signal at 48 kHz, 0.1 s: 4 800 samples, fed at the model's
// rate (no resampling) to every valid file.
constexpr double kSignalRate = 48000, kSignalSeconds = 0.1;

std::vector<unsigned char> read_bytes(const std::string& path) {
  std::ifstream f(path, std::ios::binary);
  REQUIRE(f.good());
  return std::vector<unsigned char>((std::istreambuf_iterator<char>(f)), std::istreambuf_iterator<char>());
}

rapidjson::Document read_json(const std::string& path) {
  const auto b = read_bytes(path);
  rapidjson::Document d;
  d.Parse(reinterpret_cast<const char*>(b.data()), b.size());
  REQUIRE_FALSE(d.HasParseError());
  return d;
}

std::string hex64(uint64_t h) {
  char s[17];
  std::snprintf(s, sizeof s, "%016llx", static_cast<unsigned long long>(h));
  return s;
}

std::string to_text(const rapidjson::Value& v) {
  rapidjson::StringBuffer sb;
  rapidjson::Writer<rapidjson::StringBuffer> w(sb);
  v.Accept(w);
  return sb.GetString();
}

struct Outcome {
  std::string error;        // empty when loaded
  std::string description;  // info JSON without "variant", compact
  std::string hash;
  std::vector<float> y;
};

Outcome run(const std::vector<unsigned char>& bytes, const std::string& variant, const std::vector<float>& x) {
  Outcome o;
  std::string err;
  // Host rate = model rate: the model rate is read from the description first.
  testfx::StreamPtr probe = testfx::open(bytes, variant, 48000, &err);
  if (!probe) {
    o.error = err;
    return o;
  }
  rapidjson::Document info;
  info.Parse(earshot_info(probe.get()));
  REQUIRE_FALSE(info.HasParseError());
  const double rate = info["model_rate"].GetDouble();
  testfx::StreamPtr s = testfx::open(bytes, variant, rate, &err);
  REQUIRE(s);
  info.Parse(earshot_info(s.get()));
  info.RemoveMember("variant");
  o.description = to_text(info);
  std::vector<float> y(x.size());
  REQUIRE(earshot_process(s.get(), x.data(), y.data(), int(x.size())) == int(x.size()));
  o.hash = hex64(earshot::cli::fnv1a64(y.data(), y.size()));
  o.y = y;
  // Same bits in random blocks (the invariant every runner relies on).
  earshot_reset(s.get());
  const auto z = testfx::run(s.get(), x, testfx::random_blocks(7, 999));
  CHECK(testfx::identical(y, z));
  return o;
}

}  // namespace

TEST_CASE("corpus: every file gives its golden description, hash or message in every variant", "[corpus]") {
  const std::vector<float> x = earshot::cli::test_signal(kSignalRate, kSignalSeconds);
  REQUIRE(x.size() == 4800);
  const rapidjson::Document index = read_json(kDir + "index.json");
  const bool bless = std::getenv("EARSHOT_CORPUS_BLESS") != nullptr;
  const std::vector<std::string> variants = testfx::parity_variants();
  REQUIRE(!variants.empty());

  if (bless) {
    rapidjson::Document out(rapidjson::kObjectType);
    auto& a = out.GetAllocator();
    for (const char* kind : {"valid", "invalid"}) {
      for (const auto& e : index[kind].GetArray()) {
        const std::string file = e["file"].GetString();
        const Outcome o = run(read_bytes(kDir + file), variants[0], x);
        rapidjson::Value v(rapidjson::kObjectType);
        if (o.error.empty()) {
          rapidjson::Document d(&a);
          d.Parse(o.description.c_str());
          v.AddMember("description", rapidjson::Value(d, a), a);
          v.AddMember("hash", rapidjson::Value(o.hash.c_str(), a), a);
        } else {
          v.AddMember("error", rapidjson::Value(o.error.c_str(), a), a);
        }
        out.AddMember(rapidjson::Value(file.c_str(), a), v, a);
      }
    }
    rapidjson::StringBuffer sb;
    rapidjson::PrettyWriter<rapidjson::StringBuffer> w(sb);
    w.SetIndent(' ', 1);
    out.Accept(w);
    std::ofstream(kDir + "expected.json", std::ios::binary) << sb.GetString() << "\n";
    std::ofstream(kDir + "signal.f32", std::ios::binary)
        .write(reinterpret_cast<const char*>(x.data()), std::streamsize(x.size() * sizeof(float)));
    WARN("blessed " << kDir << "expected.json and signal.f32 with variant " << variants[0]);
  }

  // The checked-in signal is the standard one, bit for bit (node and Python read it).
  const auto sig = read_bytes(kDir + "signal.f32");
  REQUIRE(sig.size() == x.size() * sizeof(float));
  CHECK(std::memcmp(sig.data(), x.data(), sig.size()) == 0);

  const rapidjson::Document expected = read_json(kDir + "expected.json");
  size_t valid = 0, invalid = 0;
  for (const char* kind : {"valid", "invalid"}) {
    for (const auto& e : index[kind].GetArray()) {
      const std::string file = e["file"].GetString();
      REQUIRE(expected.HasMember(file.c_str()));
      const auto& want = expected[file.c_str()];
      const auto bytes = read_bytes(kDir + file);
      for (const auto& v : variants) {
        INFO(file << " in variant " << v);
        const Outcome o = run(bytes, v, x);
        if (std::string(kind) == "valid") {
          REQUIRE(o.error == "");
          CHECK(o.description == to_text(want["description"]));
          CHECK(o.hash == want["hash"].GetString());
        } else {
          REQUIRE(want.HasMember("error"));
          CHECK(o.error == want["error"].GetString());
          CHECK(o.error.find(e["names"].GetString()) != std::string::npos);
        }
      }
      // avx2fma fuses multiply-adds, so it is close to the others, not identical: the
      // same description or message, and ESR against scalar ≤ −120 dB (the bound of
      // `earshot verify`, docs/cli.md).
      if (earshot::variant_supported("avx2fma")) {
        INFO(file << " in variant avx2fma");
        const Outcome f = run(bytes, "avx2fma", x);
        if (std::string(kind) == "valid") {
          REQUIRE(f.error == "");
          CHECK(f.description == to_text(want["description"]));
          const Outcome s = run(bytes, "scalar", x);
          double num = 0, den = 0;
          for (size_t i = 0; i < s.y.size(); ++i) {
            num += (double(f.y[i]) - s.y[i]) * (double(f.y[i]) - s.y[i]);
            den += double(s.y[i]) * s.y[i];
          }
          CHECK((num == 0 || 10 * std::log10(num / den) <= -120.0));
        } else {
          CHECK(f.error == want["error"].GetString());
        }
      }
      (std::string(kind) == "valid" ? valid : invalid) += 1;
    }
  }
  CHECK(valid >= 50);
  CHECK(invalid >= 90);
  CHECK(expected.MemberCount() == valid + invalid);
}
