#!/usr/bin/env bash
# Runs the browser tests (tests/browser/*.test.js, node's test runner driving
# Debian's Chromium through playwright-core). Installs what is missing first:
# the chromium package (apt-get, as root or through sudo) and the npm
# packages of package-lock.json (npm ci; playwright-core downloads no browser).
# Builds the native tool and both WebAssembly builds only when they are absent
# (tools/test.sh builds them before calling this).
#
#   bash tests/browser/run.sh [node --test options, e.g. --test-name-pattern=offline]
# Environment: EARSHOT_BIN (default build/native/earshot), EARSHOT_CHROMIUM (default /usr/bin/chromium).
set -euo pipefail
cd "$(dirname "$0")/../.."

if ! dpkg-query -W -f='${Status}' chromium 2>/dev/null | grep -q "install ok installed"; then
  echo "browser tests: installing Debian's chromium"
  if [ "$(id -u)" -eq 0 ]; then apt=(apt-get); elif command -v sudo >/dev/null 2>&1; then apt=(sudo apt-get); else
    echo "browser tests: need root or sudo to install chromium" >&2; exit 1; fi
  export DEBIAN_FRONTEND=noninteractive
  "${apt[@]}" update -qq
  "${apt[@]}" install -y -qq --no-install-recommends chromium
fi
if [ ! -f node_modules/playwright-core/package.json ]; then
  echo "browser tests: npm ci"
  PLAYWRIGHT_SKIP_BROWSER_DOWNLOAD=1 npm ci --no-audit --no-fund
fi

export NODE_PATH=/usr/share/nodejs
bin=${EARSHOT_BIN:-build/native/earshot}
if [ ! -x "$bin" ]; then
  cmake --preset native >/dev/null && cmake --build --preset native -j2 --target earshot
fi
for v in simd scalar; do
  if [ ! -f "build/wasm-$v/earshot-$v.wasm" ]; then
    cmake --preset "wasm-$v" >/dev/null && cmake --build --preset "wasm-$v" -j2
  fi
done
export EARSHOT_BIN="$bin"
exec node --test --test-concurrency=1 "$@" tests/browser/
