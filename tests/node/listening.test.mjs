// Proves the header's claim that the listening-test functions give
// bit-identical results natively and in WebAssembly: earshot_loudness
// (ITU-R BS.1770-4) and earshot_anchor (ITU-R BS.1534-3 low-pass anchors) in
// both builds against libearshot.so, on stereo and mono clips, plus the
// refusals (status codes) for bad arguments.
import assert from 'node:assert/strict';
import { readFileSync, rmSync } from 'node:fs';
import { join } from 'node:path';
import { test } from 'node:test';

import { loadVariant } from '../../worklet/loader.js';
import { firstDifference, prng, readF32, runNative, variant, WASM_VARIANTS, WORK, writeF32 } from './env.mjs';

function clip(frames, channels, rate, seed) {
  const r = prng(seed);
  const x = new Float32Array(frames * channels);
  for (let i = 0; i < frames; i++) {
    for (let c = 0; c < channels; c++) {
      const env = i < frames / 3 ? 0.5 : i < (2 * frames) / 3 ? 0.05 : 0.2; // loud, quiet, middle
      x[i * channels + c] = env * (Math.sin((2 * Math.PI * (300 + 500 * c) * i) / rate) + 0.5 * (r() * 2 - 1));
    }
  }
  return x;
}

// Through the loader's methods (worklet/loader.js), as the page calls them; a
// refusal is an Error carrying the core's status code.
function statusOf(fn) {
  try {
    return { st: 0, value: fn() };
  } catch (e) {
    if (e.status === undefined) throw e;
    return { st: e.status };
  }
}

function wasmLoudness(V, x, channels, rate) {
  const r = statusOf(() => V.loudness(x, channels, rate));
  return r.st === 0 ? { st: 0, lkfs: r.value } : { st: r.st };
}

function wasmAnchor(V, x, channels, rate, pass) {
  const r = statusOf(() => V.anchor(x, channels, rate, pass));
  return r.st === 0 ? { st: 0, y: r.value } : { st: r.st };
}

let k = 0;
function nativeRun(mode, x, rest) {
  const path = join(WORK, `listen-${process.pid}-${k++}.f32`);
  writeF32(path, x);
  const out = join(WORK, `listen-${process.pid}-${k++}.f32`);
  const text = runNative([mode, path, ...rest.map(String), ...(mode === 'anchor' ? [out] : [])]).trim().split(' ');
  const res = { st: Number(text[1]) };
  if (mode === 'loudness') res.lkfs = text[3] === '-inf' ? -Infinity : Number(text[3]);
  if (mode === 'anchor' && res.st === 0) res.y = readF32(out);
  rmSync(path, { force: true });
  rmSync(out, { force: true });
  return res;
}

const cases = [
  { frames: 48000 * 3, channels: 2, rate: 48000 },
  { frames: 44100 * 2, channels: 1, rate: 44100 },
  { frames: 16000, channels: 5, rate: 32000 },
];

for (const v of WASM_VARIANTS) {
  test(`${v}: earshot_loudness equals native to the bit`, () => {
    const V = variant(v);
    for (const [i, c] of cases.entries()) {
      const x = clip(c.frames, c.channels, c.rate, 10 + i);
      const n = nativeRun('loudness', x, [c.channels, c.rate]);
      const w = wasmLoudness(V, x, c.channels, c.rate);
      assert.equal(n.st, 0);
      assert.equal(w.st, 0);
      // %.17g round-trips a double exactly.
      assert.ok(Object.is(w.lkfs, n.lkfs), `${JSON.stringify(c)}: wasm ${w.lkfs}, native ${n.lkfs}`);
      assert.ok(w.lkfs > -40 && w.lkfs < 0, `plausible loudness ${w.lkfs}`);
    }
    const silent = wasmLoudness(V, new Float32Array(48000), 1, 48000);
    assert.deepEqual(silent, { st: 0, lkfs: -Infinity });
    assert.deepEqual(nativeRun('loudness', new Float32Array(48000), [1, 48000]), { st: 0, lkfs: -Infinity });
    for (const [ch, rate] of [[40, 48000], [1, 1000]]) {
      const x = new Float32Array(ch * 100);
      assert.equal(wasmLoudness(V, x, ch, rate).st, nativeRun('loudness', x, [ch, rate]).st);
      assert.notEqual(wasmLoudness(V, x, ch, rate).st, 0);
    }
  });

  test(`${v}: earshot_anchor equals native to the bit`, () => {
    const V = variant(v);
    for (const [i, c] of cases.entries()) {
      for (const pass of [3500, 7000]) {
        const x = clip(Math.min(c.frames, 30000), c.channels, c.rate, 20 + i);
        const n = nativeRun('anchor', x, [c.channels, c.rate, pass]);
        const w = wasmAnchor(V, x, c.channels, c.rate, pass);
        assert.equal(n.st, 0);
        assert.equal(w.st, 0);
        const d = firstDifference(n.y, w.y);
        assert.equal(d, -1, `${JSON.stringify(c)} ${pass} Hz: first differing sample ${d}: native ${n.y[d]}, wasm ${w.y[d]}`);
        assert.ok(w.y.some((s) => s !== 0));
      }
    }
    const x = new Float32Array(1000);
    assert.equal(wasmAnchor(V, x, 1, 8000, 7000).st, nativeRun('anchor', x, [1, 8000, 7000]).st);
    assert.notEqual(wasmAnchor(V, x, 1, 8000, 7000).st, 0); // 9/7 · 7000 Hz is above 4 kHz Nyquist
  });
}

for (const v of WASM_VARIANTS) {
  test(`${v}: loudness matching through the loader scales by the core's gain, and a trap there is caught`, () => {
    const V = variant(v);
    const x = clip(48000, 2, 48000, 30);
    const before = V.loudness(x, 2, 48000);
    const { data, gainDb } = V.loudnessMatch(x, 2, 48000, -23);
    // The core multiplies every sample by one float gain 10^(gainDb/20) (earshot.h).
    const g = Math.fround(10 ** (gainDb / 20));
    assert.ok(Math.abs(gainDb - (-23 - before)) < 1e-9, `gain ${gainDb} dB for ${before} LKFS`);
    for (let i = 0; i < x.length; i += 997) assert.equal(data[i], Math.fround(x[i] * g), `sample ${i}`);
    assert.ok(Math.abs(V.loudness(data, 2, 48000) - -23) < 0.01);
    assert.throws(() => V.loudnessMatch(new Float32Array(4800), 1, 48000, -23), (e) => e.status !== undefined && /matching to -23 LKFS/.test(e.message));

    // A trap inside a listening function (simulated: the export throws the
    // RuntimeError a trap raises) marks the instance broken and is an Error
    // naming the function; the next call gets a fresh instance and the same answer.
    const fresh = loadVariant(V.module, { name: v });
    const real = fresh.exports;
    fresh.exports = { ...real, earshot_anchor: () => { throw new WebAssembly.RuntimeError('unreachable'); } };
    assert.throws(() => fresh.anchor(x, 2, 48000, 3500), /trapped in earshot_anchor/);
    assert.ok(fresh.broken);
    const y = fresh.anchor(x, 2, 48000, 3500);
    assert.equal(fresh.generation, 1);
    assert.notEqual(fresh.exports, real, 'a new instance has its own exports');
    assert.equal(firstDifference(y, V.anchor(x, 2, 48000, 3500)), -1);
  });
}

// The helpers the native comparisons rely on write and read float32 exactly.
test('the float32 file helpers round-trip', () => {
  const x = clip(100, 2, 48000, 1);
  const p = join(WORK, `rt-${process.pid}.f32`);
  writeF32(p, x);
  assert.equal(readFileSync(p).length, 800);
  assert.equal(firstDifference(readF32(p), x), -1);
  rmSync(p, { force: true });
});
