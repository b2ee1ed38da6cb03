#!/usr/bin/env bash
# Runs one libFuzzer harness of tests/fuzz (or all of them in turn) for a time.
#   bash tools/fuzz.sh NAME|all SECONDS [extra libFuzzer args]
# Builds the `fuzz` preset (ASan + UBSan) if needed; FUZZ_PRESET=fuzz-nosan for
# a build without sanitizers. The checked-in seed corpus is copied to a scratch
# folder first and never modified; the effect harness also starts from every
# file of the conformance corpus tests/data/effects. Prints executions, exec/s and coverage
# (cov:/ft: of libFuzzer's last status line); exits non-zero on a crash, leak,
# timeout or OOM, and names the input that caused it (kept in fuzz-out/).
set -uo pipefail
cd "$(dirname "$0")/.."
[ $# -ge 2 ] || { echo "usage: tools/fuzz.sh NAME|all SECONDS [libFuzzer args]" >&2; exit 2; }
name=$1 seconds=$2; shift 2
preset=${FUZZ_PRESET:-fuzz}
harnesses=(fuzz_effect fuzz_site_config fuzz_listening fuzz_results fuzz_audio)
[ "$name" = all ] && run=("${harnesses[@]}") || run=("$name")

build=build/$preset
if [ ! -f "$build/CMakeCache.txt" ]; then cmake --preset "$preset" >/dev/null || exit 2; fi
cmake --build --preset "$preset" --target "${run[@]}" >/dev/null || { echo "fuzz: build failed" >&2; exit 2; }

out=${FUZZ_OUT:-fuzz-out}
mkdir -p "$out"
export UBSAN_OPTIONS="suppressions=$PWD/tests/fuzz/ubsan.supp:halt_on_error=1:print_stacktrace=1${UBSAN_OPTIONS:+:$UBSAN_OPTIONS}"
# Effect files with wide layers and long dilation may legitimately cost a few
# hundred MiB (docs/fuzzing.md); more than 2 GiB is a finding.
export ASAN_OPTIONS="${ASAN_OPTIONS:-allocator_may_return_null=1}"
status=0
for h in "${run[@]}"; do
  scratch=$(mktemp -d "${TMPDIR:-/tmp}/earshot-$h.XXXXXX")
  cp -r "tests/fuzz/corpus/$h/." "$scratch/"
  if [ "$h" = fuzz_effect ]; then
    # Every file of the conformance corpus (tests/data/effects) is a seed too,
    # behind the harness's 10-byte header (48 kHz, default variant).
    for f in tests/data/effects/valid/*.nfx tests/data/effects/invalid/*.nfx; do
      [ -f "$f" ] || continue
      { head -c 10 /dev/zero; cat "$f"; } >"$scratch/conformance-$(basename "$f")"
    done
  fi
  dict=(); [ -f "tests/fuzz/$h.dict" ] && dict=(-dict="tests/fuzz/$h.dict")
  log="$out/$h.log"
  "$build/$h" "$scratch" "${dict[@]}" -max_total_time="$seconds" -rss_limit_mb=2048 -malloc_limit_mb=2048 \
    -timeout=10 -max_len=65536 -print_final_stats=1 -artifact_prefix="$out/$h-" "$@" >"$log" 2>&1
  rc=$?
  last=$(grep -E '^#[0-9]+' "$log" | tail -n 1)
  execs=$(grep -E '^stat::number_of_executed_units:' "$log" | awk '{print $2}')
  rate=$(grep -E '^stat::average_exec_per_sec:' "$log" | awk '{print $2}')
  cov=$(sed -nE 's/.* (cov: [0-9]+ ft: [0-9]+).*/\1/p' <<<"$last")
  corp=$(sed -nE 's/.* (corp: [^ ]+) .*/\1/p' <<<"$last")
  echo "$h: ${seconds}s, ${execs:-?} executions, ${rate:-?} exec/s, ${cov:-no coverage line}, ${corp}"
  if [ $rc -ne 0 ]; then
    status=1
    echo "$h: FAILED (exit $rc); log $log" >&2
    grep -E 'ERROR: |SUMMARY: |runtime error|Test unit written to|==[0-9]+== ' "$log" | head -n 8 >&2
  fi
  rm -rf "$scratch"
done
exit $status
