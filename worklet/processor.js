// The live AudioWorkletProcessor ('earshot-live'): one mono effect stream at
// the device rate (the core resamples to the model rate and back), then the
// listening level and an always-on output limiter, the same signal on every
// output channel.
//
// processorOptions: { wasm: ArrayBuffer (the build's bytes), variant: 'simd' |
// 'scalar', effect: ArrayBuffer (the effect file), settings, levelDb }
//   settings: { controls: { name: value }, mix: 0..1, inputDb, outputDb, bypass }
// The module compiles synchronously here (the page passes bytes: this scope
// has no fetch); everything is allocated before audio starts.
//
// Port messages in:  { type: 'settings', settings } · { type: 'level', db }
//                    { type: 'record', seconds } (restarts the stream's state,
//                      then captures its input and output, before level and limiter)
//                    { type: 'stop' } (frees the effect; process() then returns
//                      false, so the browser stops calling it: a disconnected
//                      node whose process() returns true goes on being called
//                      in Chromium, and its instance is never collected)
// Port messages out: { type: 'ready', ... } · { type: 'error', message, fatal }
//                    { type: 'meters', ... } every ~50 ms · { type: 'recorded', ... }
import { loadVariant } from './loader.js';

const LIMIT_CEILING = 0.8912509381337456; // −1 dBFS = 10^(−1/20)
const LIMIT_RELEASE_S = 0.15; // time constant of the limiter's recovery
const LEVEL_GLIDE_S = 0.02; // time constant of listening-level changes
const METER_S = 0.05; // meter message interval
const LOAD_S = 1.0; // window of the time-budget figure and of the late-render check
const LATE_MS = 5; // growth, from one window to the next, of the audio clock's lag behind the wall clock that counts as a late render

// This scope lacks performance.now() in Chromium; Date.now() has 1 ms steps,
// which over many render quanta still averages to the true busy time.
const now = globalThis.performance && typeof globalThis.performance.now === 'function'
  ? () => globalThis.performance.now()
  : () => Date.now();

class EarshotLive extends AudioWorkletProcessor {
  constructor(options) {
    super();
    const o = (options && options.processorOptions) || {};
    this.fx = null;
    this.size = 0;
    this.inBuf = null;
    this.outBuf = null;
    this.level = 0;
    this.levelTarget = Math.pow(10, (Number.isFinite(o.levelDb) ? o.levelDb : -30) / 20);
    this.level = this.levelTarget;
    this.levelGlide = 1 - Math.exp(-1 / (LEVEL_GLIDE_S * sampleRate));
    this.limGain = 1;
    this.limRelease = 1 - Math.exp(-1 / (LIMIT_RELEASE_S * sampleRate));
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
      const variant = loadVariant(o.wasm, { name: o.variant });
      this.fx = variant.createEffect(o.effect, sampleRate);
      if (o.settings) this.apply(o.settings, true);
      this.port.postMessage({
        type: 'ready',
        variant: this.fx.variantName,
        latency: this.fx.latency,
        sampleRate,
        modelRate: this.fx.info.model_rate,
        title: this.fx.info.title,
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
    this.outPeak = 0;
    this.limMin = 1;
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
    else if (m.type === 'level') this.levelTarget = Math.pow(10, m.db / 20);
    else if (m.type === 'record') {
      const n = Math.max(1, Math.round(m.seconds * sampleRate));
      this.record = { input: new Float32Array(n), output: new Float32Array(n), at: 0, pending: true };
    }
  }

  ensure(n) {
    if (n === this.size) return;
    this.size = n;
    this.inBuf = new Float32Array(n);
    this.outBuf = new Float32Array(n);
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
    const x = inputs[0] && inputs[0].length ? inputs[0][0] : null;
    if (x && x.length === n) this.inBuf.set(x);
    else this.inBuf.fill(0);

    const rec = this.record;
    if (rec && rec.pending) {
      this.fx.reset();
      rec.pending = false;
    }
    const t0 = now();
    this.fx.process(this.inBuf, this.outBuf);
    this.busyMs += now() - t0;

    if (rec) {
      const k = Math.min(n, rec.input.length - rec.at);
      rec.input.set(this.inBuf.subarray(0, k), rec.at);
      rec.output.set(this.outBuf.subarray(0, k), rec.at);
      rec.at += k;
      if (rec.at >= rec.input.length) {
        this.port.postMessage({ type: 'recorded', rate: sampleRate, input: rec.input, output: rec.output },
          [rec.input.buffer, rec.output.buffer]);
        this.record = null;
      }
    }

    // Level, then the limiter: instant attack to the ceiling, exponential recovery.
    const y = out[0];
    let level = this.level;
    let g = this.limGain;
    let inPeak = this.inPeak;
    let outPeak = this.outPeak;
    let limMin = this.limMin;
    for (let i = 0; i < n; i++) {
      const xi = this.inBuf[i];
      if (xi > inPeak) inPeak = xi;
      else if (-xi > inPeak) inPeak = -xi;
      level += (this.levelTarget - level) * this.levelGlide;
      const v = this.outBuf[i] * level;
      const a = v < 0 ? -v : v;
      if (a * g > LIMIT_CEILING) g = LIMIT_CEILING / a;
      const w = v * g;
      if (g < limMin) limMin = g;
      g += (1 - g) * this.limRelease;
      y[i] = w;
      const aw = w < 0 ? -w : w;
      if (aw > outPeak) outPeak = aw;
    }
    this.level = level;
    this.limGain = g;
    this.inPeak = inPeak;
    this.outPeak = outPeak;
    this.limMin = limMin;
    for (let c = 1; c < out.length; c++) out[c].set(y);

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
        outPeak: this.outPeak,
        limiterDb: 20 * Math.log10(this.limMin),
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
