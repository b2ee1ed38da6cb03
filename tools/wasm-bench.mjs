#!/usr/bin/env node
// WebAssembly speed, per model, in one run: WASM simd against native sse4
// (the same 128-bit width) and WASM simd against WASM scalar.
//
//   node tools/wasm-bench.mjs [--seconds 10] [--block 128] [--repeats 5] [FILE.nfx ...]
//   node tools/wasm-bench.mjs --channels 2 [--seconds 5] [--repeats 3] [FILE.nfx ...]
//   node tools/wasm-bench.mjs --against OLD-simd.wasm [FILE.nfx ...]
//
// With --channels C: a C-channel stream (Effect.processChannels, the
// channels in lockstep) against a mono stream, per channel, in WASM simd and
// scalar: rounds interleave mono and C channels in both builds, and the
// figure is channel-seconds per second of each, best round of each.
//
// With --against OLD.wasm: another simd build (e.g. of an earlier commit)
// joins every round, and the table gains its figure and new/old speed; its
// output must equal this build's bit for bit.
//
// Default models: build/bench-models/*.nfx (tools/make_bench_models.py, made
// when missing). Each figure is the best of --repeats runs over the same
// signal (rounds interleave native, simd and scalar), processed in blocks of --block samples (128 = one render quantum),
// at the model's own rate. Native timing comes from tests/node/native_run
// (libearshot.so through the C ABI, steady_clock around earshot_process); the
// WASM timing wraps Effect.process (worklet/loader.js), so it includes the
// copies in and out of wasm memory that a worklet pays too.
// Targets (docs/wasm.md): simd time ≤ 1.3 × native sse4; simd ≥ 3 × scalar on
// convolutional models, ≥ 2.5 × on recurrent ones.
import { execFileSync } from 'node:child_process';
import { existsSync, readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';

import { createEffect } from '../worklet/loader.js';
import { ROOT, runNative, variant } from '../tests/node/env.mjs';

const args = process.argv.slice(2);
const opt = (name, def) => {
  const i = args.indexOf(`--${name}`);
  if (i < 0) return def;
  const v = Number(args[i + 1]);
  args.splice(i, 2);
  if (!Number.isFinite(v) || v <= 0) throw new Error(`--${name} needs a positive number`);
  return v;
};
let AGAINST = null;
{
  const i = args.indexOf('--against');
  if (i >= 0) {
    if (!args[i + 1] || !existsSync(args[i + 1])) throw new Error('--against needs the path of a simd .wasm build');
    AGAINST = new WebAssembly.Module(readFileSync(args[i + 1]));
    args.splice(i, 2);
  }
}
const CHANNELS = Math.floor(opt('channels', 1));
if (AGAINST && CHANNELS > 1) throw new Error('--against times mono streams only; leave out --channels');
const SECONDS = opt('seconds', CHANNELS > 1 ? 5 : 10);
const BLOCK = Math.floor(opt('block', 128));
const REPEATS = Math.floor(opt('repeats', CHANNELS > 1 ? 3 : 5));

let files = args;
if (!files.length) {
  const dir = join(ROOT, 'build', 'bench-models');
  if (!existsSync(dir)) execFileSync('/usr/bin/python3', [join(ROOT, 'tools', 'make_bench_models.py'), dir], { stdio: 'ignore' });
  files = readdirSync(dir).filter((f) => f.endsWith('.nfx')).sort().map((f) => join(dir, f));
}

// The signal of native_run's bench mode, sample for sample: a 220 Hz
// triangle at 0.25 plus 0.01 of LCG noise (same integer and double arithmetic).
function signal(n) {
  const x = new Float32Array(n);
  let h = 12345;
  for (let i = 0; i < n; i++) {
    h = (Math.imul(h, 1664525) + 1013904223) >>> 0;
    const phase = (i % 48000) / 48000;
    const tri = 4 * Math.abs(phase * 220 - Math.floor(phase * 220 + 0.5)) - 1;
    x[i] = 0.25 * tri + 0.01 * ((h >>> 8) / 16777216 - 0.5);
  }
  return x;
}

// Block views made once, outside the timing: a worklet receives its arrays
// from the audio system, so per-block subarray garbage would be the bench's
// own cost, not the loader's.
function blocks(a) {
  const out = [];
  for (let off = 0; off < a.length; off += BLOCK) out.push(a.subarray(off, Math.min(a.length, off + BLOCK)));
  return out;
}

// One timed pass of the input blocks through fx (from a reset state); returns seconds.
function passWasm(fx, xb, yb) {
  fx.reset();
  const t0 = process.hrtime.bigint();
  for (let i = 0; i < xb.length; i++) fx.process(xb[i], yb[i]);
  return Number(process.hrtime.bigint() - t0) / 1e9;
}

// a and b (Float32Arrays of one length) hold the same bits.
function bitEqual(a, b) {
  const x = new Uint32Array(a.buffer, a.byteOffset, a.length);
  const y = new Uint32Array(b.buffer, b.byteOffset, b.length);
  for (let i = 0; i < x.length; i++) if (x[i] !== y[i]) return false;
  return x.length === y.length;
}

function checksum(y) {
  let sum = 0;
  for (const v of y) sum += v;
  return sum;
}

// One timed pass of C-channel input blocks (arrays of C views) through fx.
function passChannels(fx, xb, yb) {
  fx.reset();
  const t0 = process.hrtime.bigint();
  for (let i = 0; i < xb.length; i++) fx.processChannels(xb[i], yb[i]);
  return Number(process.hrtime.bigint() - t0) / 1e9;
}

// Per block, the C channels' views (made outside the timing).
function channelBlocks(chans) {
  const per = chans.map(blocks);
  return per[0].map((_, i) => per.map((b) => b[i]));
}

function benchChannels() {
  const C = CHANNELS;
  const rows = [];
  for (const file of files) {
    const bytes = readFileSync(file);
    const probe = createEffect(bytes, 48000, variant('scalar'));
    const rate = probe.info.model_rate;
    probe.destroy();
    const n = Math.round(SECONDS * rate);
    // Channel c: the bench signal scaled and inverted by channel, so no two are alike.
    const x = signal(n);
    const xs = Array.from({ length: C }, (_, c) => x.map((v) => v * (c % 2 ? -0.7 : 1) * (1 - 0.05 * c)));
    const row = { model: file.split('/').pop().replace(/\.nfx$/, '') };
    const fx = {};
    const io = {};
    for (const v of ['simd', 'scalar']) {
      fx[v] = { mono: createEffect(bytes, rate, variant(v)), multi: createEffect(bytes, rate, variant(v), { channels: C }) };
      const ys = Array.from({ length: C }, () => new Float32Array(n));
      const y1 = new Float32Array(n);
      io[v] = { xm: blocks(xs[0]), ym: blocks(y1), xc: channelBlocks(xs), yc: channelBlocks(ys), y1, ys };
      // Warm-up (untimed), as in the mono bench.
      const warm = Math.ceil(Math.min(n, rate) / BLOCK);
      passWasm(fx[v].mono, io[v].xm.slice(0, warm), io[v].ym.slice(0, warm));
      passChannels(fx[v].multi, io[v].xc.slice(0, warm), io[v].yc.slice(0, warm));
    }
    const best = { simd: { mono: Infinity, multi: Infinity }, scalar: { mono: Infinity, multi: Infinity } };
    for (let r = 0; r < REPEATS; r++) {
      for (const v of ['simd', 'scalar']) {
        best[v].mono = Math.min(best[v].mono, passWasm(fx[v].mono, io[v].xm, io[v].ym));
        best[v].multi = Math.min(best[v].multi, passChannels(fx[v].multi, io[v].xc, io[v].yc));
      }
    }
    let same = true;
    for (const v of ['simd', 'scalar']) {
      fx[v].mono.destroy();
      fx[v].multi.destroy();
      // Channel 0 of the stream is the mono stream's output, bit for bit.
      same = same && bitEqual(io[v].y1, io[v].ys[0]);
      row[v] = { mono: SECONDS / best[v].mono, perChannel: (C * SECONDS) / best[v].multi };
    }
    row.same = same && checksum(io.simd.y1) === checksum(io.scalar.y1);
    rows.push(row);
  }
  const fmt = (v, d = 1) => v.toFixed(d);
  const lines = [
    `WASM lockstep channels: ${C}-channel stream vs mono, ${SECONDS} s per channel at the model's rate, blocks of ${BLOCK}, ` +
    `best of ${REPEATS} interleaved rounds; node ${process.version}; × real time per channel (higher is faster)`,
    '',
    `| model | simd mono | simd ${C}-ch, per channel | simd gain | scalar mono | scalar ${C}-ch, per channel | scalar gain | channel 0 = mono |`,
    '|---|---:|---:|---:|---:|---:|---:|---|',
  ];
  for (const r of rows) {
    lines.push(`| ${r.model} | ${fmt(r.simd.mono)} | ${fmt(r.simd.perChannel)} | ${fmt(r.simd.perChannel / r.simd.mono, 2)}× | ` +
      `${fmt(r.scalar.mono)} | ${fmt(r.scalar.perChannel)} | ${fmt(r.scalar.perChannel / r.scalar.mono, 2)}× | ${r.same ? 'yes' : 'NO'} |`);
  }
  console.log(lines.join('\n'));
  if (rows.some((r) => !r.same)) process.exitCode = 1;
}

if (CHANNELS > 1) {
  benchChannels();
  process.exit();
}

const rows = [];
for (const file of files) {
  const bytes = readFileSync(file);
  const probe = createEffect(bytes, 48000, variant('scalar'));
  const rate = probe.info.model_rate;
  const recurrent = probe.info.recurrent;
  probe.destroy();
  const n = Math.round(SECONDS * rate);
  const x = signal(n);
  // Rounds interleave the three so that each sees the same machine load;
  // the best round of each counts.
  const kinds = AGAINST ? ['simd', 'scalar', 'against'] : ['simd', 'scalar'];
  const fx = { simd: createEffect(bytes, rate, variant('simd')), scalar: createEffect(bytes, rate, variant('scalar')) };
  if (AGAINST) fx.against = createEffect(bytes, rate, AGAINST);
  const y = Object.fromEntries(kinds.map((v) => [v, new Float32Array(n)]));
  const best = { native: Infinity, simd: Infinity, scalar: Infinity, against: Infinity };
  // Warm-up (untimed): V8 first runs wasm from its baseline compiler and
  // tiers up hot functions to the optimising one.
  const xb = blocks(x);
  const yb = Object.fromEntries(kinds.map((v) => [v, blocks(y[v])]));
  const warm = Math.ceil(Math.min(n, rate) / BLOCK);
  for (const v of kinds) passWasm(fx[v], xb.slice(0, warm), yb[v].slice(0, warm));
  let native = null;
  for (let r = 0; r < REPEATS; r++) {
    const out = runNative(['bench', file, String(rate), 'sse4', String(SECONDS), String(BLOCK), '1']);
    native = Object.fromEntries(out.trim().split('\n').map((l) => [l.slice(0, l.indexOf(' ')), l.slice(l.indexOf(' ') + 1)]));
    if (native.error) throw new Error(`${file}: ${native.error}`);
    best.native = Math.min(best.native, Number(native.seconds));
    for (const v of kinds) best[v] = Math.min(best[v], passWasm(fx[v], xb, yb[v]));
  }
  if (AGAINST) fx.against.destroy();
  const againstSame = !AGAINST || bitEqual(y.simd, y.against);
  const simd = { seconds: best.simd, checksum: checksum(y.simd), info: fx.simd.info };
  const scalar = { seconds: best.scalar, checksum: checksum(y.scalar) };
  fx.simd.destroy();
  fx.scalar.destroy();
  const nat = best.native;
  // Same input, bit-identical outputs: the checksums agree to the printed digits.
  const same = Number(native.checksum).toPrecision(9) === simd.checksum.toPrecision(9) &&
    simd.checksum === scalar.checksum;
  rows.push({
    model: file.split('/').pop().replace(/\.nfx$/, ''),
    kind: recurrent ? 'recurrent' : 'conv',
    macs: simd.info.macs_per_sample,
    nativeRt: SECONDS / nat,
    simdRt: SECONDS / simd.seconds,
    scalarRt: SECONDS / scalar.seconds,
    simdVsNative: simd.seconds / nat,
    simdVsScalar: scalar.seconds / simd.seconds,
    same,
    againstRt: SECONDS / best.against,
    againstSame,
  });
}

const fmt = (v, d = 1) => v.toFixed(d);
const lines = [
  `WASM benchmark: ${SECONDS} s of audio per model at its own rate, blocks of ${BLOCK}, best of ${REPEATS}; ` +
  `node ${process.version}; figures are × real time (higher is faster)`,
  '',
  '| model | kind | MACs/sample | native sse4 | WASM simd | WASM scalar | simd time / sse4 time (≤ 1.3) | simd speed-up over scalar (target) | outputs equal |',
  '|---|---|---:|---:|---:|---:|---:|---:|---|',
];
const misses = [];
for (const r of rows) {
  const target = r.kind === 'conv' ? 3 : 2.5;
  const okNative = r.simdVsNative <= 1.3;
  const okScalar = r.simdVsScalar >= target;
  if (!okNative) misses.push(`${r.model}: simd takes ${fmt(r.simdVsNative, 2)}× the native sse4 time (target ≤ 1.3)`);
  if (!okScalar) misses.push(`${r.model}: simd is ${fmt(r.simdVsScalar, 2)}× scalar (target ≥ ${target})`);
  lines.push(`| ${r.model} | ${r.kind} | ${r.macs} | ${fmt(r.nativeRt)} | ${fmt(r.simdRt)} | ${fmt(r.scalarRt)} | ` +
    `${fmt(r.simdVsNative, 2)}${okNative ? '' : ' ✗'} | ${fmt(r.simdVsScalar, 2)} (≥ ${target})${okScalar ? '' : ' ✗'} | ${r.same ? 'yes' : 'NO'} |`);
}
if (AGAINST) {
  lines.push('', 'Against the other simd build (same rounds):', '',
    '| model | other simd | this simd | this / other speed | outputs bit-equal |', '|---|---:|---:|---:|---|');
  for (const r of rows) {
    lines.push(`| ${r.model} | ${fmt(r.againstRt)} | ${fmt(r.simdRt)} | ${fmt(r.simdRt / r.againstRt, 2)} | ${r.againstSame ? 'yes' : 'NO'} |`);
  }
}
lines.push('', misses.length ? `Targets missed:\n- ${misses.join('\n- ')}` : 'All targets met.');
console.log(lines.join('\n'));
if (rows.some((r) => !r.same || !r.againstSame)) process.exitCode = 1;
