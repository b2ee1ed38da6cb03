// Proves worklet/loader.js's own behaviour: its UTF-8 coder agrees with the
// WHATWG Encoding Standard coder Node ships (TextEncoder/TextDecoder), it
// uses none of the APIs an AudioWorkletGlobalScope lacks, process() accepts
// any length (also across memory growth) and errors carry the core's words,
// and 1000 create/destroy cycles leave wasm memory flat.
import assert from 'node:assert/strict';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { test } from 'node:test';

import { AlignedRender, CHUNK, createEffect, loadVariant, utf8Decode, utf8Encode } from '../../worklet/loader.js';
import { effectFiles, firstDifference, prng, ROOT, variant, WASM_VARIANTS, wasmBytes } from './env.mjs';
import { build, parse } from './nfx.mjs';
import { testSignal } from './script.mjs';

const files = effectFiles({ include: ['generated'] });
const lstm = readFileSync(files.find((f) => f.name === 'generated/lstm16').path);
const tcn = readFileSync(files.find((f) => f.name === 'generated/tcn_film').path);

test('loader.js uses no API missing from AudioWorkletGlobalScope', () => {
  const src = readFileSync(join(ROOT, 'worklet', 'loader.js'), 'utf8').replace(/\/\/.*$/gm, '');
  for (const api of ['fetch', 'TextDecoder', 'TextEncoder', 'performance', 'atob', 'btoa', 'window', 'document', 'require', 'process.'])
    assert.ok(!new RegExp(`\\b${api.replace('.', '\\.')}`).test(src), `loader.js mentions ${api}`);
});

test('utf8Encode and utf8Decode agree with TextEncoder / TextDecoder', () => {
  const enc = new TextEncoder();
  const dec = new TextDecoder();
  const r = prng(5);
  const samples = ['', 'drive', 'Ωmega ≤ 10 dB', 'emoji 🎛️🎚', 'lone \ud800 surrogate', 'end \udc00', 'nul\0inside'];
  for (let k = 0; k < 300; k++) {
    let s = '';
    for (let i = 0; i < 20; i++) {
      const u = r();
      s += String.fromCharCode(u < 0.4 ? 32 + Math.floor(r() * 95) : u < 0.7 ? 0x80 + Math.floor(r() * 0x780)
        : u < 0.9 ? 0x800 + Math.floor(r() * 0xf7ff) : 0xd800 + Math.floor(r() * 0x800));
    }
    samples.push(s);
  }
  for (const s of samples) {
    const ref = enc.encode(s);
    const buf = new Uint8Array(ref.length + 4);
    assert.equal(utf8Encode(s, buf), ref.length, JSON.stringify(s));
    assert.deepEqual(buf.subarray(0, ref.length), ref, JSON.stringify(s));
    assert.equal(utf8Decode(ref), dec.decode(ref));
  }
  // Malformed input: each case decodes as TextDecoder (replacement characters) does.
  const bad = [[0x80], [0xc0, 0xaf], [0xe0, 0x80, 0xaf], [0xed, 0xa0, 0x80], [0xf4, 0x90, 0x80, 0x80], [0xf0, 0x9f, 0x8e],
    [0xe2, 0x82], [0xff, 0x41], [0xc2], [0x41, 0xf0, 0x9f, 0x8e, 0x9b, 0xe2]];
  for (let k = 0; k < 2000; k++) bad.push(Array.from({ length: 1 + Math.floor(r() * 8) }, () => Math.floor(r() * 256)));
  for (const b of bad) assert.equal(utf8Decode(new Uint8Array(b)), dec.decode(new Uint8Array(b)), b.join(','));
  // No write past the end of a short buffer; the needed length is still returned.
  const small = new Uint8Array(3);
  assert.equal(utf8Encode('añb€', small), 7);
  assert.deepEqual([...small], [0x61, 0xc3, 0xb1]);
});

for (const v of WASM_VARIANTS) {
  test(`${v}: process() gives the same samples for any length, in place or not, across memory growth`, () => {
    const n = 3 * CHUNK + 1234;
    const x = testSignal(n, 48000, 9);
    const one = createEffect(lstm, 48000, variant(v));
    const ref = one.process(x, new Float32Array(n)); // one call, split into CHUNK-sized core calls
    one.destroy();

    const V = variant(v);
    const fx = createEffect(lstm, 48000, V);
    const out = new Float32Array(n);
    const r = prng(3);
    const before = V.memory.buffer;
    let grew = false;
    for (let pos = 0; pos < n;) {
      const k = Math.min(n - pos, r() < 0.3 ? 1 + Math.floor(r() * 5) : 1 + Math.floor(r() * 20000));
      const io = out.subarray(pos, pos + k);
      io.set(x.subarray(pos, pos + k));
      fx.process(io, io); // in place
      pos += k;
      if (!grew && pos > n / 2) {
        // Make another effect with 1 M parameters (the channel limit is
        // 1024): memory must grow, and the running effect must keep working
        // through new views.
        const f = parse(lstm);
        const W = 1024;
        const big = new Float32Array(W * W).fill(0.001);
        const eff = {
          format: 'earshot-effect', version: 1, sample_rate: 48000, controls: [], credits: { title: 'big' },
          graph: { inputs: ['audio'], layers: [
            { type: 'linear', name: 'a', in: 1, out: W, bias: false },
            { type: 'linear', name: 'b', in: W, out: W, bias: false },
            { type: 'linear', name: 'c', in: W, out: 1, bias: false }] },
        };
        const data = Buffer.concat([Buffer.alloc(W * 4), Buffer.from(big.buffer), Buffer.alloc(W * 4)]);
        const header = {
          'a.weight': { dtype: 'F32', shape: [W, 1], data_offsets: [0, W * 4] },
          'b.weight': { dtype: 'F32', shape: [W, W], data_offsets: [W * 4, W * 4 + big.byteLength] },
          'c.weight': { dtype: 'F32', shape: [1, W], data_offsets: [W * 4 + big.byteLength, W * 8 + big.byteLength] },
          __metadata__: f.header.__metadata__,
        };
        const other = createEffect(build({ header, data, effect: eff }), 48000, V);
        other.destroy();
        grew = V.memory.buffer !== before;
      }
    }
    assert.ok(grew, 'memory grew during the run');
    const d = firstDifference(ref, out);
    assert.equal(d, -1, `first differing sample ${d}`);
    fx.destroy();
  });

  test(`${v}: setters refuse bad values with the core's words and leave the stream running`, () => {
    const fx = createEffect(tcn, 48000, variant(v));
    const V = fx.variant;
    assert.deepEqual(fx.controls.map((c) => c.name), ['drive', 'tone', 'level']);
    assert.throws(() => fx.setControl('tone', 13), new RegExp(`tone.*${V.statusText(-4)}`));
    assert.throws(() => fx.setControl(1, NaN), new RegExp(V.statusText(-3)));
    assert.throws(() => fx.setControl(7, 0), new RegExp(V.statusText(-2)));
    assert.throws(() => fx.setControl('gain', 0), /no control named 'gain' \(controls: drive, tone, level\)/);
    assert.throws(() => fx.setControl(1.5, 0), TypeError);
    assert.throws(() => fx.setMix(2), new RegExp(V.statusText(-4)));
    assert.throws(() => fx.setGain(0, 30), new RegExp(V.statusText(-4)));
    assert.throws(() => fx.process(new Float32Array(4), new Float32Array(5)), RangeError);
    assert.match(V.statusText(-4), /range/);
    fx.setControl('tone', -3);
    assert.equal(fx.getControl('tone'), -3);
    const y = fx.process(new Float32Array(512).fill(0.1), new Float32Array(512));
    assert.ok(y.every(Number.isFinite));
    assert.equal(fx.nonFiniteCount, 0);
    assert.equal(typeof fx.info.effect, 'object');
    fx.destroy();
    fx.destroy(); // twice is harmless
    assert.throws(() => fx.process(new Float32Array(1), new Float32Array(1)), /destroyed/);
  });

  test(`${v}: 1000 create/destroy cycles (with refused loads) leave memory flat`, (t) => {
    const V = variant(v);
    const broken = build({ ...parse(lstm), effect: { ...parse(lstm).effect, version: 9 } });
    const x = new Float32Array(300).fill(0.2);
    const y = new Float32Array(300);
    const sizes = [];
    for (let i = 0; i < 1000; i++) {
      const fx = createEffect(i % 2 ? tcn : lstm, 44100, V);
      fx.setControl(0, 0.3);
      fx.process(x, y);
      fx.destroy();
      assert.throws(() => createEffect(broken, 48000, V), /too new/);
      sizes.push(V.memoryBytes);
    }
    // Warm-up: the allocator settles within the first cycles; after that no growth at all.
    const settled = sizes[49];
    t.diagnostic(`memory after 1, 50, 1000 cycles: ${sizes[0]}, ${settled}, ${sizes[999]} bytes`);
    assert.equal(sizes[999], settled, 'memory grew after warm-up');
    // And a fresh effect still gets its memory at the same place as before (no creeping fragmentation).
    const p1 = V.malloc(1 << 20);
    V.free(p1);
    for (let i = 0; i < 50; i++) createEffect(lstm, 44100, V).destroy();
    const p2 = V.malloc(1 << 20);
    V.free(p2);
    assert.equal(p2, p1);
  });
}

test('a variant from a compiled Module and from bytes behave alike; bytes are not kept', () => {
  const bytes = new Uint8Array(wasmBytes('simd'));
  const a = loadVariant(bytes);
  const b = loadVariant(new WebAssembly.Module(bytes));
  bytes.fill(0); // the caller may reuse its buffer
  const fa = createEffect(lstm, 48000, a);
  const fb = createEffect(lstm, 48000, b);
  assert.equal(a.name, 'simd'); // learnt from the first effect
  const x = testSignal(1000, 48000, 4);
  assert.equal(firstDifference(fa.process(x, new Float32Array(1000)), fb.process(x, new Float32Array(1000))), -1);
  assert.throws(() => loadVariant(new Uint8Array([0, 97, 115, 109, 1, 0, 0, 0])), /not an earshot WebAssembly build/);
  assert.throws(() => createEffect('not bytes', 48000, a), TypeError);
});

// AlignedRender against the definition it implements (the output of
// `earshot render`, docs/cli.md "Latency"): the whole input followed by
// `latency` zeros, processed in one call, with the first `latency` samples
// dropped. At 44.1 kHz the 48 kHz model runs behind the core's resampler, so
// the latency is not zero; a bit-identical match for any piece size follows
// from the core's block-partition invariance.
for (const v of WASM_VARIANTS) {
  test(`${v}: AlignedRender equals process(input + latency zeros) minus the first latency samples`, () => {
    const V = variant(v);
    const r = prng(11);
    const frames = 70001;
    const x = [0, 1].map(() => Float32Array.from({ length: frames }, () => 0.5 * (2 * r() - 1)));
    const want = x.map((xc) => {
      const fx = V.createEffect(lstm, 44100);
      const lat = fx.latency;
      const input = new Float32Array(frames + lat);
      input.set(xc);
      const y = new Float32Array(input.length);
      fx.process(input, y);
      fx.destroy();
      return { lat, y: y.subarray(lat) };
    });
    assert.ok(want[0].lat > 0, 'the resampled stream has latency');
    for (const piece of [CHUNK, 4096, 999]) {
      const fxs = x.map(() => V.createEffect(lstm, 44100));
      const ar = new AlignedRender(fxs, frames, piece);
      ar.push(x.map((xc) => xc.subarray(0, 30000)));
      ar.push(x.map((xc) => xc.subarray(30000)));
      const out = ar.finish();
      assert.equal(ar.done, frames + want[0].lat);
      for (let c = 0; c < 2; c++) {
        assert.equal(out[c].length, frames);
        assert.equal(firstDifference(out[c], want[c].y), -1, `piece ${piece}, channel ${c}`);
      }
      assert.throws(() => ar.push(x.map((xc) => xc.subarray(0, 1))), /more than 70001 frames/);
      for (const fx of fxs) fx.destroy();
    }
  });
}
