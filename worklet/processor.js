// The AudioWorkletProcessors of the page and the embed:
// 'earshot-live', one effect stream of the input's channels at the device
// rate (the core resamples to the model rate and back), then the output
// guard; and
// 'earshot-guard', the output guard alone, for playback of rendered audio
// (web/embed.js). The output guard is the listening level and an always-on
// limiter at -1 dBFS: every path these modules give to the speakers passes it.
//
// 'earshot-live' processorOptions: { wasm: ArrayBuffer (the build's bytes),
// variant: 'simd' | 'scalar', effect: ArrayBuffer (the effect file), settings,
// levelDb, channels }
//   settings: { controls: { name: value }, mix: 0..1, inputDb, outputDb, bypass }
//   channels: 1 (default) or 2, the node's input channel count: a stereo
//     input runs through one 2-channel stream (left and right in lockstep,
//     each as a mono stream would give it), a mono input through a mono one.
// The module compiles synchronously here (the page passes bytes: this scope
// has no fetch); everything is allocated before audio starts. A mono stream's
// signal goes to every output channel; a stereo stream's left and right go to
// outputs 0 and 1 (any further outputs repeat the last).
//
// Port messages in:  { type: 'settings', settings } · { type: 'level', db }
//                    { type: 'record', seconds } (restarts the stream's state,
//                      then captures its input and output, before level and limiter;
//                      'recorded' carries one Float32Array per channel of each)
//                    { type: 'stop' } (frees the effect; process() then returns
//                      false, so the browser stops calling it: a disconnected
//                      node whose process() returns true goes on being called
//                      in Chromium, and its instance is never collected)
// Port messages out: { type: 'ready', ... } · { type: 'error', message, fatal }
//                    { type: 'meters', ... } every ~50 ms · { type: 'recorded', ... }
//
// 'earshot-guard' processorOptions: { levelDb }. Input channels go to the
// same output channels (one shared limiter gain, so the stereo image holds).
// Port messages in: { type: 'level', db } · { type: 'stop' }.
import { loadVariant } from './loader.js';

const LIMIT_CEILING = 0.8912509381337456; // −1 dBFS = 10^(−1/20)
const LIMIT_RELEASE_S = 0.15; // time constant of the limiter's recovery
const LEVEL_GLIDE_S = 0.02; // time constant of listening-level changes
const METER_S = 0.05; // meter message interval
const LOAD_S = 1.0; // window of the time-budget figure and of the late-render check
const LATE_MS = 5; // growth, from one window to the next, of the audio clock's lag behind the wall clock that counts as a late render
const LEVEL_START_DB = -30; // the listening level when none is given: output starts quiet
const MAX_LIVE_CHANNELS = 2; // mono or stereo input

// This scope lacks performance.now() in Chromium; Date.now() has 1 ms steps,
// which over many render quanta still averages to the true busy time.
const now = globalThis.performance && typeof globalThis.performance.now === 'function'
  ? () => globalThis.performance.now()
  : () => Date.now();

// Listening level, then the limiter: the level glides to its target, the
// limiter attacks instantly to the ceiling and recovers exponentially. All
// channels share the gain. limMin and outPeak are kept for the meters.
class OutputGuard {
  constructor(levelDb) {
    this.levelTarget = Math.pow(10, (Number.isFinite(levelDb) ? levelDb : LEVEL_START_DB) / 20);
    this.level = this.levelTarget;
    this.levelGlide = 1 - Math.exp(-1 / (LEVEL_GLIDE_S * sampleRate));
    this.limGain = 1;
    this.limRelease = 1 - Math.exp(-1 / (LIMIT_RELEASE_S * sampleRate));
    this.outPeak = 0;
    this.limMin = 1;
  }

  setLevel(db) {
    if (Number.isFinite(db)) this.levelTarget = Math.pow(10, db / 20);
  }

  // outs: Float32Arrays written (n samples each); ins: at least as many,
  // read (those past outs.length are ignored).
  run(ins, outs, n) {
    const C = outs.length;
    let level = this.level;
    let g = this.limGain;
    let outPeak = this.outPeak;
    let limMin = this.limMin;
    for (let i = 0; i < n; i++) {
      level += (this.levelTarget - level) * this.levelGlide;
      let a = 0;
      for (let c = 0; c < C; c++) {
        const v = ins[c][i] * level;
        const m = v < 0 ? -v : v;
        if (m > a) a = m;
      }
      if (a * g > LIMIT_CEILING) g = LIMIT_CEILING / a;
      if (g < limMin) limMin = g;
      for (let c = 0; c < C; c++) {
        const w = ins[c][i] * level * g;
        outs[c][i] = w;
        const aw = w < 0 ? -w : w;
        if (aw > outPeak) outPeak = aw;
      }
      g += (1 - g) * this.limRelease;
    }
    this.level = level;
    this.limGain = g;
    this.outPeak = outPeak;
    this.limMin = limMin;
  }
}

class EarshotLive extends AudioWorkletProcessor {
  constructor(options) {
    super();
    const o = (options && options.processorOptions) || {};
    this.fx = null;
    this.size = 0;
    this.channels = 1;
    this.inBufs = []; // per channel: the input of the current call
    this.outBufs = []; // per channel: the effect's output, before level and limiter
    this.guardOut = []; // the output arrays of the current call, reused (no allocation per call)
    this.guard = new OutputGuard(o.levelDb);
    this.meterFrames = Math.round(METER_S * sampleRate);
    this.loadFrames = Math.round(LOAD_S * sampleRate);
    this.resetMeters();
    this.busyMs = 0;
    this.loadCount = 0;
    this.load = 0;
    this.loadPeak = 0;
    this.late = 0;
    this.lagRef = null;
    this.lagMin = Infinity;
    this.wall0 = 0;
    this.frames = 0;
    this.record = null;
    this.stopped = false;
    this.port.onmessage = (e) => this.onMessage(e.data);
    try {
      const channels = o.channels === undefined ? 1 : o.channels;
      if (!Number.isInteger(channels) || channels < 1 || channels > MAX_LIVE_CHANNELS)
        throw new RangeError(`live input takes 1 or 2 channels, got channels ${JSON.stringify(channels)}`);
      this.channels = channels;
      const variant = loadVariant(o.wasm, { name: o.variant });
      this.fx = variant.createEffect(o.effect, sampleRate, { channels });
      if (o.settings) this.apply(o.settings, true);
      this.port.postMessage({
        type: 'ready',
        variant: this.fx.variantName,
        latency: this.fx.latency,
        sampleRate,
        modelRate: this.fx.info.model_rate,
        title: this.fx.info.title,
        channels,
      });
    } catch (e) {
      if (this.fx) this.fx.destroy();
      this.fx = null;
      this.port.postMessage({ type: 'error', fatal: true, message: e && e.message ? e.message : String(e) });
    }
  }

  resetMeters() {
    this.meterCount = 0;
    this.inPeak = 0;
    this.guard.outPeak = 0;
    this.guard.limMin = 1;
  }

  // Applies settings; a refused value is reported and the stream keeps its old one.
  apply(s, start) {
    const errors = [];
    const attempt = (f) => {
      try {
        f();
      } catch (e) {
        errors.push(e.message);
      }
    };
    for (const [name, value] of Object.entries(s.controls || {})) attempt(() => this.fx.setControl(name, value));
    attempt(() => this.fx.setMix(s.bypass ? 0 : s.mix));
    attempt(() => this.fx.setGain(s.inputDb, s.outputDb));
    if (start) this.fx.reset();
    if (errors.length) this.port.postMessage({ type: 'error', fatal: false, message: errors.join('; ') });
  }

  onMessage(m) {
    if (m && m.type === 'stop') {
      this.stopped = true;
      this.record = null;
      if (this.fx) this.fx.destroy();
      this.fx = null;
      return;
    }
    if (!m || !this.fx) return;
    if (m.type === 'settings') this.apply(m.settings, false);
    else if (m.type === 'level') this.guard.setLevel(m.db);
    else if (m.type === 'record') {
      const n = Math.max(1, Math.round(m.seconds * sampleRate));
      const bufs = () => Array.from({ length: this.channels }, () => new Float32Array(n));
      this.record = { input: bufs(), output: bufs(), length: n, at: 0, pending: true };
    }
  }

  ensure(n) {
    if (n === this.size) return;
    this.size = n;
    this.inBufs = Array.from({ length: this.channels }, () => new Float32Array(n));
    this.outBufs = Array.from({ length: this.channels }, () => new Float32Array(n));
  }

  process(inputs, outputs) {
    if (this.stopped) return false;
    const out = outputs[0];
    if (!out || out.length === 0) return true;
    const n = out[0].length;
    if (!this.fx) {
      for (const ch of out) ch.fill(0);
      return true;
    }
    this.ensure(n);
    const C = this.channels;
    // The node's explicit channel count makes the browser mix its input to C
    // channels; with nothing connected the input has none (silence).
    const x = inputs[0] || [];
    for (let c = 0; c < C; c++) {
      const xc = x.length ? x[c < x.length ? c : x.length - 1] : null;
      if (xc && xc.length === n) this.inBufs[c].set(xc);
      else this.inBufs[c].fill(0);
    }

    const rec = this.record;
    if (rec && rec.pending) {
      this.fx.reset();
      rec.pending = false;
    }
    const t0 = now();
    if (C === 1) this.fx.process(this.inBufs[0], this.outBufs[0]);
    else this.fx.processChannels(this.inBufs, this.outBufs);
    this.busyMs += now() - t0;

    if (rec) {
      const k = Math.min(n, rec.length - rec.at);
      for (let c = 0; c < C; c++) {
        rec.input[c].set(this.inBufs[c].subarray(0, k), rec.at);
        rec.output[c].set(this.outBufs[c].subarray(0, k), rec.at);
      }
      rec.at += k;
      if (rec.at >= rec.length) {
        this.port.postMessage({ type: 'recorded', rate: sampleRate, input: rec.input, output: rec.output },
          [...rec.input, ...rec.output].map((a) => a.buffer));
        this.record = null;
      }
    }

    let inPeak = this.inPeak;
    for (let c = 0; c < C; c++) {
      const xb = this.inBufs[c];
      for (let i = 0; i < n; i++) {
        const xi = xb[i];
        if (xi > inPeak) inPeak = xi;
        else if (-xi > inPeak) inPeak = -xi;
      }
    }
    this.inPeak = inPeak;
    // Level and limiter over the stream's channels (one shared gain, so a
    // stereo image holds); output channels past them repeat the last.
    const G = C < out.length ? C : out.length;
    const outs = this.guardOut;
    const ins = this.outBufs;
    outs.length = G;
    for (let c = 0; c < G; c++) outs[c] = out[c];
    this.guard.run(ins, outs, n);
    for (let c = G; c < out.length; c++) out[c].set(out[G - 1]);

    this.track(n);
    return true;
  }

  // Meters, time-budget share and late renders (the audio clock falling
  // behind the wall clock means the device played something we did not make).
  track(n) {
    const wall = Date.now();
    if (this.frames === 0) this.wall0 = wall;
    this.frames += n;
    const lag = wall - this.wall0 - (this.frames / sampleRate) * 1000;
    if (lag < this.lagMin) this.lagMin = lag;
    this.loadCount += n;
    if (this.loadCount >= this.loadFrames) {
      this.load = this.busyMs / ((this.loadCount / sampleRate) * 1000);
      if (this.load > this.loadPeak) this.loadPeak = this.load;
      // Window against window, so slow drift between the device clock and
      // the wall clock (parts per million) never adds up to a count.
      if (this.lagRef !== null && this.lagMin > this.lagRef + LATE_MS) this.late++;
      this.lagRef = this.lagMin;
      this.lagMin = Infinity;
      this.busyMs = 0;
      this.loadCount = 0;
    }
    this.meterCount += n;
    if (this.meterCount >= this.meterFrames) {
      this.port.postMessage({
        type: 'meters',
        inPeak: this.inPeak,
        outPeak: this.guard.outPeak,
        limiterDb: 20 * Math.log10(this.guard.limMin),
        load: this.load,
        loadPeak: this.loadPeak,
        late: this.late,
        nonfinite: this.fx.nonFiniteCount,
        seconds: this.frames / sampleRate,
        recording: this.record ? this.record.at / this.record.input.length : null,
      });
      this.resetMeters();
    }
  }
}

registerProcessor('earshot-live', EarshotLive);

class EarshotGuard extends AudioWorkletProcessor {
  constructor(options) {
    super();
    const o = (options && options.processorOptions) || {};
    this.guard = new OutputGuard(o.levelDb);
    this.stopped = false;
    this.port.onmessage = (e) => {
      const m = e.data;
      if (m && m.type === 'level') this.guard.setLevel(m.db);
      else if (m && m.type === 'stop') this.stopped = true;
    };
  }

  process(inputs, outputs) {
    if (this.stopped) return false;
    const out = outputs[0];
    if (!out || out.length === 0) return true;
    const n = out[0].length;
    const x = inputs[0] || [];
    if (x.length === 0) {
      for (const ch of out) ch.fill(0);
      return true;
    }
    // A mono input feeds every output channel; extra input channels are dropped.
    const ins = out.map((_, c) => x[Math.min(c, x.length - 1)]);
    this.guard.run(ins, out, n);
    return true;
  }
}

registerProcessor('earshot-guard', EarshotGuard);
