// Playback of the original and the processed result in lockstep: two buffer
// sources started at the same context time and offset, so they stay sample-
// aligned; switching moves two gains in a 5 ms linear ramp (short enough to
// feel instant, long enough not to click). The loudness-matched switch scales
// the processed path by the gain that brings its integrated loudness
// (BS.1770) to the original's.

const SWITCH_S = 0.005;
const COPY_SLICE = 1 << 20; // samples copied per task while loading

// output(): where playback goes, { ctx, node }; by default a context of the
// player's own, made on the first play() (inside the user's gesture), and its
// destination. The embed (web/embed.js) passes its shared context and output guard.
export class Player {
  constructor(onEnd, output = null) {
    this.ctx = null;
    this.onEnd = onEnd;
    this.output = output || (async () => {
      if (!this.ctx) this.ctx = new AudioContext({ latencyHint: 'playback' });
      return { ctx: this.ctx, node: this.ctx.destination };
    });
    this.original = null;
    this.processed = null;
    this.which = 'processed';
    this.matchDb = 0;
    this.match = false;
    this.playing = false;
    this.offset = 0;
    this.startedAt = 0;
    this.nodes = null;
  }

  get duration() {
    return this.original ? this.original.duration : 0;
  }

  // result: the Worker's 'rendered' result; its channel arrays are copied
  // into AudioBuffers a slice at a time (the page stays responsive with a
  // long file) and released. onProgress(fraction) reports the copying.
  async load(result, onProgress) {
    const token = (this.loadToken = {});
    this.stop();
    this.original = null;
    this.processed = null;
    const total = 2 * result.channels * result.frames;
    let done = 0;
    const make = async (chs) => {
      const b = new AudioBuffer({ length: chs[0].length, numberOfChannels: chs.length, sampleRate: result.rate });
      for (let c = 0; c < chs.length; c++) {
        const dst = b.getChannelData(c);
        const src = chs[c];
        for (let off = 0; off < src.length; off += COPY_SLICE) {
          dst.set(src.subarray(off, Math.min(src.length, off + COPY_SLICE)), off);
          done += Math.min(COPY_SLICE, src.length - off);
          if (src.length > COPY_SLICE) {
            if (onProgress) onProgress(done / total);
            await new Promise((res) => setTimeout(res, 0));
          }
        }
        chs[c] = null;
      }
      return b;
    };
    const original = await make(result.input);
    const processed = await make(result.output);
    if (token !== this.loadToken) return false; // a newer load took over
    this.original = original;
    this.processed = processed;
    this.offset = 0;
    return true;
  }

  gains() {
    const m = this.match ? Math.pow(10, this.matchDb / 20) : 1;
    return this.which === 'original' ? [1, 0] : [0, m];
  }

  async play() {
    if (!this.original) return;
    const { ctx, node } = await this.output();
    this.ctx = ctx;
    await ctx.resume();
    this.stopNodes();
    const [ga, gb] = this.gains();
    const a = new AudioBufferSourceNode(ctx, { buffer: this.original });
    const b = new AudioBufferSourceNode(ctx, { buffer: this.processed });
    const gA = new GainNode(ctx, { gain: ga });
    const gB = new GainNode(ctx, { gain: gb });
    a.connect(gA).connect(node);
    b.connect(gB).connect(node);
    const t = ctx.currentTime + 0.03;
    const off = this.offset >= this.duration ? 0 : this.offset;
    a.start(t, off);
    b.start(t, off);
    this.startedAt = t - off;
    this.nodes = { a, b, gA, gB };
    this.playing = true;
    b.onended = () => {
      if (this.nodes && this.nodes.b === b) {
        this.stopNodes();
        this.playing = false;
        this.offset = 0;
        if (this.onEnd) this.onEnd();
      }
    };
  }

  pause() {
    if (!this.playing) return;
    this.offset = this.position();
    this.stopNodes();
    this.playing = false;
  }

  stop() {
    this.stopNodes();
    this.playing = false;
    this.offset = 0;
  }

  stopNodes() {
    if (!this.nodes) return;
    const { a, b, gA, gB } = this.nodes;
    this.nodes = null;
    for (const s of [a, b]) {
      s.onended = null;
      try { s.stop(); } catch { /* not started */ }
      s.disconnect();
    }
    gA.disconnect();
    gB.disconnect();
  }

  seek(seconds) {
    this.offset = Math.max(0, Math.min(this.duration, seconds));
    if (this.playing) this.play();
  }

  position() {
    if (!this.playing || !this.ctx) return this.offset;
    return Math.max(0, Math.min(this.duration, this.ctx.currentTime - this.startedAt));
  }

  setWhich(which) {
    this.which = which;
    this.ramp();
  }

  setMatch(on, db) {
    this.match = on;
    this.matchDb = db;
    this.ramp();
  }

  ramp() {
    if (!this.nodes) return;
    const t = this.ctx.currentTime;
    const [ga, gb] = this.gains();
    for (const [g, v] of [[this.nodes.gA, ga], [this.nodes.gB, gb]]) {
      g.gain.cancelScheduledValues(t);
      g.gain.setValueAtTime(g.gain.value, t);
      g.gain.linearRampToValueAtTime(v, t + SWITCH_S);
    }
  }
}
