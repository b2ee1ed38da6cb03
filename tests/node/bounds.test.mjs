// Proves the per-stream memory limit (dsp/FORMAT.md, "Stream memory") in both
// WebAssembly builds: a small file asking for hundreds of MiB of history is
// refused with the native core's very text, before anything large is
// allocated (the instance's memory does not grow); and a trap does not end
// the page: when effects just under the limit exhaust the instance's memory
// and the core traps, the next effect gets a fresh instance and runs
// bit-identical to a new variant.
import assert from 'node:assert/strict';
import { mkdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { test } from 'node:test';

import { Effect, loadVariant } from '../../worklet/loader.js';
import { effectFiles, prng, runNative, variant, wasmBytes, WASM_VARIANTS, WORK } from './env.mjs';
import { build } from './nfx.mjs';

const ROOT_DIR = new URL('../..', import.meta.url).pathname;

// linear 1 → C, then conv1d C → 1 with kernel 2 and dilation D: 12·C floats of
// weights and about 8·C·D bytes of convolution history per stream.
function wideHistory(C, D) {
  const rnd = prng(C * 7 + D);
  const header = { __metadata__: {} };
  const parts = [];
  let off = 0;
  const tensor = (name, shape) => {
    const n = shape.reduce((a, b) => a * b, 1);
    const v = new Float32Array(n);
    for (let i = 0; i < n; i++) v[i] = (rnd() - 0.5) * 0.1;
    const b = Buffer.from(v.buffer);
    header[name] = { dtype: 'F32', shape, data_offsets: [off, off + b.length] };
    off += b.length;
    parts.push(b);
  };
  tensor('wide.weight', [C, 1]);
  tensor('wide.bias', [C]);
  tensor('far.weight', [1, C, 2]);
  tensor('far.bias', [1]);
  const effect = {
    format: 'earshot-effect', version: 1, sample_rate: 48000, controls: [],
    credits: { title: `wide history ${C}x${D}` },
    graph: { inputs: ['audio'], input_skip: false, layers: [
      { type: 'linear', name: 'wide', in: 1, out: C, bias: true },
      { type: 'conv1d', name: 'far', in: C, out: 1, kernel: 2, dilation: D, bias: true },
    ] },
  };
  return build({ header, data: Buffer.concat(parts), effect });
}

const refused = wideHistory(1024, 65536);   // 513 MiB of history
const nearLimit = wideHistory(120, 65536);  // 60.1 MiB in all: under the 64 MiB default

test('a 17 KB file asking for 513 MiB is refused with the native text, and memory does not grow', () => {
  assert.ok(refused.length < 40000, `file is ${refused.length} bytes`);
  mkdirSync(WORK, { recursive: true });
  const path = join(WORK, 'wide-history-refused.nfx');
  writeFileSync(path, refused);
  const native = runNative(['errors', path]).trim().replace(/^error /, '');
  rmSync(path);
  assert.match(native, /layers\[1\] \('far', conv1d\) needs 512\.0 MiB.*the limit is 64\.0 MiB per stream/);
  for (const name of WASM_VARIANTS) {
    const v = variant(name);
    const before = v.memoryBytes;
    assert.throws(() => v.createEffect(refused, 48000), (e) => {
      assert.equal(e.message, native);
      return true;
    });
    assert.equal(v.memoryBytes, before, `${name}: memory grew on a refused file`);
    assert.equal(v.broken, null);
  }
});

for (const name of WASM_VARIANTS) {
  test(`${name}: after the core traps (memory exhausted), the next effect gets a fresh instance`, () => {
    const wasm = wasmBytes(name);
    const v = loadVariant(new WebAssembly.Module(wasm), { name });
    const kept = [];
    let trap = null;
    for (let i = 0; i < 64 && !trap; i++) {
      try {
        kept.push(new Effect(v, nearLimit, 48000));
      } catch (e) {
        trap = e;
      }
    }
    assert.ok(trap, 'expected the instance to run out of memory within 64 streams of 60 MiB');
    assert.match(trap.message, /trapped in earshot_create/);
    assert.ok(v.broken);
    // Effects of the trapped instance are lost and say so; destroying them is harmless.
    assert.throws(() => kept[0].process(new Float32Array(8), new Float32Array(8)), /trapped/);
    for (const fx of kept) fx.destroy();

    // The next effect renews the instance and computes what a new instance computes.
    const good = readFileSync(effectFiles({ include: ['bundled'] })[0].path);
    const fx = v.createEffect(good, 48000);
    assert.equal(v.broken, null);
    assert.equal(v.generation, 1);
    const x = new Float32Array(4096);
    const r = prng(5);
    for (let i = 0; i < x.length; i++) x[i] = (r() - 0.5) * 0.8;
    const y = fx.process(x, new Float32Array(x.length));
    const ref = loadVariant(new WebAssembly.Module(wasm), { name }).createEffect(good, 48000);
    const want = ref.process(x, new Float32Array(x.length));
    assert.deepEqual(Buffer.from(y.buffer), Buffer.from(want.buffer));
    fx.destroy();
    ref.destroy();
  });
}

test('an effect file over the 256 MiB format limit is refused before it is copied into WebAssembly memory', () => {
  // The text is the core's (dsp/core/loader.cpp), which the loader repeats so
  // the bytes never reach the instance: its memory cannot shrink afterwards.
  const core = readFileSync(new URL('../../dsp/core/loader.cpp', import.meta.url), 'utf8');
  assert.match(core, /" bytes exceeds the 256 MiB limit"/);
  const tooBig = new Uint8Array(256 * 1024 * 1024 + 1);
  for (const name of WASM_VARIANTS) {
    const v = variant(name);
    const before = v.memoryBytes;
    assert.throws(() => v.createEffect(tooBig, 48000), (e) => e.message === 'effect file: 268435457 bytes exceeds the 256 MiB limit');
    assert.equal(v.memoryBytes, before, `${name}: memory grew`);
    // Still usable at once.
    const fx = v.createEffect(readFileSync(join(ROOT_DIR, 'demos', 'effects', 'gru.nfx')), 48000);
    assert.ok(fx.latency >= 0);
    fx.destroy();
  }
});
