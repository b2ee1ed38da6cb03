// A parity run, described once and executed twice: natively through
// tests/node/native_run (C ABI of libearshot.so) and in WebAssembly through
// worklet/loader.js. Events (control, mix, gain, reset) happen at the same
// sample positions on both sides; the block partitions are drawn
// independently per side, so block-size invariance is exercised at the same time.
import { join } from 'node:path';
import { rmSync, writeFileSync } from 'node:fs';

import { createEffect } from '../../worklet/loader.js';
import { prng, readF32, runNative, variant, WORK, writeF32 } from './env.mjs';

// What a parity run needs to know of an effect file: its model rate, its
// controls, and a common host rate that makes the core resample.
export function effectFacts(bytes) {
  const probe = createEffect(bytes, 48000, variant('scalar'));
  const modelRate = probe.info.model_rate;
  const controls = probe.controls;
  probe.destroy();
  return { modelRate, controls, otherRate: modelRate === 44100 ? 48000 : 44100 };
}

// The test signal: a rising sine sweep, noise bursts, a loud section that
// drives every nonlinearity into saturation, exact zeros, and a decay into
// silence (so subnormal handling is on the path). `extremes` adds NaN and
// infinities (the non-finite guard must act the same on both sides).
export function testSignal(n, rate, seed, { extremes = false } = {}) {
  const r = prng(seed);
  const x = new Float32Array(n);
  let phase = 0;
  for (let i = 0; i < n; i++) {
    const f = 40 + (8000 * i) / n; // Hz
    phase += (2 * Math.PI * f) / rate;
    let v = 0.4 * Math.sin(phase);
    const seg = Math.floor((8 * i) / n);
    if (seg === 2) v += 0.3 * (r() * 2 - 1); // noise burst
    if (seg === 4) v *= 10; // loud: ±4
    if (seg === 5 && i % 1000 < 300) v = 0; // runs of exact zeros
    if (seg === 7) v *= Math.pow(1e-6, (8 * i) / n - 7) * 1e-30; // down through the subnormals
    x[i] = v;
  }
  if (extremes) {
    x[Math.floor(n * 0.3)] = NaN;
    x[Math.floor(n * 0.31)] = Infinity;
    x[Math.floor(n * 0.6)] = -Infinity;
  }
  return x;
}

// Block lengths covering [0, n) with cuts at every event position: a mix of
// single samples, render quanta, medium and very large blocks (up to maxBlock).
function partition(n, cuts, r, maxBlock) {
  const blocks = [];
  let pos = 0;
  for (const end of [...cuts, n]) {
    while (pos < end) {
      const u = r();
      let k;
      if (u < 0.15) k = 1 + Math.floor(r() * 8);
      else if (u < 0.4) k = 128;
      else if (u < 0.8) k = 1 + Math.floor(r() * 3000);
      else k = 1 + Math.floor(r() * maxBlock);
      k = Math.min(k, end - pos);
      blocks.push(k);
      pos += k;
    }
  }
  return blocks;
}

// controls: the effect's declared controls ({name, min, max}). About one value
// in eight is out of range or NaN, and must be refused identically.
// samePartition: both sides use the native partition (needed when the input
// holds non-finite values: the core silences the whole call that produced one,
// so the silenced span depends on the caller's blocks). extra: events that
// must happen ({ at, op, ... } as below), added to the random ones.
export function makePlan({ seed, n, controls, nativeMaxBlock = 65536, wasmMaxBlock = 150000, events = 24,
  samePartition = false, extra = [] }) {
  const r = prng(seed);
  const ev = [];
  for (let e = 0; e < events; e++) {
    const at = Math.floor(r() * n);
    const u = r();
    const bad = r() < 0.125;
    if (controls.length && u < 0.55) {
      const index = Math.floor(r() * controls.length);
      const c = controls[index];
      const value = bad ? (r() < 0.5 ? NaN : c.max + 1 + r()) : c.min + r() * (c.max - c.min);
      ev.push({ at, op: 'control', index, byName: r() < 0.5, value });
    } else if (u < 0.75) {
      ev.push({ at, op: 'mix', value: bad ? 1.5 : r() });
    } else if (u < 0.95) {
      ev.push({ at, op: 'gain', input: bad ? 30 : -24 + r() * 36, output: -12 + r() * 18 });
    } else {
      ev.push({ at, op: 'reset' });
    }
  }
  ev.push(...extra);
  ev.sort((a, b) => a.at - b.at);
  const cuts = [...new Set(ev.map((e) => e.at))].filter((p) => p > 0);
  return {
    n,
    events: ev,
    nativeBlocks: partition(n, cuts, prng(seed ^ 0x51ed), nativeMaxBlock),
    wasmBlocks: partition(n, cuts, prng(samePartition ? seed ^ 0x51ed : seed ^ 0xa5a5),
      samePartition ? nativeMaxBlock : wasmMaxBlock),
  };
}

// Runs the plan's blocks, applying each event once `at` samples have been
// processed. apply(event) returns true when the core accepted it.
function walk(plan, blocks, processBlock, apply) {
  const statuses = [];
  let pos = 0;
  let e = 0;
  const due = () => {
    while (e < plan.events.length && plan.events[e].at === pos) statuses.push(apply(plan.events[e++]));
  };
  for (const k of blocks) {
    due();
    processBlock(pos, k);
    pos += k;
  }
  due();
  return statuses;
}

// WebAssembly: returns { output, statuses, nonfinite, latency, info, messages }.
// blocks: the partition to use (default the plan's WebAssembly one).
export function runWasm(fx, input, plan, blocks = plan.wasmBlocks) {
  const output = new Float32Array(plan.n);
  return runEvents(fx, plan, blocks, output,
    (pos, k) => fx.process(input.subarray(pos, pos + k), output.subarray(pos, pos + k)));
}

// The same through a stream of several channels (Effect.processChannels):
// inputs, and the returned output, are one Float32Array per channel.
export function runWasmChannels(fx, inputs, plan, blocks = plan.wasmBlocks) {
  const output = inputs.map(() => new Float32Array(plan.n));
  return runEvents(fx, plan, blocks, output,
    (pos, k) => fx.processChannels(inputs.map((x) => x.subarray(pos, pos + k)), output.map((y) => y.subarray(pos, pos + k))));
}

function runEvents(fx, plan, blocks, output, processBlock) {
  const messages = [];
  const statuses = walk(plan, blocks, processBlock,
    (ev) => {
      try {
        if (ev.op === 'control') fx.setControl(ev.byName ? fx.controls[ev.index].name : ev.index, ev.value);
        else if (ev.op === 'mix') fx.setMix(ev.value);
        else if (ev.op === 'gain') fx.setGain(ev.input, ev.output);
        else fx.reset();
        return true;
      } catch (err) {
        messages.push(err.message);
        return false;
      }
    });
  return { output, statuses, messages, nonfinite: fx.nonFiniteCount, latency: fx.latency, info: fx.info };
}

let runs = 0;
// Native: the same plan as a native_run script. input: one Float32Array (a
// mono stream, earshot_process), or one per channel (a stream of that many
// channels, earshot_process_channels; the output is then one per channel too).
export function runNativePlan(effectPath, rate, variant, input, plan) {
  const planar = Array.isArray(input);
  const C = planar ? input.length : 1;
  const tag = `${process.pid}-${runs++}`;
  const inPath = join(WORK, `in-${tag}.f32`);
  const outPath = join(WORK, `out-${tag}.f32`);
  const scriptPath = join(WORK, `script-${tag}.txt`);
  writeF32(inPath, planar ? interleave(input) : input);
  const lines = [`create ${effectPath} ${rate} ${variant}${planar ? ` ${C}` : ''}`, `input ${inPath}`];
  const setters = [];
  walk(plan, plan.nativeBlocks, (pos, k) => lines.push(`process ${k}`), (ev) => {
    if (ev.op === 'control') lines.push(`control ${ev.index} ${ev.value}`);
    else if (ev.op === 'mix') lines.push(`mix ${ev.value}`);
    else if (ev.op === 'gain') lines.push(`gain ${ev.input} ${ev.output}`);
    else lines.push('reset');
    setters.push(ev.op === 'reset' ? 0 : lines.length);
    return true;
  });
  lines.push(`output ${outPath}`);
  writeFileSync(scriptPath, lines.join('\n') + '\n');
  let text;
  try {
    text = runNative(['script', scriptPath]);
  } finally {
    rmSync(inPath, { force: true });
    rmSync(scriptPath, { force: true });
  }
  const res = { statuses: [], codes: {}, nonfinite: NaN, latency: NaN, info: null, variant: '', error: null };
  for (const line of text.split('\n')) {
    const sp = line.indexOf(' ');
    const key = line.slice(0, sp);
    const val = line.slice(sp + 1);
    if (key === 'status') {
      const [ln, code] = val.split(' ').map(Number);
      res.codes[ln] = code;
    } else if (key === 'error') res.error = val;
    else if (key === 'variant') res.variant = val;
    else if (key === 'latency') res.latency = Number(val);
    else if (key === 'nonfinite') res.nonfinite = Number(val);
    else if (key === 'info') res.info = JSON.parse(val);
  }
  if (res.error) return res;
  res.statuses = setters.map((ln) => (ln === 0 ? true : res.codes[ln] === 0));
  res.output = planar ? deinterleave(readF32(outPath), C) : readF32(outPath);
  rmSync(outPath, { force: true });
  return res;
}

function interleave(channels) {
  const C = channels.length;
  const n = channels[0].length;
  const out = new Float32Array(n * C);
  for (let c = 0; c < C; c++) for (let t = 0; t < n; t++) out[t * C + c] = channels[c][t];
  return out;
}

function deinterleave(data, C) {
  const n = data.length / C;
  return Array.from({ length: C }, (_, c) => Float32Array.from({ length: n }, (_, t) => data[t * C + c]));
}
