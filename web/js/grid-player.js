// Playback of one row of the comparison grid: every cell of the row that is
// ready plays from one timeline, each through its own gain, and only the
// chosen cell's gain is up. A cell that becomes ready while the row plays
// joins the timeline at a context time t with offset t − start, so all
// sources stay sample-aligned; switching moves two gains in a 5 ms linear
// ramp (as player.js). The optional loudness match scales each cell by the
// gain that brings its integrated loudness (BS.1770) to the row's dry input.
//
// output(): where playback goes, { ctx, node }, as in player.js; by default a
// context of the player's own, made on the first play() (inside the user's
// gesture), and its destination. The embed's grid (web/js/embed-grid.js)
// passes the shared context and the element's output guard.

const SWITCH_S = 0.005;
const LEAD_S = 0.03; // sources start this far ahead of "now", so every start is scheduled, not late

export class GridPlayer {
  constructor(onEnd, output = null) {
    this.ctx = null;
    this.node = null; // where every cell's gain goes
    this.onEnd = onEnd;
    this.output = output || (async () => {
      if (!this.ctx) this.ctx = new AudioContext({ latencyHint: 'interactive' });
      return { ctx: this.ctx, node: this.ctx.destination };
    });
    this.token = null; // the play() in progress; stop() cancels it
    this.row = -1;
    this.column = -1;
    this.playing = false;
    this.start = 0; // context time of position 0
    this.offset = 0; // position when stopped
    this.sources = new Map(); // column → { src, gain, buffer }
    this.match = false;
    this.matchDb = new Map(); // column → dB that matches the dry input
    this.starts = []; // { column, when, offset } of the row playing, for the alignment check
  }

  gainOf(column) {
    if (column !== this.column) return 0;
    const db = this.match ? this.matchDb.get(column) : 0;
    return Number.isFinite(db) ? Math.pow(10, db / 20) : 1;
  }

  position() {
    if (!this.playing) return this.offset;
    return Math.max(0, this.ctx.currentTime - this.start);
  }

  // Starts `row` at `from` seconds with the ready cells in `buffers`
  // (column → AudioBuffer), `column` audible. Resolves false when stop() or
  // another play() came first while the output was being made ready.
  async play(row, column, buffers, from = 0) {
    const token = (this.token = {});
    const { ctx, node } = await this.output();
    await ctx.resume();
    if (token !== this.token) return false;
    this.halt();
    this.ctx = ctx;
    this.node = node;
    this.row = row;
    this.column = column;
    this.starts = [];
    const t = ctx.currentTime + LEAD_S;
    this.start = t - from;
    this.playing = true;
    for (const [k, buffer] of buffers) this.join(k, buffer, t);
    return true;
  }

  // A cell joins the playing row at context time t (default: just ahead of now).
  join(column, buffer, t = this.ctx.currentTime + LEAD_S) {
    if (!this.playing || this.sources.has(column)) return;
    const ctx = this.ctx;
    const offset = t - this.start;
    const src = new AudioBufferSourceNode(ctx, { buffer });
    const gain = new GainNode(ctx, { gain: this.gainOf(column) });
    src.connect(gain).connect(this.node);
    if (offset < buffer.duration) src.start(t, offset);
    this.sources.set(column, { src, gain, buffer });
    this.starts.push({ column, when: t, offset });
    src.onended = () => this.ended();
  }

  // When the longest source of the row has ended, the row stops.
  ended() {
    if (!this.playing) return;
    const end = Math.max(...[...this.sources.values()].map((s) => s.buffer.duration));
    if (this.ctx.currentTime - this.start < end - 0.01) return;
    this.halt();
    this.offset = 0;
    if (this.onEnd) this.onEnd();
  }

  // Makes `column` the audible cell of the playing row.
  switchTo(column) {
    this.column = column;
    this.ramp();
  }

  setMatch(on, dbByColumn) {
    this.match = on;
    this.matchDb = dbByColumn;
    this.ramp();
  }

  ramp() {
    if (!this.playing) return;
    const t = this.ctx.currentTime;
    for (const [k, s] of this.sources) {
      const g = s.gain.gain;
      g.cancelScheduledValues(t);
      g.setValueAtTime(g.value, t);
      g.linearRampToValueAtTime(this.gainOf(k), t + SWITCH_S);
    }
  }

  stop() {
    this.token = null;
    this.halt();
  }

  halt() {
    if (this.playing) this.offset = this.position();
    this.playing = false;
    for (const { src, gain } of this.sources.values()) {
      src.onended = null;
      try { src.stop(); } catch { /* never started */ }
      src.disconnect();
      gain.disconnect();
    }
    this.sources.clear();
  }
}
