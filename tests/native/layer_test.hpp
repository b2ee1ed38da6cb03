// What every layer type's test file (tests/native/layers/<type>_test.cpp)
// uses: one registration that gives the type's double-precision oracle to the
// Reference (reference.hpp) and its cases to all_cases() (cases.hpp), and the
// one check each type's TEST_CASE runs on its cases.
#pragma once
#include <catch2/catch.hpp>

#include "cases.hpp"
#include "reference.hpp"

namespace testfx {

struct LayerTestEntry {
  LayerTestEntry(const char* type, LayerOracle oracle, CaseFill cases) {
    layer_oracles()[type] = oracle;
    layer_cases()[type] = cases;
  }
};

// Every case against the reference in every parity variant (bit-identical to
// each other) and avx2fma where the CPU has it (layers_test.cpp).
void check_cases(const std::vector<Case>& cases);

// The cases `type`'s test file registered, seeded as in all_cases().
std::vector<Case> cases_of(const std::string& type);

}  // namespace testfx

// The type's TEST_CASE: `ctest -R <type>` or `earshot_tests "layer <type>*"`
// runs it alone; a failing case is reported and the next case still runs.
#define EARSHOT_LAYER_TEST(type)                                                                     \
  TEST_CASE("layer " type ": matches the double-precision reference in every variant", "[layers]") { \
    testfx::check_cases(testfx::cases_of(type));                                                     \
  }
