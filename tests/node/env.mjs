// Shared set-up of the WebAssembly tests and tools/wasm-bench.mjs: where the
// builds are, the native helper (built on demand against libearshot.so), the
// effect files to run, and small utilities (seeded PRNG, hashing, comparison).
//
// Prerequisites (docs/wasm.md):
//   cmake --preset wasm-simd && cmake --build --preset wasm-simd
//   cmake --preset wasm-scalar && cmake --build --preset wasm-scalar
//   cmake --preset native -B build/wasmcmp && cmake --build build/wasmcmp -j2 --target earshot_shared
// Overrides: EARSHOT_WASM_SIMD, EARSHOT_WASM_SCALAR (paths of the .wasm files),
// EARSHOT_NATIVE_LIB (folder holding libearshot.so).
import { execFileSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { existsSync, mkdirSync, readdirSync, readFileSync, statSync, writeFileSync } from 'node:fs';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

import { loadVariant } from '../../worklet/loader.js';

export const ROOT = resolve(dirname(fileURLToPath(import.meta.url)), '..', '..');
export const WORK = join(ROOT, 'build', 'node-tests');
mkdirSync(WORK, { recursive: true });

const BUILD_HINT = 'build it first (docs/wasm.md): cmake --preset wasm-VARIANT && cmake --build --preset wasm-VARIANT';

export function wasmPath(variant) {
  const env = process.env[`EARSHOT_WASM_${variant.toUpperCase()}`];
  return env || join(ROOT, 'build', `wasm-${variant}`, `earshot-${variant}.wasm`);
}

// Newest modification time of the core's sources: a build older than that
// would compare yesterday's code with today's.
function newestSource() {
  let t = 0;
  for (const d of ['dsp/core', 'dsp/layers', 'dsp/include/earshot', 'dsp/wasm']) {
    const dir = join(ROOT, d);
    if (!existsSync(dir)) continue;
    for (const f of readdirSync(dir)) if (/\.(cpp|hpp|h)$/.test(f)) t = Math.max(t, statSync(join(dir, f)).mtimeMs);
  }
  return t;
}

function checkFresh(path, hint) {
  if (process.env.EARSHOT_ALLOW_STALE) return;
  if (statSync(path).mtimeMs < newestSource())
    throw new Error(`${path} is older than the core sources: rebuild it (${hint}), or set EARSHOT_ALLOW_STALE=1`);
}

export function wasmBytes(variant) {
  const p = wasmPath(variant);
  const hint = BUILD_HINT.replace(/VARIANT/g, variant);
  if (!existsSync(p)) throw new Error(`${p} is missing: ${hint}`);
  checkFresh(p, hint.replace('build it first (docs/wasm.md): ', ''));
  return readFileSync(p);
}

const modules = new Map();
// A fresh instance of the named build (compiled once per process).
export function variant(name) {
  if (!modules.has(name)) modules.set(name, new WebAssembly.Module(wasmBytes(name)));
  return loadVariant(modules.get(name), { name });
}

export const WASM_VARIANTS = ['simd', 'scalar'];
export const NATIVE_PARITY_VARIANTS = ['scalar', 'sse4', 'avx2'];

// ------------------------------------------------------------ native helper

function nativeLibDir() {
  const cands = process.env.EARSHOT_NATIVE_LIB ? [process.env.EARSHOT_NATIVE_LIB]
    : [join(ROOT, 'build', 'wasmcmp'), join(ROOT, 'build', 'native')];
  for (const d of cands) {
    if (existsSync(join(d, 'libearshot.so'))) {
      checkFresh(join(d, 'libearshot.so'), `cmake --build ${d} -j2 --target earshot_shared`);
      return d;
    }
  }
  throw new Error(`libearshot.so not found in ${cands.join(' or ')}: build it first: ` +
    'cmake --preset native -B build/wasmcmp && cmake --build build/wasmcmp -j2 --target earshot_shared');
}

let helper = null;
// Path of tests/node/native_run built against the native shared library.
export function nativeHelper() {
  if (helper) return helper;
  const lib = nativeLibDir();
  const src = join(ROOT, 'tests', 'node', 'native_run.cpp');
  const exe = join(WORK, 'native_run');
  const stale = !existsSync(exe) || statSync(exe).mtimeMs < Math.max(statSync(src).mtimeMs,
    statSync(join(lib, 'libearshot.so')).mtimeMs, statSync(join(ROOT, 'dsp', 'include', 'earshot', 'earshot.h')).mtimeMs);
  if (stale) {
    execFileSync('g++', ['-O2', '-std=c++17', '-I', join(ROOT, 'dsp', 'include'), src, '-L', lib, '-learshot',
      `-Wl,-rpath,${lib}`, '-o', exe], { stdio: ['ignore', 'inherit', 'inherit'] });
  }
  helper = exe;
  return exe;
}

export function runNative(args) {
  return execFileSync(nativeHelper(), args, { encoding: 'utf8', maxBuffer: 1 << 28 });
}

// ------------------------------------------------------------ effect files

// The parity set: tests/node/make_effects.py's files (regenerated when the
// script is newer), every bundled effect (demos/effects/*.nfx) and the
// synthetic benchmark models (build/bench-models/*.nfx, tools/make_bench_models.py).
export function effectFiles({ include = ['generated', 'bundled', 'bench'] } = {}) {
  const out = [];
  if (include.includes('generated')) {
    const dir = join(WORK, 'effects');
    const script = join(ROOT, 'tests', 'node', 'make_effects.py');
    const stamp = join(dir, '.made');
    if (!existsSync(stamp) || statSync(stamp).mtimeMs < statSync(script).mtimeMs) {
      execFileSync('/usr/bin/python3', [script, dir], { stdio: ['ignore', 'ignore', 'inherit'] });
      writeFileSync(stamp, new Date().toISOString());
    }
    out.push(...listNfx(dir, 'generated'));
  }
  if (include.includes('bundled')) out.push(...listNfx(join(ROOT, 'demos', 'effects'), 'bundled'));
  if (include.includes('bench')) out.push(...listNfx(join(ROOT, 'build', 'bench-models'), 'bench'));
  return out;
}

function listNfx(dir, group) {
  if (!existsSync(dir)) return [];
  return readdirSync(dir).filter((f) => f.endsWith('.nfx')).sort()
    .map((f) => ({ name: `${group}/${f.replace(/\.nfx$/, '')}`, path: join(dir, f) }));
}

// ------------------------------------------------------------ utilities

// The page's seeded generator (mulberry32, web/js/listen-order.js): the tests
// must be reproducible, so Math.random is never used.
export { rng as prng } from '../../web/js/listen-order.js';

export function sha256(f32) {
  return createHash('sha256').update(new Uint8Array(f32.buffer, f32.byteOffset, f32.byteLength)).digest('hex');
}

// Index of the first sample whose bits differ (NaN payloads and signed
// zeros count), or -1 when the arrays are bit-identical.
export function firstDifference(a, b) {
  if (a.length !== b.length) return Math.min(a.length, b.length);
  const ua = new Uint32Array(a.buffer, a.byteOffset, a.length);
  const ub = new Uint32Array(b.buffer, b.byteOffset, b.length);
  for (let i = 0; i < ua.length; i++) if (ua[i] !== ub[i]) return i;
  return -1;
}

export function readF32(path) {
  const b = readFileSync(path);
  const out = new Float32Array(b.length / 4);
  new Uint8Array(out.buffer).set(b);
  return out;
}

export function writeF32(path, f32) {
  writeFileSync(path, new Uint8Array(f32.buffer, f32.byteOffset, f32.byteLength));
}
