// Proves the loader's streams of several channels (Effect.processChannels,
// AlignedRender over one such stream) in both WebAssembly builds: each
// channel of a 2- and a 3-channel stream is bit-identical to a mono stream fed
// that channel alone, with independent random block partitions and control,
// mix, gain and reset events at the same sample positions; the whole stream
// is bit-identical to the native core's own stream of as many channels
// (libearshot.so through earshot_process_channels, the reference outside the
// WebAssembly toolchain), the non-finite guard included; a stereo WAV through
// one 2-channel stream equals `earshot render` of that WAV (libsndfile reads
// and writes the files there); and bad arguments are refused with messages
// that name the value.
import assert from 'node:assert/strict';
import { execFileSync } from 'node:child_process';
import { existsSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { test } from 'node:test';

import { AlignedRender, CHUNK, createEffect, MAX_CHANNELS } from '../../worklet/loader.js';
import { encodeFloatWav, parseWav } from '../../web/js/wav.js';
import { effectFiles, firstDifference, prng, ROOT, runNative, variant, WASM_VARIANTS, WORK } from './env.mjs';
import { effectFacts, makePlan, runNativePlan, runWasm, runWasmChannels, testSignal } from './script.mjs';

const SECONDS = Number(process.env.EARSHOT_CHANNELS_SECONDS || 0.8);

// C different signals: the parity test signal (sweep, noise burst, loud
// section, exact zeros, decay through the subnormals), the same backwards,
// inverted and halved, and seeded noise over a 1 kHz tone.
function channelSignals(n, rate, seed, C) {
  const out = [testSignal(n, rate, seed)];
  if (C > 1) {
    const b = testSignal(n, rate, seed + 1);
    out.push(Float32Array.from({ length: n }, (_, i) => -0.5 * b[n - 1 - i]));
  }
  for (let c = 2; c < C; c++) {
    const r = prng(seed * 31 + c);
    out.push(Float32Array.from({ length: n }, (_, i) => 0.3 * (2 * r() - 1) + 0.2 * Math.sin((2 * Math.PI * 1000 * i) / rate)));
  }
  return out;
}

function bitsOf(x) {
  return `0x${new Uint32Array(new Float32Array([x]).buffer)[0].toString(16)}`;
}

function describeDiff(what, ref, got) {
  const i = firstDifference(ref, got);
  if (i < 0) return null;
  return `${what}: first differing sample ${i} of ${ref.length}: expected ${ref[i]} (${bitsOf(ref[i])}), got ${got[i]} (${bitsOf(got[i])})`;
}

// The info JSON apart from the variant's name (stream_bytes included: the
// core counts a channel's object as a fixed figure, the same natively and in
// 32-bit WebAssembly).
function comparableInfo(info) {
  const { variant: _v, ...rest } = info;
  return rest;
}

// A control moved to the middle of its range half-way through (when the
// effect has controls), besides the plan's random events.
function midwayControl(n, controls) {
  if (!controls.length) return [];
  const c = controls[0];
  return [{ at: Math.floor(n / 2), op: 'control', index: 0, byName: true, value: c.min + 0.37 * (c.max - c.min) }];
}

const files = effectFiles();
assert.ok(files.some((f) => f.name.startsWith('bundled/')), 'the bundled effects are in the set');

let seed = 500;
for (const f of files) {
  const bytes = readFileSync(f.path);
  const { modelRate, controls, otherRate: other } = effectFacts(bytes);
  // Two channels at the model's own rate; three through the resampler.
  for (const { C, rate } of [{ C: 2, rate: modelRate }, { C: 3, rate: other }]) {
    const s = seed++;
    test(`${f.name}, ${C} channels at ${rate} Hz: each channel equals a mono stream, and the stream equals native, in WASM simd and scalar`, () => {
      const n = Math.round(SECONDS * rate);
      const inputs = channelSignals(n, rate, 2000 + s, C);
      const plan = makePlan({ seed: 900 + s, n, controls, extra: midwayControl(n, controls) });
      const native = runNativePlan(f.path, rate, 'scalar', inputs, plan);
      assert.equal(native.error, null, `native refused the effect: ${native.error}`);
      const problems = [];
      for (const v of WASM_VARIANTS) {
        const fx = createEffect(bytes, rate, variant(v), { channels: C });
        assert.equal(fx.channels, C);
        assert.equal(fx.info.channels, C);
        // The WebAssembly partition (blocks up to 150 000 frames, so calls
        // longer than CHUNK are split) for the stream ...
        const multi = runWasmChannels(fx, inputs, plan);
        fx.destroy();
        assert.deepEqual(multi.statuses, native.statuses, `wasm ${v}: the same setter calls are accepted and refused as natively`);
        assert.equal(multi.nonfinite, 0, `wasm ${v}: finite input never trips the guard`);
        assert.equal(multi.latency, native.latency, `wasm ${v}: latency`);
        assert.deepEqual(comparableInfo(multi.info), comparableInfo(native.info), `wasm ${v}: info JSON`);
        for (let c = 0; c < C; c++) {
          const d = describeDiff(`wasm ${v} channel ${c} vs native ${C}-channel stream`, native.output[c], multi.output[c]);
          if (d) problems.push(d);
          // ... and the other partition for each mono stream.
          const mono = createEffect(bytes, rate, variant(v));
          const m = runWasm(mono, inputs[c], plan, plan.nativeBlocks);
          mono.destroy();
          assert.deepEqual(m.statuses, multi.statuses, `wasm ${v}: mono and ${C}-channel streams accept the same events`);
          assert.equal(m.latency, multi.latency, `wasm ${v}: mono and ${C}-channel latency`);
          const dm = describeDiff(`wasm ${v} channel ${c} vs a mono stream of it`, m.output, multi.output[c]);
          if (dm) problems.push(dm);
        }
      }
      assert.deepEqual(problems, [], problems.join('\n'));
      // The run exercised something: every channel sounds, the channels
      // differ, and events were accepted (the control change among them).
      for (let c = 0; c < C; c++) assert.ok(native.output[c].some((x) => x !== 0), `channel ${c} is not silent`);
      assert.notEqual(firstDifference(native.output[0], native.output[1]), -1, 'the channels differ');
      assert.ok(native.statuses.includes(true), 'some events were accepted');
      const mid = plan.events.findIndex((e) => e.op === 'control' && e.at === Math.floor(n / 2) && e.value === midwayControl(n, controls)[0]?.value);
      if (controls.length) assert.equal(native.statuses[mid], true, 'the mid-way control change was accepted');
    });
  }
}

// The non-finite guard: a NaN or an infinity in one channel silences every
// channel of that call and resets the stream, counted once; the same calls on
// both sides (the silenced span depends on the caller's blocks).
for (const f of files.filter((x) => x.name.startsWith('bundled/'))) {
  test(`${f.name}: non-finite input in one channel of a stereo stream: WASM simd and scalar equal native, guard included`, () => {
    const bytes = readFileSync(f.path);
    const rate = 44100;
    const n = Math.round(0.5 * rate);
    const inputs = channelSignals(n, rate, 77, 2);
    const bad = Math.floor(n * 0.4);
    inputs[1][bad] = NaN;
    inputs[0][Math.floor(n * 0.7)] = -Infinity;
    const plan = makePlan({ seed: 4242, n, controls: [], events: 6, samePartition: true });
    const native = runNativePlan(f.path, rate, 'scalar', inputs, plan);
    assert.equal(native.error, null);
    assert.equal(native.nonfinite, 2, 'two calls held non-finite input (each counted once for both channels)');
    // The call holding the NaN of channel 1 is silent in channel 0 too.
    let start = 0;
    for (const k of plan.nativeBlocks) {
      if (bad < start + k) break;
      start += k;
    }
    assert.ok(native.output[0].subarray(start, bad + 1).every((x) => x === 0), 'channel 0 silenced with channel 1');
    for (const v of WASM_VARIANTS) {
      const fx = createEffect(bytes, rate, variant(v), { channels: 2 });
      const w = runWasmChannels(fx, inputs, plan);
      fx.destroy();
      assert.equal(w.nonfinite, native.nonfinite, `wasm ${v}: non-finite count`);
      for (let c = 0; c < 2; c++) assert.equal(describeDiff(`wasm ${v} channel ${c}`, native.output[c], w.output[c]), null);
    }
  });
}

// A stereo WAV through one 2-channel stream (the offline Worker's render:
// AlignedRender, latency trimmed, tail flushed) against `earshot render` of
// the same WAV with the same controls, and against two mono streams (how the
// Worker rendered stereo before).
function earshotBin() {
  const p = process.env.EARSHOT_BIN || join(ROOT, 'build', 'native', 'earshot');
  if (!existsSync(p)) throw new Error(`${p} is missing: cmake --preset native && cmake --build --preset native -j2 (or set EARSHOT_BIN)`);
  return p;
}

for (const f of files.filter((x) => x.name.startsWith('bundled/'))) {
  test(`${f.name}: a stereo WAV through one 2-channel stream equals earshot render, in WASM simd and scalar`, async () => {
    const bytes = readFileSync(f.path);
    const rate = 44100;
    const frames = Math.round(0.9 * rate) + 17;
    const inputs = channelSignals(frames, rate, 31, 2).map((x) => x.map((v) => Math.max(-1, Math.min(1, v))));
    const probe = createEffect(bytes, rate, variant('scalar'));
    const settings = probe.controls.map((c) => [c.name, c.min + 0.71 * (c.max - c.min)]);
    probe.destroy();
    const tag = `${process.pid}-${f.name.replace(/\W/g, '_')}`;
    const inPath = join(WORK, `stereo-${tag}.wav`);
    const outPath = join(WORK, `stereo-${tag}-out.wav`);
    writeFileSync(inPath, new Uint8Array(await encodeFloatWav(inputs, rate).arrayBuffer()));
    let ref;
    try {
      execFileSync(earshotBin(), ['render', f.path, inPath, outPath, '--quiet', '--force', '--mix', '0.8', '--output-gain', '-2',
        ...settings.flatMap(([k, v]) => ['--control', `${k}=${v}`])], { stdio: ['ignore', 'ignore', 'inherit'] });
      const b = readFileSync(outPath);
      ref = await parseWav(b.buffer.slice(b.byteOffset, b.byteOffset + b.byteLength), outPath);
    } finally {
      rmSync(inPath, { force: true });
      rmSync(outPath, { force: true });
    }
    assert.equal(ref.channels.length, 2);
    assert.equal(ref.channels[0].length, frames);
    const setUp = (fx) => {
      for (const [k, v] of settings) fx.setControl(k, v);
      fx.setMix(0.8);
      fx.setGain(0, -2);
      fx.reset(); // as `earshot render`: start at the settings, unramped
      return fx;
    };
    for (const v of WASM_VARIANTS) {
      const V = variant(v);
      const stereo = setUp(V.createEffect(bytes, rate, { channels: 2 }));
      const monos = [0, 1].map(() => setUp(V.createEffect(bytes, rate)));
      for (const piece of [1 << 16, 4097]) {
        stereo.reset();
        for (const m of monos) m.reset();
        const a = new AlignedRender(stereo, frames, piece);
        const b = new AlignedRender(monos, frames, piece);
        for (const [from, to] of [[0, 20000], [20000, frames]]) {
          a.push(inputs.map((x) => x.subarray(from, to)));
          b.push(inputs.map((x) => x.subarray(from, to)));
        }
        const ya = a.finish();
        const yb = b.finish();
        for (let c = 0; c < 2; c++) {
          assert.equal(describeDiff(`wasm ${v} piece ${piece} channel ${c} vs earshot render`, ref.channels[c], ya[c]), null);
          assert.equal(describeDiff(`wasm ${v} piece ${piece} channel ${c}: one stereo stream vs two mono`, yb[c], ya[c]), null);
        }
      }
      assert.equal(stereo.nonFiniteCount, 0);
      stereo.destroy();
      for (const m of monos) m.destroy();
    }
    assert.ok(ref.channels[1].some((x) => x !== 0), 'the reference is not silent');
    assert.notEqual(firstDifference(ref.channels[0], ref.channels[1]), -1, 'left and right differ');
  });
}

const small = readFileSync(effectFiles({ include: ['generated'] }).find((f) => f.name === 'generated/tcn_film').path);

for (const v of WASM_VARIANTS) {
  test(`${v}: bad channel counts and mismatched arrays are refused with messages naming the value`, () => {
    const V = variant(v);
    for (const bad of [0, 9, -1, 2.5, NaN, '2', null]) {
      assert.throws(() => V.createEffect(small, 48000, { channels: bad }),
        (e) => e instanceof RangeError && e.message.includes(`channels must be a whole number from 1 to ${MAX_CHANNELS}, got ${bad === null ? 'null' : JSON.stringify(bad)}`),
        `channels ${String(bad)}`);
    }
    assert.throws(() => V.createEffect(small, 48000, 2), /options must be an object such as \{ channels: 2 \}, got number/);
    // The core's own refusal, through the raw export (the loader checks first):
    // the same words as natively (native_run, libearshot.so).
    const p = V.malloc(small.length);
    const err = V.malloc(1024);
    V.refresh();
    V.u8.set(small, p);
    for (const bad of [0, 9]) {
      V.u8[err] = 0;
      assert.equal(V.call('earshot_create_channels', p, small.length, 48000, 0, bad, 0, err, 1024), 0);
      const words = V.cString(err);
      assert.equal(words, `channel count ${bad} is outside 1..${MAX_CHANNELS}`);
      const script = join(WORK, `bad-channels-${process.pid}-${v}-${bad}.txt`);
      const fxPath = join(WORK, `bad-channels-${process.pid}-${v}.nfx`);
      writeFileSync(fxPath, small);
      writeFileSync(script, `create ${fxPath} 48000 - ${bad}\n`);
      try {
        assert.equal(runNative(['script', script]).trim(), `error ${words}`);
      } finally {
        rmSync(script, { force: true });
        rmSync(fxPath, { force: true });
      }
    }
    V.free(err);
    V.free(p);

    const fx = V.createEffect(small, 48000, { channels: 2 });
    const a = new Float32Array(64);
    const b = new Float32Array(64);
    assert.throws(() => fx.processChannels([a], [a]), /this effect has 2 channels but 1 input arrays were given/);
    assert.throws(() => fx.processChannels([a, b, a], [a, b, a]), /this effect has 2 channels but 3 input arrays were given/);
    assert.throws(() => fx.processChannels([a, b], [a]), /this effect has 2 channels but 1 output arrays were given/);
    assert.throws(() => fx.processChannels(null, [a, b]), /but null input arrays/);
    assert.throws(() => fx.processChannels([a, new Float32Array(63)], [a, b]), /input 1 has 63 samples but input 0 has 64/);
    assert.throws(() => fx.processChannels([a, b], [a, new Float32Array(65)]), /output 1 has 65 samples but the inputs have 64/);
    assert.throws(() => fx.process(a, b), /this effect has 2 channels; use processChannels/);
    // The core refuses earshot_process on a stream of two channels (raw export).
    assert.equal(V.call('earshot_process', fx.handle, fx.scratch, fx.scratch, 64), 0);
    // Nothing was harmed: the stream still runs, and a mono effect takes
    // processChannels with one array each.
    a.fill(0.25);
    b.fill(-0.25);
    fx.processChannels([a, b], [a, b]);
    assert.ok(a.every(Number.isFinite) && a.some((x) => x !== 0.25));
    const mono = V.createEffect(small, 48000);
    assert.equal(mono.channels, 1);
    const x = testSignal(1000, 48000, 3);
    const y1 = mono.processChannels([x], [new Float32Array(1000)])[0];
    mono.reset();
    const y2 = mono.process(x, new Float32Array(1000));
    assert.equal(firstDifference(y1, y2), -1);
    assert.throws(() => mono.processChannels([x, x], [y1, y2]), /this effect has 1 channel but 2 input arrays/);
    mono.destroy();
    fx.destroy();
    assert.throws(() => fx.processChannels([a, b], [a, b]), /destroyed/);
  });

  test(`${v}: ${MAX_CHANNELS} channels run; long calls are split at CHUNK as in process(); create/destroy leaves memory flat`, (t) => {
    const V = variant(v);
    const fx = V.createEffect(small, 44100, { channels: MAX_CHANNELS });
    const n = CHUNK + 4321;
    const xs = channelSignals(n, 44100, 5, MAX_CHANNELS);
    const ys = fx.processChannels(xs, xs.map(() => new Float32Array(n)));
    fx.destroy();
    for (let c = 0; c < MAX_CHANNELS; c++) {
      const m = V.createEffect(small, 44100);
      const y = m.process(xs[c], new Float32Array(n));
      m.destroy();
      assert.equal(describeDiff(`channel ${c} of ${MAX_CHANNELS}`, y, ys[c]), null);
    }
    const sizes = [];
    const x2 = [new Float32Array(300).fill(0.2), new Float32Array(300).fill(-0.1)];
    for (let i = 0; i < 400; i++) {
      const e = V.createEffect(small, 48000, { channels: 2 + (i % 2) });
      e.processChannels(e.channels === 2 ? x2 : [...x2, x2[0]], e.channels === 2 ? x2 : [...x2, x2[0]]);
      e.destroy();
      sizes.push(V.memoryBytes);
    }
    t.diagnostic(`memory after 1, 50, 400 cycles: ${sizes[0]}, ${sizes[49]}, ${sizes[399]} bytes`);
    assert.equal(sizes[399], sizes[49], 'memory grew after warm-up');
  });
}
