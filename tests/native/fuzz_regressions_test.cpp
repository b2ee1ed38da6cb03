// Replays the checked-in fuzz corpus of the effect harness (tests/fuzz/corpus/
// fuzz_effect, the layout of tests/fuzz/fuzz_effect.cpp: a 10-byte header,
// then the effect file) through the C ABI, as the harness does: every input is
// either refused with a message or makes a stream that processes every block.
// Inputs the fuzzer found crashing are added to that folder, so this is their
// regression test in the ordinary (non-fuzz) build too.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <string>
#include <vector>

#include "earshot/earshot.h"

namespace fs = std::filesystem;

TEST_CASE("fuzz corpus: every effect input is refused with a message or processes cleanly", "[fuzz]") {
  const fs::path dir = fs::path(EARSHOT_SOURCE_DIR) / "tests/fuzz/corpus/fuzz_effect";
  std::vector<fs::path> files;
  for (const auto& e : fs::directory_iterator(dir)) files.push_back(e.path());
  std::sort(files.begin(), files.end());
  REQUIRE(files.size() >= 11);  // the seeds: bundled demos and one file per layer family
  int loaded = 0;
  for (const auto& f : files) {
    INFO(f.string());
    std::ifstream in(f, std::ios::binary);
    const std::vector<unsigned char> bytes((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
    if (bytes.size() < 10) continue;
    char error[256] = {0};
    earshot_stream* s = earshot_create(bytes.data() + 10, bytes.size() - 10, 44100.0, nullptr, error, sizeof error);
    if (!s) {
      CHECK(std::string(error).size() > 0);
      continue;
    }
    ++loaded;
    std::vector<float> x(1024, 0.25f), y(1024);
    for (int n : {1, 17, 128, 878}) CHECK(earshot_process(s, x.data(), y.data(), n) == n);
    CHECK(earshot_set_control(s, earshot_control_count(s), 0.5f) == EARSHOT_ERR_INDEX);
    CHECK(earshot_set_mix(s, NAN) == EARSHOT_ERR_NOT_FINITE);
    earshot_destroy(s);
  }
  CHECK(loaded >= 11);  // the seeds are valid effects
}
