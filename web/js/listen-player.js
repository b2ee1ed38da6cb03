// Plays the stimuli of one trial in sync: one AudioBufferSourceNode per
// stimulus, all started at the same context time and looping, each through
// its own gain; choosing a stimulus moves the gains (an exponential
// crossfade, 95 % done in about 10 ms), so switching keeps the position to
// the sample.

const FADE = 0.003; // time constant of the gain change, s

export class SyncPlayer {
  constructor() {
    this.ctx = null;
    this.sources = [];
    this.gains = new Map();
    this.current = null;
    this.playing = false;
  }

  context(rate) {
    if (!this.ctx || this.ctx.sampleRate !== rate) {
      if (this.ctx) this.ctx.close();
      this.ctx = new AudioContext({ sampleRate: rate, latencyHint: 'interactive' });
    }
    return this.ctx;
  }

  // stimuli: Map key -> { data (interleaved), channels, rate, frames }.
  load(stimuli) {
    this.stop();
    const first = stimuli.values().next().value;
    const ctx = this.context(first.rate);
    this.buffers = new Map();
    for (const [k, s] of stimuli) {
      const b = ctx.createBuffer(s.channels, s.frames, s.rate);
      for (let c = 0; c < s.channels; c++) {
        const x = new Float32Array(s.frames);
        for (let t = 0; t < s.frames; t++) x[t] = s.data[t * s.channels + c];
        b.copyToChannel(x, c);
      }
      this.buffers.set(k, b);
    }
  }

  async select(key) {
    if (!this.buffers || !this.buffers.has(key)) throw new Error(`no stimulus '${key}' in this trial`);
    const ctx = this.ctx;
    if (ctx.state === 'suspended') await ctx.resume();
    this.current = key;
    if (!this.playing) {
      const t0 = ctx.currentTime + 0.05;
      for (const [k, b] of this.buffers) {
        const src = ctx.createBufferSource();
        src.buffer = b;
        src.loop = true;
        const g = ctx.createGain();
        g.gain.value = k === key ? 1 : 0;
        src.connect(g).connect(ctx.destination);
        src.start(t0);
        this.sources.push(src);
        this.gains.set(k, g);
      }
      this.playing = true;
      return;
    }
    const now = ctx.currentTime;
    for (const [k, g] of this.gains) {
      g.gain.cancelScheduledValues(now);
      g.gain.setTargetAtTime(k === key ? 1 : 0, now, FADE);
    }
  }

  stop() {
    for (const s of this.sources) {
      try { s.stop(); } catch { /* not started */ }
      s.disconnect();
    }
    for (const g of this.gains.values()) g.disconnect();
    this.sources = [];
    this.gains = new Map();
    this.current = null;
    this.playing = false;
  }
}
