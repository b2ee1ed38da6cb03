// The comparison grid of <earshot-effect columns="..."> (docs/embed.md, "A
// comparison grid"): rows are the element's clips, columns the dry clip and
// one setting of the element's effect each. A cell is rendered in the shared
// Worker when it is first played (fully wet, 0 dB gains: the samples of
// `earshot render EFFECT CLIP OUT --control ...`), the rest of its row
// follows in the background, and it is kept. Within a row, switching columns
// while playing keeps the position sample-aligned: grid-player.js, the page's
// grid player, through the element's output guard in the shared context.
//
// Keyboard (the ARIA grid pattern, one tab stop): arrow keys move between
// cells, Home/End to the row's ends, Space or Enter plays the cell or stops it.
import { el, setText } from './dom.js';
import { GridPlayer } from './grid-player.js';
import { cellWords, enqueue, gridKey, rovingFocus, showCell } from './grid-shared.js';
import { clock } from './format.js';

export const MAX_COLUMNS = 8; // settings per element, besides Dry
const MAX_LABEL = 60; // characters of a column's label
// Samples (all channels) the cells of one element keep; beyond it the least
// recently used cells outside the playing row are let go and computed again
// when played (4 bytes each: 256 MB).
export const MAX_KEPT_SAMPLES = 2 ** 26;
const NUMBER = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/; // a decimal number
const DRY = 'Dry';

const quote = (s) => `'${s}'`;

// The `columns` attribute: columns separated by ';', each an optional label
// ending in ':' and then NAME=NUMBER settings separated by ','. Returns
// [{ label (null when none), given: { name: number }, text }]; a syntax error
// throws, naming the attribute and the token.
export function parseColumns(text) {
  const fail = (why) => { throw new Error(`attribute columns: ${why}`); };
  const example = 'e.g. columns="Soft: drive=0.2; Hot: drive=0.8"';
  if (!text || !text.trim()) fail(`it is empty; give one column or more, separated by ';' (${example})`);
  const columns = [];
  for (const raw of text.split(';')) {
    const seg = raw.trim();
    if (!seg) continue; // as `values` skips empty parts
    const n = columns.length + 1;
    const colon = seg.indexOf(':');
    let label = null;
    let rest = seg;
    if (colon >= 0) {
      label = seg.slice(0, colon).trim();
      rest = seg.slice(colon + 1);
      if (!label) fail(`column ${n} ${quote(seg)} has nothing before ':'; a label is text before the settings (${example})`);
      if (/[=,]/.test(label)) fail(`${quote(label)} in column ${n} is not a label: a label comes first, holds no '=' or ',', and ends with ':' (${example})`);
      if (label.length > MAX_LABEL) fail(`the label ${quote(label.slice(0, 20) + '…')} of column ${n} is longer than ${MAX_LABEL} characters`);
      if (rest.includes(':')) fail(`column ${n} ${quote(seg)} has more than one ':'; separate columns with ';'`);
    }
    const given = {};
    for (const part of rest.split(',').map((s) => s.trim()).filter(Boolean)) {
      const eq = part.indexOf('=');
      const name = eq < 0 ? '' : part.slice(0, eq).trim();
      const value = eq < 0 ? '' : part.slice(eq + 1).trim();
      if (!name || /\s/.test(name) || !NUMBER.test(value))
        fail(`${quote(part)} in column ${n} is not NAME=NUMBER (a control's name and a decimal number, as earshot render --control takes)`);
      if (Object.prototype.hasOwnProperty.call(given, name)) fail(`${quote(name)} is set twice in column ${n} ${quote(seg)}`);
      given[name] = Number(value);
    }
    if (!label && !Object.keys(given).length) fail(`column ${n} ${quote(seg)} has no setting`);
    columns.push({ label, given, text: seg });
  }
  if (!columns.length) fail(`it names no column (${example})`);
  if (columns.length > MAX_COLUMNS) fail(`${columns.length} columns; at most ${MAX_COLUMNS} (the memory the cells keep grows with each)`);
  const seen = new Map([[DRY.toLowerCase(), 'the first column']]);
  columns.forEach((c, i) => {
    c.name = c.label || settingsText(c.given);
    const key = c.name.toLowerCase();
    if (seen.has(key)) fail(`column ${i + 1} is named ${quote(c.name)} as ${seen.get(key)} is; give each column its own label`);
    seen.set(key, `column ${i + 1}`);
  });
  return columns;
}

export function settingsText(values) {
  return Object.entries(values).map(([k, v]) => `${k}=${v}`).join(', ');
}

// The parsed columns against the effect's controls: each column's control
// values are `base` (the file's defaults and the element's `values`) with its
// own settings over them. Returns the grid's columns, Dry first.
export function resolveColumns(parsed, controls, base, url) {
  const names = controls.map((c) => c.name).join(', ') || 'none';
  const columns = [{ name: DRY, dry: true, given: {}, controls: null }];
  parsed.forEach((col, i) => {
    const where = `column ${i + 1} ${quote(col.text)}`;
    for (const [name, v] of Object.entries(col.given)) {
      const c = controls.find((k) => k.name === name);
      if (!c) throw new Error(`attribute columns: ${quote(name)} in ${where}: ${url} has no control named ${quote(name)} (its controls: ${names})`);
      if (v < c.min || v > c.max) throw new Error(`attribute columns: ${quote(`${name}=${v}`)} in ${where} is outside ${c.min} … ${c.max}`);
    }
    columns.push({ name: col.name, dry: false, given: col.given, controls: { ...base, ...col.given } });
  });
  return columns;
}

// The cells (with `buffer`: { length, numberOfChannels }, and `used`, a
// counter of their last use) to let go so that the samples of the rest fit
// `budget`: least recently used first, never a cell for which keep(cell) holds.
export function cellsToLetGo(cells, budget, keep) {
  const size = (c) => c.buffer.length * c.buffer.numberOfChannels;
  const kept = cells.filter((c) => c.buffer);
  let total = kept.reduce((s, c) => s + size(c), 0);
  const out = [];
  for (const c of kept.filter((x) => !keep(x)).sort((a, b) => a.used - b.used)) {
    if (total <= budget) break;
    total -= size(c);
    out.push(c);
  }
  return out;
}

// One element's grid. opts: uid, titleId, clips [{ url, name }], columns
// (resolveColumns), render(row, controls, onProgress) → Promise<the Worker's
// 'rendered' result | null when the element moved on>, output() → { ctx, node },
// beforePlay(), changed() (playback started or stopped), onCell(detail),
// say(text), alert(text).
export class EmbedGrid {
  constructor(opts) {
    this.opts = opts;
    this.clips = opts.clips;
    this.columns = opts.columns;
    this.player = new GridPlayer(() => this.stopped(), opts.output);
    this.cells = []; // [row][column]
    this.queue = []; // cells waiting for the Worker, first = next
    this.busy = false;
    this.pending = null; // the cell to start or switch to once it is ready
    this.chosen = null;
    this.clock = 0; // for 'least recently used'
    this.disposed = false;
    this.box = this.build();
  }

  build() {
    const { uid, titleId } = this.opts;
    const keys = `${uid}-grid-keys`;
    const head = el('tr', {}, el('th', { scope: 'col' }, el('span', { class: 'sr-only' }, 'Clip')));
    for (const col of this.columns) {
      const full = col.dry ? 'the clip as it is, no effect' : settingsText(col.controls);
      head.appendChild(el('th', { scope: 'col', title: full },
        col.name, !col.dry && col.name !== settingsText(col.given) && Object.keys(col.given).length
          ? el('span', { class: 'settings' }, settingsText(col.given)) : null));
    }
    const body = el('tbody');
    this.clips.forEach((clip, r) => {
      const tr = el('tr', {}, el('th', { scope: 'row', title: clip.url }, clip.name));
      this.cells.push([]);
      this.columns.forEach((col, k) => {
        const button = el('button', { type: 'button', class: 'cell', tabindex: r === 0 && k === 0 ? '0' : '-1' },
          el('span', { class: 'cell-state' }));
        const td = el('td', { role: 'gridcell', 'data-row': r, 'data-column': k }, button);
        const cell = { row: r, column: k, td, button, state: 'idle', buffer: null, hash: null, frames: 0, progress: 0, message: '', used: 0 };
        this.cells[r].push(cell);
        button.addEventListener('click', () => this.activate(cell));
        button.addEventListener('keydown', (e) => this.key(e, cell));
        tr.appendChild(td);
        this.refresh(cell);
      });
      body.appendChild(tr);
    });
    this.table = el('table', { class: 'grid', role: 'grid', 'aria-labelledby': titleId, 'aria-describedby': keys },
      el('thead', {}, head), body);
    this.time = el('p', { class: 'time grid-time', 'aria-live': 'off' }, '');
    return el('div', { class: 'grid-box' },
      el('div', { class: 'grid-scroll' }, this.table),
      el('p', { class: 'hint', id: keys }, 'Arrow keys move between cells; Space or Enter plays the cell or stops it.'),
      this.time);
  }

  // ---- read-only view, for the element's `grid` property
  snapshot() {
    return {
      columns: this.columns.map((c) => ({ name: c.name, dry: c.dry, controls: c.controls && { ...c.controls } })),
      rows: this.clips.map((clip, r) => ({
        clip: clip.url,
        cells: this.cells[r].map((c) => ({ state: c.state, hash: c.hash, frames: c.frames, playing: this.isPlaying(c) })),
      })),
    };
  }

  isPlaying(cell) {
    const p = this.player;
    return p.playing && p.row === cell.row && p.column === cell.column;
  }

  key(e, cell) {
    const to = gridKey(e.key, cell, this.cells.length, this.columns.length);
    if (!to) return;
    e.preventDefault();
    if (to === 'activate') this.activate(cell);
    else rovingFocus(this.cells, this.cells[to.row][to.column]);
  }

  // A click, Space or Enter on a cell.
  activate(cell) {
    if (this.disposed) return;
    this.chosen = cell;
    rovingFocus(this.cells, cell, false);
    if (this.isPlaying(cell) || (this.pending === cell && !this.player.playing)) {
      this.stop();
      return;
    }
    if (cell.state === 'ready') this.start(cell);
    else {
      this.pending = cell;
      this.want(cell);
      this.opts.say(`${this.nameOf(cell)}: computing, then playing.`);
    }
    this.refreshAll();
  }

  // The element's play(): the chosen cell, else the first effect cell.
  playChosen() {
    const cell = this.chosen || this.cells[0][Math.min(1, this.columns.length - 1)];
    if (!this.isPlaying(cell) && this.pending !== cell) this.activate(cell);
  }

  nameOf(cell) {
    return `${this.clips[cell.row].name}, ${this.columns[cell.column].name}`;
  }

  // Plays `cell`: switches within the playing row, else starts its row.
  start(cell) {
    const p = this.player;
    this.pending = null;
    this.touch(cell);
    this.opts.alert(''); // an earlier cell's failure is old news
    if (p.playing && p.row === cell.row) {
      p.switchTo(cell.column);
    } else {
      this.opts.beforePlay();
      const from = p.row === cell.row ? p.offset : 0;
      const ready = new Map();
      for (const c of this.cells[cell.row]) if (c.state === 'ready') ready.set(c.column, c.buffer);
      p.play(cell.row, cell.column, ready, from).then((started) => {
        if (!started || this.disposed) return;
        // Cells that became ready while the output was being made ready.
        for (const c of this.cells[cell.row]) if (c.state === 'ready') p.join(c.column, c.buffer);
        this.refreshAll();
        this.opts.changed();
        this.tick();
      }, (e) => this.opts.alert(`Cannot play: ${e && e.message ? e.message : e}`));
    }
    this.opts.say(`Playing ${this.nameOf(cell)}.`);
    this.refreshAll();
  }

  stop() {
    this.pending = null;
    this.player.stop();
    this.stopped();
  }

  stopped() {
    this.refreshAll();
    this.opts.changed();
  }

  tick() {
    const p = this.player;
    if (this.disposed) return;
    if (p.row >= 0) {
      const line = this.cells[p.row];
      const duration = Math.max(0, ...line.filter((c) => c.buffer).map((c) => c.buffer.duration));
      setText(this.time, `${this.clips[p.row].name}: ${clock(p.position())} / ${clock(duration)}`);
    }
    if (p.playing) requestAnimationFrame(() => this.tick());
  }

  // Queues a cell first, then the rest of its row.
  want(cell) {
    const add = (c, front) => {
      if (c.state !== 'idle' && c.state !== 'queued' && c.state !== 'failed') return;
      enqueue(this.queue, c, front);
      this.refresh(c);
    };
    add(cell, true);
    for (const c of this.cells[cell.row]) if (c !== cell && c.state !== 'failed') add(c, false);
    this.next();
  }

  // One cell at a time (the kit's Worker runs every element's jobs in turn).
  // A Dry cell is the input of a render: it comes with the row's next effect cell.
  async next() {
    if (this.busy || this.disposed || !this.queue.length) return;
    const cell = this.queue.shift();
    const line = this.cells[cell.row];
    const target = cell.column > 0 ? cell
      : line.find((c) => c.column > 0 && c.state !== 'ready') || line[1];
    const working = [...new Set([cell, target])].filter((c) => c.state !== 'ready');
    const i = this.queue.indexOf(target);
    if (i >= 0) this.queue.splice(i, 1);
    this.busy = true;
    for (const c of working) {
      c.state = 'working';
      c.progress = 0;
      this.refresh(c);
    }
    try {
      const r = await this.opts.render(cell.row, this.columns[target.column].controls, (f) => {
        for (const c of working) {
          c.progress = f;
          this.refresh(c);
        }
      });
      if (!r || this.disposed) return;
      this.put(target, r.rate, r.output, r.outputHash);
      this.put(line[0], r.rate, r.input, r.inputHash);
    } catch (e) {
      if (this.disposed) return;
      const message = e && e.message ? e.message : String(e);
      for (const c of working) {
        c.state = 'failed';
        c.message = message;
        this.refresh(c);
      }
      if (working.includes(this.pending)) {
        this.pending = null;
        this.opts.alert(`Cannot render ${this.clips[cell.row].url}: ${message}`);
      }
    } finally {
      this.busy = false;
    }
    this.next();
  }

  // A computed cell: into an AudioBuffer; it joins its playing row, or starts
  // when it was asked for.
  put(cell, rate, channels, hash) {
    if (cell.state === 'ready') return;
    const b = new AudioBuffer({ length: channels[0].length, numberOfChannels: channels.length, sampleRate: rate });
    channels.forEach((x, i) => b.copyToChannel(x, i));
    cell.buffer = b;
    cell.hash = hash;
    cell.frames = b.length;
    cell.state = 'ready';
    cell.message = '';
    const i = this.queue.indexOf(cell);
    if (i >= 0) this.queue.splice(i, 1);
    this.touch(cell);
    this.refresh(cell);
    const col = this.columns[cell.column];
    this.opts.onCell({ row: cell.row, column: cell.column, clip: this.clips[cell.row].url, name: col.name,
      controls: col.controls && { ...col.controls }, hash, frames: b.length, rate, channels: channels.length });
    const p = this.player;
    if (p.playing && p.row === cell.row) p.join(cell.column, cell.buffer);
    if (this.pending === cell) this.start(cell);
    this.trim();
  }

  touch(cell) {
    cell.used = ++this.clock;
  }

  // Bounded memory: the least recently used cells outside the playing row go
  // (their hash stays shown) until the kept samples fit MAX_KEPT_SAMPLES.
  trim() {
    const p = this.player;
    const keep = (c) => (p.playing && p.row === c.row) || c === this.pending;
    for (const c of cellsToLetGo(this.cells.flat(), MAX_KEPT_SAMPLES, keep)) {
      c.buffer = null;
      c.state = 'idle';
      this.refresh(c);
    }
  }

  dispose() {
    this.disposed = true;
    this.pending = null;
    this.queue = [];
    this.player.stop();
  }

  refreshAll() {
    for (const line of this.cells) for (const c of line) this.refresh(c);
    if (!this.player.playing && this.player.row >= 0) this.tick();
  }

  refresh(cell) {
    const playing = this.isPlaying(cell);
    const col = this.columns[cell.column];
    const [state, long] = cellWords(cell, playing);
    setText(cell.button.querySelector('.cell-state'), state);
    const what = col.dry ? 'Dry, the clip without the effect' : `${col.name}${col.name === settingsText(col.given) ? '' : ` (${settingsText(col.given)})`}`;
    const hash = cell.hash ? `; ${col.dry ? 'samples' : 'output'} hash ${cell.hash}` : '';
    const label = `${this.clips[cell.row].name}, ${what}: ${long}${hash}`;
    showCell(cell, label, playing, this.chosen === cell);
  }
}
