#!/usr/bin/env bash
# Serves a built earshot site on localhost with Python's static file server
# (no Node, no server-side code, no special headers), printing the address.
#
#   tools/serve.sh                 build the demo site from demos/site.json into
#                                  build/site-demo (native tool, both WebAssembly
#                                  builds, the site) and serve it
#   tools/serve.sh DIR             serve an already built site folder
#   tools/serve.sh [DIR] --port N  choose the port (default: first free from 8000)
#   tools/serve.sh --build-only    build the demo site and stop
set -euo pipefail
cd "$(dirname "$0")/.."
dir=""
port=""
build_only=0
while [ $# -gt 0 ]; do
  case "$1" in
    --port) port=${2:?--port needs a number}; shift 2 ;;
    --port=*) port=${1#--port=}; shift ;;
    --build-only) build_only=1; shift ;;
    -h|--help) sed -n '2,11p' "$0" | sed 's/^# \{0,1\}//'; exit 0 ;;
    -*) echo "serve.sh: unknown option '$1' (see --help)" >&2; exit 2 ;;
    *) [ -z "$dir" ] || { echo "serve.sh: one site folder only" >&2; exit 2; }; dir=$1; shift ;;
  esac
done

if [ -z "$dir" ]; then
  bash tools/setup.sh build
  export NODE_PATH=/usr/share/nodejs
  cmake --preset native >/dev/null && cmake --build --preset native -j2 --target earshot
  for v in wasm-simd wasm-scalar; do
    cmake --preset "$v" >/dev/null && cmake --build --preset "$v" -j2
  done
  dir=build/site-demo
  build/native/earshot site demos/site.json --out "$dir" --force
  [ "$build_only" = 1 ] && exit 0
fi
[ -f "$dir/index.html" ] && [ -f "$dir/site.json" ] || {
  echo "serve.sh: '$dir' is not a built site (no index.html and site.json); build one with 'earshot site CONFIG --out $dir'" >&2
  exit 1
}

free_port() {  # first port from $1 that nothing listens on
  python3 - "$1" <<'PY'
import socket, sys
p = int(sys.argv[1])
for port in range(p, p + 50):
    s = socket.socket()
    try:
        s.bind(("127.0.0.1", port))
    except OSError:
        continue
    finally:
        s.close()
    print(port)
    break
else:
    sys.exit("serve.sh: no free port from %d to %d" % (p, p + 49))
PY
}
[ -n "$port" ] || port=$(free_port 8000)
echo "serving $dir at http://localhost:$port/  (Ctrl-C stops)"
[ -f "$dir/listening.json" ] && echo "listening tests at http://localhost:$port/listen.html"
exec python3 -m http.server "$port" --bind 127.0.0.1 --directory "$dir"
