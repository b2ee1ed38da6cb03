// The soak's instruments inside the AudioWorkletGlobalScope (tools/soak.mjs
// loads this module before worklet/processor.js, into the same scope):
//
// - 'earshot-soak-signal': our own test input, one channel: exponential sine
//   sweeps, noise bursts and silences in a 10 s cycle, from a seeded PRNG, so
//   every run feeds the same samples.
// - a wrapper around the 'earshot-live' processor that processor.js
//   registers: it times each process() call, counts non-finite output samples
//   and the calls that ran longer than the render quantum's real-time budget,
//   and reads the WebAssembly memory of each processor's instance.
//
// The signal node's port answers { type: 'stats' } with the figures so far.
// This scope has no performance.now() in Chromium (docs/site.md, "Soak"):
// times come from Date.now(), in 1 ms steps.

const clock = globalThis.performance && typeof globalThis.performance.now === 'function'
  ? () => globalThis.performance.now()
  : () => Date.now();
const CLOCK = globalThis.performance && typeof globalThis.performance.now === 'function' ? 'performance.now' : 'Date.now';

const stats = {
  clock: CLOCK,
  calls: 0, // process() calls of 'earshot-live' processors
  frames: 0, // frames those calls produced
  busyMs: 0, // their summed duration
  overBudget: 0, // calls longer than frames / sampleRate
  maxMs: 0, // the longest call
  maxAtSecond: 0, // audio time of the longest call
  nonfinite: 0, // non-finite samples in their outputs
  peak: 0, // largest |output sample|
  // calls by measured duration: 0, 1, 2, 3, 4-7, 8-15, 16-63, 64+ ms
  histogram: [0, 0, 0, 0, 0, 0, 0, 0],
  created: 0, // processors constructed
  failed: 0, // processors whose effect did not start
};
// Per processor constructed: { ref, variant (WeakRefs), lastFrame, calls }.
const processors = [];

// The processors that ran in the latest render quantum and their instances'
// memory; the processors and instances not yet collected, and the memory
// those instances still hold.
function running() {
  let count = 0;
  let wasmBytes = 0;
  let alive = 0;
  let instances = 0;
  let heldBytes = 0;
  for (const p of processors) {
    const v = p.variant && p.variant.deref();
    if (v) {
      instances++;
      heldBytes += v.memoryBytes;
    }
    const proc = p.ref.deref();
    if (!proc) continue;
    alive++;
    if (p.lastFrame < currentFrame - 128) continue;
    count++;
    if (proc.fx && proc.fx.variant) wasmBytes += proc.fx.variant.memoryBytes;
  }
  return { running: count, alive, wasmBytes, instances, heldBytes };
}

function snapshot() {
  return { ...stats, histogram: stats.histogram.slice(), ...running(), seconds: currentFrame / sampleRate, sampleRate };
}

const register = globalThis.registerProcessor;
globalThis.registerProcessor = (name, Processor) => {
  if (name !== 'earshot-live') return register(name, Processor);
  class Timed extends Processor {
    constructor(options) {
      super(options);
      stats.created++;
      if (!this.fx) stats.failed++;
      this.soak = {
        ref: new WeakRef(this),
        variant: this.fx && this.fx.variant ? new WeakRef(this.fx.variant) : null,
        lastFrame: currentFrame,
        calls: 0,
      };
      processors.push(this.soak);
    }

    process(inputs, outputs) {
      const t0 = clock();
      const keep = super.process(inputs, outputs);
      const ms = clock() - t0;
      const out = outputs[0];
      const n = out && out.length ? out[0].length : 0;
      stats.calls++;
      stats.frames += n;
      stats.busyMs += ms;
      if (n && ms > (1000 * n) / sampleRate) stats.overBudget++;
      stats.histogram[ms < 4 ? Math.floor(ms) : ms < 8 ? 4 : ms < 16 ? 5 : ms < 64 ? 6 : 7]++;
      if (ms > stats.maxMs) {
        stats.maxMs = ms;
        stats.maxAtSecond = currentFrame / sampleRate;
      }
      let bad = 0;
      let peak = stats.peak;
      for (const ch of out || []) {
        for (let i = 0; i < ch.length; i++) {
          const v = ch[i];
          if (v !== v || v === Infinity || v === -Infinity) bad++;
          else if (v > peak) peak = v;
          else if (-v > peak) peak = -v;
        }
      }
      stats.nonfinite += bad;
      stats.peak = peak;
      this.soak.lastFrame = currentFrame;
      this.soak.calls++;
      return keep;
    }
  }
  return register(name, Timed);
};

// ---------------------------------------------------------------- signal

const CYCLE_S = 10;

class SoakSignal extends AudioWorkletProcessor {
  constructor() {
    super();
    this.n = 0; // frames produced
    this.phase = 0; // sweep phase, radians
    this.seed = 0x2545f491; // xorshift32 state
    this.port.onmessage = (e) => {
      if (e.data && e.data.type === 'stats') this.port.postMessage({ type: 'stats', id: e.data.id, stats: snapshot() });
    };
  }

  noise() {
    let s = this.seed;
    s ^= s << 13;
    s ^= s >>> 17;
    s ^= s << 5;
    this.seed = s >>> 0;
    return this.seed / 2147483648 - 1; // uniform in [-1, 1)
  }

  // One 10 s cycle: 0-4 s a sweep 20 Hz -> 20 kHz at 0.5, 4-4.5 s silence,
  // 4.5-8.5 s noise bursts (80 ms every 250 ms, peaks stepping up to 1.0)
  // over a quiet sweep back down, 8.5-10 s silence (state decays toward
  // subnormals, which WebAssembly does not flush).
  sample(t) {
    const c = t % CYCLE_S;
    const TAU = 2 * Math.PI;
    if (c < 4) {
      const f = 20 * Math.pow(1000, c / 4);
      this.phase = (this.phase + (TAU * f) / sampleRate) % TAU;
      const fade = Math.min(1, c / 0.01, (4 - c) / 0.01);
      return 0.5 * fade * Math.sin(this.phase);
    }
    if (c >= 4.5 && c < 8.5) {
      const u = c - 4.5;
      const f = 8000 * Math.pow(1 / 400, u / 4);
      this.phase = (this.phase + (TAU * f) / sampleRate) % TAU;
      const k = Math.floor(u / 0.25);
      const b = u - k * 0.25;
      const gate = b < 0.08 ? Math.min(1, b / 0.002, (0.08 - b) / 0.002) : 0;
      const level = 0.25 + 0.75 * ((k % 4) / 3);
      return 0.05 * Math.sin(this.phase) + gate * level * this.noise();
    }
    return 0;
  }

  process(inputs, outputs) {
    const out = outputs[0];
    const n = out[0].length;
    const y = out[0];
    for (let i = 0; i < n; i++) y[i] = this.sample((this.n + i) / sampleRate);
    this.n += n;
    for (let c = 1; c < out.length; c++) out[c].set(y);
    return true;
  }
}

registerProcessor('earshot-soak-signal', SoakSignal);
