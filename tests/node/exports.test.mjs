// Proves the shape of the two WebAssembly builds: no imports, exactly the C
// ABI of dsp/include/earshot/earshot.h (read here with its own parser) plus
// malloc, free, memory and _initialize, under 300 KB each, and no SIMD
// instruction in the scalar build (so it runs on engines without SIMD).
import assert from 'node:assert/strict';
import { execFileSync } from 'node:child_process';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { test } from 'node:test';
import { gzipSync } from 'node:zlib';

import { ABI_FUNCTIONS, MAX_BLOCK, MAX_RATE, MIN_RATE } from '../../worklet/loader.js';
import { ROOT, WASM_VARIANTS, wasmBytes } from './env.mjs';

// Function names declared in the header: `<type> earshot_<name>(` at the
// start of a line, comments stripped first.
function headerFunctions() {
  const text = readFileSync(join(ROOT, 'dsp', 'include', 'earshot', 'earshot.h'), 'utf8')
    .replace(/\/\*[\s\S]*?\*\//g, '').replace(/\/\/.*$/gm, '');
  const names = new Set();
  for (const m of text.matchAll(/^[A-Za-z_][\w\s*]*?\b(earshot_\w+)\s*\(/gm)) names.add(m[1]);
  return [...names].sort();
}

test('the header declares the stream functions the loader relies on', () => {
  const declared = headerFunctions();
  for (const f of ABI_FUNCTIONS) assert.ok(declared.includes(f), `${f} is declared in earshot.h`);
});

test('the loader\'s MAX_BLOCK, MIN_RATE and MAX_RATE equal the header\'s #defines', () => {
  const text = readFileSync(join(ROOT, 'dsp', 'include', 'earshot', 'earshot.h'), 'utf8');
  const define = (name) => Number((text.match(new RegExp(`^#define\\s+${name}\\s+(\\d+)`, 'm')) || [])[1]);
  assert.equal(MAX_BLOCK, define('EARSHOT_MAX_BLOCK'));
  assert.equal(MIN_RATE, define('EARSHOT_MIN_RATE'));
  assert.equal(MAX_RATE, define('EARSHOT_MAX_RATE'));
});

for (const v of WASM_VARIANTS) {
  test(`earshot-${v}.wasm: no imports, exports exactly the C ABI + malloc, free, memory, _initialize`, () => {
    const mod = new WebAssembly.Module(wasmBytes(v));
    assert.deepEqual(WebAssembly.Module.imports(mod), []);
    const exports = WebAssembly.Module.exports(mod);
    const names = exports.map((e) => e.name).sort();
    assert.deepEqual(names, [...headerFunctions(), '_initialize', 'free', 'malloc', 'memory'].sort());
    assert.equal(exports.find((e) => e.name === 'memory').kind, 'memory');
    for (const e of exports) if (e.name !== 'memory') assert.equal(e.kind, 'function', e.name);
  });

  test(`earshot-${v}.wasm: under 300 KB (raw)`, (t) => {
    const b = wasmBytes(v);
    const gz = gzipSync(b, { level: 9 }).length;
    t.diagnostic(`${b.length} bytes raw, ${gz} bytes gzip -9`);
    assert.ok(b.length < 300 * 1024, `${b.length} bytes`);
  });
}

// Binaryen's disassembler (a dependency of Debian's emscripten) prints every
// SIMD value type as v128; the scalar build must have none, the simd build many.
// The scalar build targets the oldest engines: no bulk-memory instruction either.
test('the scalar build holds no SIMD instruction; the simd build does', (t) => {
  let dis;
  try {
    dis = (v) => execFileSync('wasm-dis', ['--all-features', '-'], { input: wasmBytes(v), maxBuffer: 1 << 28, encoding: 'utf8' });
    dis('scalar');
  } catch (e) {
    t.skip(`wasm-dis (binaryen) not available: ${e.message.split('\n')[0]}`);
    return;
  }
  const count = (s) => (s.match(/v128|f32x4|i32x4/g) || []).length;
  const scalar = dis('scalar');
  assert.equal(count(scalar), 0);
  // Nor bulk-memory instructions (the simd build uses them, docs/wasm.md).
  assert.equal((scalar.match(/memory\.(copy|fill)/g) || []).length, 0);
  assert.ok(count(dis('simd')) > 100);
});
