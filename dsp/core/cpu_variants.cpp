// The table of variants compiled into this binary and the choice among them.
#include <string>

#include "cpu_variants.hpp"
#include "runner.hpp"

namespace earshot {

#define EARSHOT_DECLARE(ns)                                      \
  namespace ns {                                                 \
  std::unique_ptr<Runner> make(std::shared_ptr<const Model> m, int lanes); \
  double peak_madd_rate(double seconds);                         \
  }

#ifdef __EMSCRIPTEN__
EARSHOT_DECLARE(v_wasm)
std::string default_variant() { return EARSHOT_WASM_VARIANT; }
std::unique_ptr<Runner> make_runner(std::shared_ptr<const Model> m, const std::string& v, int lanes,
                                    std::string& error) {
  if (!v.empty() && v != EARSHOT_WASM_VARIANT) {
    error = "variant '" + v + "' is not in this build (it is the '" EARSHOT_WASM_VARIANT "' build)";
    return nullptr;
  }
  return v_wasm::make(std::move(m), lanes);
}
#else
EARSHOT_DECLARE(v_scalar)
EARSHOT_DECLARE(v_sse4)
EARSHOT_DECLARE(v_avx2)
EARSHOT_DECLARE(v_avx2fma)

namespace {
struct Entry {
  const char* name;
  std::unique_ptr<Runner> (*make)(std::shared_ptr<const Model>, int);
  double (*peak)(double);
};
const Entry kVariants[] = {
    {"scalar", v_scalar::make, v_scalar::peak_madd_rate},
    {"sse4", v_sse4::make, v_sse4::peak_madd_rate},
    {"avx2", v_avx2::make, v_avx2::peak_madd_rate},
    {"avx2fma", v_avx2fma::make, v_avx2fma::peak_madd_rate},
};
const Entry* find(const std::string& n) {
  for (const Entry& e : kVariants)
    if (n == e.name) return &e;
  return nullptr;
}
}  // namespace

std::vector<std::string> native_variants() {
  std::vector<std::string> v;
  for (const Entry& e : kVariants) v.push_back(e.name);
  return v;
}

bool variant_supported(const std::string& n) {
#if defined(__x86_64__) || defined(__i386__)
  __builtin_cpu_init();
  if (n == "scalar") return true;
  if (n == "sse4") return __builtin_cpu_supports("sse4.1");
  if (n == "avx2") return __builtin_cpu_supports("avx2");
  if (n == "avx2fma") return __builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma");
  return false;
#else
  return n == "scalar";
#endif
}

std::string best_variant() {
  for (const char* n : {"avx2", "sse4"})
    if (variant_supported(n)) return n;
  return "scalar";
}

std::string default_variant() { return best_variant(); }

double measure_peak_madd_rate(const std::string& n, double seconds) {
  const Entry* e = find(n);
  if (!e || !variant_supported(n)) return 0;
  return e->peak(seconds);
}

std::unique_ptr<Runner> make_runner(std::shared_ptr<const Model> m, const std::string& v, int lanes,
                                    std::string& error) {
  const std::string name = v.empty() ? best_variant() : v;
  const Entry* e = find(name);
  if (!e) {
    error = "unknown variant '" + name + "' (scalar, sse4, avx2, avx2fma)";
    return nullptr;
  }
  if (!variant_supported(name)) {
    error = "variant '" + name + "' needs instructions this CPU does not have";
    return nullptr;
  }
  return e->make(std::move(m), lanes);
}
#endif

}  // namespace earshot
