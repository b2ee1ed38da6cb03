// The one main() of the native test executable; every tests/native/*_test.cpp joins it.
#define CATCH_CONFIG_MAIN
#include <catch2/catch.hpp>
