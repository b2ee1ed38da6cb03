#!/usr/bin/env bash
# The main job on the bundled demo material: builds the native tool, shows the
# bundled effect, checks that every CPU variant computes the same samples,
# renders a bundled dry clip through it at two control settings, then builds the
# demo site (both WebAssembly builds, page, effects, clips, reference hashes,
# the comparison grid of the four effects beside the circuit with every cell's
# native hash) and serves it on localhost, printing the address. --no-serve stops after
# building the site.
set -euo pipefail
cd "$(dirname "$0")/.."
bash tools/setup.sh build
cmake --preset native >/dev/null
cmake --build --preset native -j2 >/dev/null
bin=build/native/earshot
fx=$(ls demos/effects/*.nfx 2>/dev/null | head -n 1 || true)
# A dry clip (the *-circuit.wav files are the circuit's own output, the reference).
clip=$(ls demos/clips/*.wav 2>/dev/null | grep -v -- '-circuit\.wav$' | head -n 1 || true)
if [ -z "$fx" ] || [ -z "$clip" ]; then
  echo "demo: no bundled effect or clip found under demos/" >&2
  exit 1
fi
mkdir -p build/demo
"$bin" info "$fx"
"$bin" verify "$fx"
for drive in 0.2 0.8; do
  out="build/demo/$(basename "${clip%.wav}")-drive$drive.wav"
  ctl=()
  "$bin" info --json "$fx" | grep -Eq '"name": ?"drive"' && ctl=(--control "drive=$drive")
  "$bin" render "$fx" "$clip" "$out" --force "${ctl[@]}"
  echo "demo: wrote $out"
done

if [ "${1:-}" = "--no-serve" ]; then
  bash tools/serve.sh --build-only
  echo "demo: site built in build/site-demo"
else
  exec bash tools/serve.sh
fi
