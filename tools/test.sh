#!/usr/bin/env bash
# Builds everything and runs every test: native Catch2 (release and
# AddressSanitizer+UBSan), the WebAssembly builds and their node:test suite,
# and the Python suite (PyTorch parity, exporter, CLI, circuit, resampler).
set -uo pipefail
cd "$(dirname "$0")/.."
bash tools/setup.sh test || exit 1
export NODE_PATH=/usr/share/nodejs
failed=()
step() {  # step NAME COMMAND...
  local name=$1
  echo "== $name"
  shift
  "$@" || failed+=("$name")
}
jobs=2

step "native build" bash -c "cmake --preset native >/dev/null && cmake --build --preset native -j$jobs"
step "native tests" ctest --preset native -j$jobs
step "sanitizer build" bash -c "cmake --preset native-asan >/dev/null && cmake --build --preset native-asan -j$jobs --target earshot_tests earshot-resample-tool"
step "sanitizer tests" ctest --preset native-asan -j$jobs
if [ -f cmake/wasm.cmake ]; then
  for v in wasm-simd wasm-scalar; do
    step "$v build" bash -c "cmake --preset $v >/dev/null && cmake --build --preset $v -j$jobs"
  done
fi
if ls tests/node/*.test.mjs >/dev/null 2>&1 || ls tests/node/*.test.js >/dev/null 2>&1; then
  step "node tests" node --test tests/node/
fi
if [ -f tests/browser/run.sh ]; then
  step "browser tests" bash tests/browser/run.sh
fi
pytest_run() {
  PYTHONPATH=python EARSHOT_BUILD=build/native /usr/bin/python3 -m pytest -q tests/python "$@"
  rc=$?
  [ $rc -eq 5 ] && { echo "pytest: no tests collected"; return 1; }
  return $rc
}
step "python tests" pytest_run
# Each libFuzzer harness for 60 s under ASan+UBSan (docs/fuzzing.md); 4-5 min with its build.
step "fuzz" bash tools/fuzz.sh all 60

if [ ${#failed[@]} -gt 0 ]; then
  echo "FAILED: ${failed[*]}"
  exit 1
fi
echo "all test suites passed"
