#!/usr/bin/env bash
# Installs the Debian packages earshot needs, only those missing. Runs apt-get
# as root, or through sudo. Usage: tools/setup.sh [build|test]   (default: test)
set -euo pipefail
what=${1:-test}

build_pkgs=(g++ cmake make pkg-config git ca-certificates emscripten libeigen3-dev libxsimd-dev catch2
            rapidjson-dev libsndfile1-dev python3)
test_pkgs=(python3-torch python3-numpy python3-scipy python3-pytest sox chromium libebur128-1
           python3-matplotlib  # the page's colour maps: tools/make_colormaps.py and their test
           clang libclang-rt-14-dev)  # clang + libFuzzer runtime: tools/fuzz.sh
[ "$what" = test ] && pkgs=("${build_pkgs[@]}" "${test_pkgs[@]}") || pkgs=("${build_pkgs[@]}")
command -v node >/dev/null 2>&1 || pkgs+=(nodejs)
[ "$what" = test ] && { command -v npm >/dev/null 2>&1 || pkgs+=(npm); }

missing=()
for p in "${pkgs[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
done
if [ ${#missing[@]} -eq 0 ]; then
  echo "setup: all Debian packages present"
  exit 0
fi
echo "setup: installing ${missing[*]}"
if [ "$(id -u)" -eq 0 ]; then
  apt=(apt-get)
elif command -v sudo >/dev/null 2>&1; then
  apt=(sudo apt-get)
else
  echo "setup: need root or sudo to install: ${missing[*]}" >&2
  exit 1
fi
export DEBIAN_FRONTEND=noninteractive
"${apt[@]}" update -qq
"${apt[@]}" install -y -qq --no-install-recommends "${missing[@]}"
