// Proves design invariant 2 for the WebAssembly builds: earshot-simd.wasm and
// earshot-scalar.wasm give output bit-identical to native scalar, sse4 and
// avx2 (libearshot.so, the reference outside the WebAssembly toolchain) for
// every effect in the parity set, at the model's rate and through the
// resampler, with random block partitions and mid-stream control, mix, gain
// and reset events at the same sample positions.
import assert from 'node:assert/strict';
import { readFileSync } from 'node:fs';
import { test } from 'node:test';

import { createEffect } from '../../worklet/loader.js';
import { effectFiles, firstDifference, NATIVE_PARITY_VARIANTS, sha256, variant, WASM_VARIANTS } from './env.mjs';
import { effectFacts, makePlan, runNativePlan, runWasm, testSignal } from './script.mjs';

const SECONDS = Number(process.env.EARSHOT_PARITY_SECONDS || 1.6); // > 65536 samples at 44.1 kHz

function describeDiff(name, ref, got) {
  const i = firstDifference(ref, got);
  if (i < 0) return null;
  return `${name}: first differing sample ${i} of ${ref.length}: native scalar ${ref[i]} ` +
    `(0x${new Uint32Array(new Float32Array([ref[i]]).buffer)[0].toString(16)}), ${name} ${got[i]} ` +
    `(0x${new Uint32Array(new Float32Array([got[i]]).buffer)[0].toString(16)}); ` +
    `sha256 ${sha256(ref).slice(0, 12)} vs ${sha256(got).slice(0, 12)}`;
}

function withoutVariant(info) {
  const { variant: _v, ...rest } = info;
  return rest;
}

const files = effectFiles();
assert.ok(files.length >= 7, 'the parity set holds at least the generated effects');

let seed = 1;
for (const f of files) {
  const bytes = readFileSync(f.path);
  // The model's own rate (no resampling), a host rate that needs the
  // resampler, and that rate again with NaN and infinite input samples (then
  // both sides use the same block partition: the guard silences whole calls).
  const { modelRate, controls, otherRate: other } = effectFacts(bytes);
  const runs = [
    { rate: modelRate, extremes: false },
    { rate: other, extremes: false },
    { rate: other, extremes: true },
  ];
  for (const { rate, extremes } of runs) {
    const s = seed++;
    const what = extremes ? ' with NaN/infinite input' : '';
    test(`${f.name} at ${rate} Hz${what}: WASM simd and scalar bit-identical to native scalar, sse4, avx2`, () => {
      const n = Math.round(SECONDS * rate);
      const input = testSignal(n, rate, 1000 + s, { extremes });
      const plan = makePlan({ seed: 77 + s, n, controls, samePartition: extremes });
      const native = {};
      for (const v of NATIVE_PARITY_VARIANTS) {
        native[v] = runNativePlan(f.path, rate, v, input, plan);
        assert.equal(native[v].error, null, `native ${v} refused the effect: ${native[v].error}`);
        assert.equal(native[v].variant, v);
      }
      const ref = native.scalar;
      const problems = [];
      for (const v of NATIVE_PARITY_VARIANTS.slice(1)) {
        const d = describeDiff(`native ${v}`, ref.output, native[v].output);
        if (d) problems.push(d);
      }
      for (const v of WASM_VARIANTS) {
        const fx = createEffect(bytes, rate, variant(v));
        const w = runWasm(fx, input, plan);
        fx.destroy();
        assert.equal(w.info.variant, v);
        const d = describeDiff(`wasm ${v}`, ref.output, w.output);
        if (d) problems.push(d);
        assert.deepEqual(w.statuses, ref.statuses, `wasm ${v}: the same setter calls are accepted and refused`);
        assert.equal(w.nonfinite, ref.nonfinite, `wasm ${v}: non-finite block count`);
        assert.equal(w.latency, ref.latency, `wasm ${v}: latency`);
        assert.deepEqual(withoutVariant(w.info), withoutVariant(ref.info), `wasm ${v}: info JSON`);
      }
      assert.deepEqual(problems, [], problems.join('\n'));
      // The run must have exercised something: output not all zeros, some
      // refusals and some accepted events, and (with extremes) the guard.
      assert.ok(ref.output.some((x) => x !== 0), 'output is not silent');
      assert.ok(ref.statuses.includes(true), 'some events were accepted');
      if (extremes) assert.ok(ref.nonfinite > 0, 'the non-finite input reached the guard');
      else assert.equal(ref.nonfinite, 0, 'finite input never trips the guard');
    });
  }
}
