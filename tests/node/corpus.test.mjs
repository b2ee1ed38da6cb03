// The conformance corpus (tests/data/effects/README.md) in both WebAssembly
// builds, through worklet/loader.js: every valid file gives the golden
// description JSON (earshot_info without the variant) and the golden FNV-1a 64
// hash of its output for the standard test signal (signal.f32, checked against
// dsp/cli/test_signal.hpp by the Catch2 corpus test); every invalid file is
// refused with the golden message, and the instance stays usable after it.
import assert from 'node:assert/strict';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { test } from 'node:test';

import { createEffect } from '../../worklet/loader.js';
import { ROOT, variant, WASM_VARIANTS } from './env.mjs';

const DIR = join(ROOT, 'tests', 'data', 'effects');
const index = JSON.parse(readFileSync(join(DIR, 'index.json'), 'utf8'));
const expected = JSON.parse(readFileSync(join(DIR, 'expected.json'), 'utf8'));
const sig = readFileSync(join(DIR, 'signal.f32'));
const signal = new Float32Array(sig.buffer.slice(sig.byteOffset, sig.byteOffset + sig.length));

// FNV-1a 64 (offset basis 14695981039346656037, prime 1099511628211; the FNV
// reference, draft-eastlake-fnv) over the little-endian float32 bytes, as
// dsp/cli/test_signal.hpp's fnv1a64.
function fnv1a64(f32) {
  const bytes = new Uint8Array(f32.buffer, f32.byteOffset, f32.byteLength);
  const mask = (1n << 64n) - 1n;
  let h = 14695981039346656037n;
  for (const b of bytes) h = ((h ^ BigInt(b)) * 1099511628211n) & mask;
  return h.toString(16).padStart(16, '0');
}

test('the FNV-1a 64 of the FNV reference test vectors', () => {
  // draft-eastlake-fnv, FNV-1a 64: "" -> cbf29ce484222325, "a" -> af63dc4c8601ec8c (recalled from memory).
  const h = (s) => {
    const mask = (1n << 64n) - 1n;
    let x = 14695981039346656037n;
    for (const b of Buffer.from(s)) x = ((x ^ BigInt(b)) * 1099511628211n) & mask;
    return x.toString(16).padStart(16, '0');
  };
  assert.equal(h(''), 'cbf29ce484222325');
  assert.equal(h('a'), 'af63dc4c8601ec8c');
  assert.equal(fnv1a64(new Float32Array(0)), 'cbf29ce484222325');
});

for (const name of WASM_VARIANTS) {
  test(`corpus in the ${name} build: valid files give the golden description and hash`, () => {
    const v = variant(name);
    assert.ok(index.valid.length >= 50);
    for (const { file } of index.valid) {
      const want = expected[file];
      const fx = createEffect(readFileSync(join(DIR, file)), want.description.model_rate, v);
      try {
        const info = { ...fx.info };
        delete info.variant;
        assert.deepStrictEqual(info, want.description, file);
        const y = new Float32Array(signal.length);
        fx.process(signal, y);
        assert.equal(fnv1a64(y), want.hash, file);
      } finally {
        fx.destroy();
      }
    }
  });

  test(`corpus in the ${name} build: invalid files are refused with the golden message`, () => {
    const v = variant(name);
    const good = readFileSync(join(DIR, index.valid[0].file));
    assert.ok(index.invalid.length >= 90);
    for (const { file, names } of index.invalid) {
      const want = expected[file].error;
      assert.throws(() => createEffect(readFileSync(join(DIR, file)), 48000, v),
        (e) => e.message === want && e.message.includes(names), file);
      // The instance is intact: a good file still loads and runs.
      const fx = createEffect(good, 48000, v);
      fx.process(signal.subarray(0, 64), new Float32Array(64));
      fx.destroy();
    }
  });
}
