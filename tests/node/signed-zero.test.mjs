// hardtanh at signed-zero bounds in both WebAssembly builds, against the
// definition of the core's min and max (dsp/core/simd.hpp): min(a, b) is
// select(a < b, a, b) and max(a, b) select(a > b, a, b), so an input of −0
// meeting a bound of +0 gives the bound, +0. The simd build computes them
// with f32x4.pmin/pmax, whose operands the other way round would give −0; the
// native variants are checked the same way in tests/native/layers/activation_test.cpp.
// The first effect (bounds ±1) shows that −0 reaches the output as −0, so
// the other two can fail.
import assert from 'node:assert/strict';
import { test } from 'node:test';

import { createEffect } from '../../worklet/loader.js';
import { variant, WASM_VARIANTS } from './env.mjs';
import { build } from './nfx.mjs';

function hardtanh(min, max) {
  const effect = {
    format: 'earshot-effect', version: 1, sample_rate: 48000, controls: [],
    credits: { title: `hardtanh ${min}..${max}` },
    graph: { inputs: ['audio'], input_skip: false, layers: [
      { type: 'activation', name: 'clip', channels: 1, fn: 'hardtanh', min, max },
    ] },
  };
  return build({ header: { __metadata__: {} }, data: Buffer.alloc(0), effect });
}

// [min, max, the output's bits for an input of −0]
const CASES = [[-1, 1, 0x80000000], [0, 1, 0], [-1, 0, 0]];

for (const name of WASM_VARIANTS) {
  test(`${name}: hardtanh at signed-zero bounds gives the bound`, () => {
    // −0 and +0 in every lane position of a vector and of the scalar tail.
    const x = new Float32Array(37).map((_, i) => (i % 3 ? -0 : 0));
    for (const [min, max, negOut] of CASES) {
      const fx = createEffect(hardtanh(min, max), 48000, variant(name));
      const y = new Float32Array(x.length);
      fx.process(x, y);
      fx.destroy();
      const bits = new Uint32Array(y.buffer);
      for (let i = 0; i < x.length; i++) {
        assert.equal(bits[i], i % 3 ? negOut : 0, `hardtanh ${min}..${max}, sample ${i}`);
      }
    }
  });
}
