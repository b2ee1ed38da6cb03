// "Compare": the site's comparison grid (docs/site.md). Rows are clips, columns
// are conditions: the dry input, the clip's reference file, or an effect at
// the column's control settings. A cell is computed in the browser when it is
// first played (a Worker and the detected build; the rest of its row follows
// in the background) and kept; the Worker's hash of its samples is compared
// with the hash `earshot site` computed natively for that cell, so every cell
// says whether this browser produced the same samples. Within a row, switching
// columns while playing keeps the position sample-aligned (grid-player.js).
//
// Keyboard (the ARIA grid pattern, one tab stop): arrow keys move between
// cells, Home/End to the row's ends, Space or Enter plays the cell or stops it.
import { $, el, clear, setText } from './dom.js';
import { fetchBytes, siteUrl } from './site.js';
import { GridPlayer } from './grid-player.js';
import { cellWords, enqueue, gridKey, rovingFocus, showCell } from './grid-shared.js';
import { clock, db, hz } from './format.js';
import { drawSpectrogram, setSpectrogramCursor, spectrogramStale, stftSettings, SPECTROGRAM_DEFAULTS } from './spectrogram.js';

const MARK = { pass: '✓', fail: '✗' };

export class GridPanel {
  constructor(engine, site) {
    this.engine = engine;
    this.site = site;
    this.grid = site.grid && Array.isArray(site.grid.rows) && Array.isArray(site.grid.columns) ? site.grid : null;
    this.player = new GridPlayer(() => {
      this.say('The row played to its end.');
      this.refreshAll();
    });
    this.cells = []; // [row][column] → state
    this.queue = []; // cells waiting for the Worker, first = next
    this.busy = null; // the cell the Worker is on
    this.worker = null;
    this.bytes = new Map(); // url → Promise<ArrayBuffer>
    this.focus = { row: 0, column: 0 };
    this.pending = null; // the cell to start or switch to once it is ready
    this.clicked = null; // { cell, at } of the last activation, for the time to first sound
    this.changeListeners = [];
    if (!this.grid) return;
    $('panel-grid').hidden = false;
    setText($('grid-title'), this.grid.title || 'Compare');
    const d = $('grid-description');
    setText(d, this.grid.description || '');
    d.hidden = !this.grid.description;
    this.build();
    // Read-only view for tests/browser/grid.test.js (the row's timeline and its sources).
    Object.defineProperty($('grid'), 'gridPlayer', { value: this.player });
    $('grid-match').addEventListener('change', () => this.applyMatch());
    for (const v of ['level', 'difference', 'none']) $(`grid-view-${v}`).addEventListener('change', () => this.showView());
    window.addEventListener('resize', () => this.showView());
    const tick = () => {
      const p = this.player;
      if (p.playing) setText($('grid-position'), clock(p.position()));
      const shown = this.shown;
      if (shown && shown.buffer) {
        const on = p.playing ? p.row === shown.row : false;
        setSpectrogramCursor($('grid-spec'), on ? p.position() / shown.buffer.duration : null);
      }
      requestAnimationFrame(tick);
    };
    requestAnimationFrame(tick);
  }

  onChange(fn) {
    this.changeListeners.push(fn);
  }

  // The cell last chosen, for the shareable address: { clip, column }.
  get selected() {
    if (!this.grid || !this.chosen) return undefined;
    return { clip: this.grid.rows[this.chosen.row].clip, column: this.chosen.column };
  }

  clipOf(row) {
    return this.site.clips.find((c) => c.id === this.grid.rows[row].clip) || { id: this.grid.rows[row].clip, name: this.grid.rows[row].clip };
  }

  build() {
    const table = clear($('grid'));
    const head = el('tr', {}, el('th', { scope: 'col' }, el('span', { class: 'sr-only' }, 'Clip')));
    for (const col of this.grid.columns)
      head.appendChild(el('th', { scope: 'col', title: col.description || undefined }, col.name));
    table.appendChild(el('thead', {}, head));
    const body = el('tbody');
    this.grid.rows.forEach((row, r) => {
      const clip = this.clipOf(r);
      const tr = el('tr', {}, el('th', { scope: 'row', title: clip.description || undefined }, clip.name));
      this.cells.push([]);
      this.grid.columns.forEach((col, k) => {
        const native = row.cells[k];
        const button = el('button', { type: 'button', tabindex: r === 0 && k === 0 ? '0' : '-1', class: 'cell' },
          el('span', { class: 'cell-state' }), el('span', { class: 'cell-mark' }));
        const td = el('td', { role: 'gridcell' }, button);
        const cell = { row: r, column: k, td, button, native, state: native ? 'idle' : 'none', buffer: null, lkfs: NaN, hash: null, message: '' };
        this.cells[r].push(cell);
        button.addEventListener('click', () => this.activate(cell));
        button.addEventListener('keydown', (e) => this.key(e, cell));
        button.addEventListener('focus', () => { this.focus = { row: r, column: k }; });
        tr.appendChild(td);
        this.refresh(cell);
      });
      body.appendChild(tr);
    });
    table.appendChild(body);
  }

  key(e, cell) {
    const to = gridKey(e.key, cell, this.cells.length, this.grid.columns.length);
    if (!to) return;
    e.preventDefault();
    if (to === 'activate') this.activate(cell);
    else this.moveFocus(to.row, to.column);
  }

  moveFocus(row, column) {
    rovingFocus(this.cells, this.cells[row][column]);
  }

  // Chooses a cell without playing it (a shared address): it gets the focus stop.
  select(clipId, column) {
    const row = this.grid ? this.grid.rows.findIndex((r) => r.clip === clipId) : -1;
    if (row < 0 || !Number.isInteger(column) || column < 0 || column >= this.grid.columns.length) return false;
    rovingFocus(this.cells, this.cells[row][column], false);
    this.chosen = { row, column };
    this.refreshAll();
    return true;
  }

  changed() {
    for (const fn of this.changeListeners) fn();
    this.showView();
  }

  // The spectrogram of the chosen cell, or its level difference from the
  // row's reference cell (spectrogram.js, computed in its Worker).
  showView() {
    const c = this.chosen ? this.cells[this.chosen.row][this.chosen.column] : null;
    const box = $('grid-view');
    box.hidden = !c || c.state !== 'ready';
    if (box.hidden) return;
    const refCell = this.cells[c.row].find((x) => this.grid.columns[x.column].kind === 'reference' && x.state !== 'none');
    const canDiff = refCell && refCell !== c;
    $('grid-view-difference').disabled = !canDiff;
    let view = ['level', 'difference', 'none'].find((v) => $(`grid-view-${v}`).checked);
    if (view === 'difference' && !canDiff) view = 'level';
    const canvas = $('grid-spec');
    canvas.hidden = view === 'none';
    const caption = $('grid-spec-caption');
    caption.hidden = view === 'none';
    if (view === 'none') return;
    if (view === 'difference' && refCell.state !== 'ready') {
      this.want(refCell, true);
      setText(caption, 'Computing the reference cell first…');
      return;
    }
    const key = `${c.row}.${c.column}.${view}`;
    if (this.shownKey === key && !spectrogramStale(canvas)) return;
    this.shownKey = key;
    this.shown = c;
    const chans = (b) => Array.from({ length: b.numberOfChannels }, (_, i) => b.getChannelData(i));
    const rate = c.buffer.sampleRate;
    const { n, hop } = stftSettings(rate);
    const D = SPECTROGRAM_DEFAULTS;
    const clip = this.clipOf(c.row).name;
    const col = this.grid.columns[c.column].name;
    const what = view === 'level'
      ? `${clip}, ${col}: level in dB relative to a full-scale sine, colour map cividis (Nuñez, Anderton & Renslow 2018)`
      : `${clip}: ${col} − ${this.grid.columns[refCell.column].name}, 20·log10 of the magnitudes per bin, ±${D.diffRange} dB, colour map cool-warm (Moreland 2009)`;
    setText(caption, `${what}. Hann window ${n}, hop ${hop} at ${hz(rate)}; log frequency axis.`);
    canvas.setAttribute('aria-label', view === 'level' ? `Spectrogram of ${clip}, ${col}` : `Level difference of ${clip}, ${col} from the reference`);
    const opts = view === 'difference' ? { reference: chans(refCell.buffer) } : {};
    drawSpectrogram(canvas, chans(c.buffer), rate, opts).catch((e) => {
      this.shownKey = null;
      setText(caption, `The picture could not be drawn: ${e.message}`);
    });
  }

  // A click, Space or Enter on a cell.
  activate(cell) {
    this.chosen = { row: cell.row, column: cell.column };
    this.changed();
    const p = this.player;
    if (cell.state === 'none') {
      this.say(`${this.clipOf(cell.row).name} has no reference file.`);
      this.refreshAll();
      return;
    }
    if (p.playing && p.row === cell.row && p.column === cell.column) {
      p.stop();
      this.pending = null;
      this.say(`Stopped ${this.clipOf(cell.row).name} at ${clock(p.offset)}; play a cell of this row to go on from there.`);
      this.refreshAll();
      return;
    }
    this.clicked = { cell, at: performance.now() };
    if (cell.state === 'ready') this.start(cell);
    else {
      this.pending = cell;
      this.want(cell, true);
    }
    this.refreshAll();
  }

  // Plays `cell`: switches within the playing row, else starts its row.
  start(cell) {
    const p = this.player;
    this.pending = null;
    if (p.playing && p.row === cell.row) {
      p.switchTo(cell.column);
    } else {
      const from = p.row === cell.row ? p.offset : 0;
      const ready = new Map();
      for (const c of this.cells[cell.row]) if (c.state === 'ready') ready.set(c.column, c.buffer);
      p.play(cell.row, cell.column, ready, from).then((started) => {
        if (!started) return;
        // Cells that became ready while the output was being made ready join the timeline.
        for (const c of this.cells[cell.row]) if (c.state === 'ready') p.join(c.column, c.buffer);
        this.applyMatch();
      });
      this.applyMatch();
    }
    if (this.clicked && this.clicked.cell === cell) {
      // The cell is heard LEAD_S after its start is scheduled.
      const ms = performance.now() - this.clicked.at + 30;
      $('grid').dataset.firstSoundMs = ms.toFixed(1);
      this.clicked = null;
    }
    this.say(`Playing ${this.clipOf(cell.row).name}: ${this.grid.columns[cell.column].name}.`);
    this.refreshAll();
  }

  // Queues a cell (first when the listener asked for it), then the rest of its row.
  want(cell, first) {
    const add = (c, front) => {
      if (c.state !== 'idle' && c.state !== 'queued') return;
      enqueue(this.queue, c, front);
      this.refresh(c);
    };
    add(cell, first);
    for (const c of this.cells[cell.row]) if (c !== cell) add(c, false);
    this.next();
  }

  fetchOnce(path, what) {
    const url = siteUrl(this.site, path);
    if (!this.bytes.has(url)) {
      const p = fetchBytes(url, what);
      p.catch(() => this.bytes.delete(url)); // tried again next time
      this.bytes.set(url, p);
    }
    return this.bytes.get(url);
  }

  // One job at a time in one Worker (the machine's other core plays audio).
  async next() {
    if (this.busy || !this.queue.length) return;
    const cell = this.queue.shift();
    this.busy = cell;
    cell.state = 'working';
    cell.progress = 0;
    this.refresh(cell);
    try {
      const result = await this.compute(cell);
      this.finish(cell, result);
    } catch (e) {
      cell.state = 'failed';
      cell.message = e && e.message ? e.message : String(e);
      if (this.pending === cell) {
        this.pending = null;
        this.say(`${this.clipOf(cell.row).name}, ${this.grid.columns[cell.column].name}: ${cell.message}`);
      }
    }
    this.busy = null;
    this.refresh(cell);
    this.next();
  }

  compute(cell) {
    const col = this.grid.columns[cell.column];
    const clip = this.clipOf(cell.row);
    const job = async () => {
      if (col.kind === 'effect') {
        const fx = this.site.effects.find((f) => f.id === col.effect);
        if (!fx) throw new Error(`the site has no effect '${col.effect}'`);
        const [effect, audio] = await Promise.all([
          this.fetchOnce(fx.file, `effect '${fx.name}'`), this.fetchOnce(clip.file, `clip '${clip.name}'`)]);
        const settings = { controls: col.controls || {}, mix: 1, inputDb: 0, outputDb: 0, bypass: false };
        return this.ask({ type: 'render', effect: effect.slice(0), settings, source: { kind: 'wav', file: new Blob([audio]), name: clip.name } }, cell);
      }
      const path = col.kind === 'reference' ? clip.reference : clip.file;
      if (!path) throw new Error(`${clip.name} has no reference file`);
      const audio = await this.fetchOnce(path, `${col.kind === 'reference' ? 'reference of' : 'clip'} '${clip.name}'`);
      return this.ask({ type: 'decode', source: { kind: 'wav', file: new Blob([audio]), name: clip.name } }, cell);
    };
    return job();
  }

  ask(msg, cell) {
    if (!this.worker) this.worker = this.engine.worker();
    const w = this.worker;
    const id = (this.jobId = (this.jobId || 0) + 1);
    return new Promise((resolve, reject) => {
      w.onmessage = (e) => {
        const m = e.data;
        if (m.id !== id) return;
        if (m.type === 'progress') {
          cell.progress = m.total ? m.done / m.total : 0;
          this.refresh(cell);
        } else if (m.type === 'rendered') {
          const r = m.result;
          resolve({ rate: r.rate, channels: r.output, hash: r.outputHash, lkfs: r.outputLkfs,
            dry: { rate: r.rate, channels: r.input, hash: r.inputHash, lkfs: r.inputLkfs } });
        } else if (m.type === 'decoded') {
          resolve(m.result);
        } else if (m.type === 'fallback') {
          reject(new Error(`${m.reason}: the grid plays WAV files this page reads itself`));
        } else if (m.type === 'failed') {
          reject(new Error(m.message));
        }
      };
      w.onerror = (e) => {
        this.worker = null;
        w.terminate();
        reject(new Error(e.message || 'the rendering worker stopped'));
      };
      w.postMessage(this.engine.job({ ...msg, id }));
    });
  }

  // A computed cell: into an AudioBuffer, checked against the native hash.
  finish(cell, r) {
    const put = (c, res) => {
      const b = new AudioBuffer({ length: res.channels[0].length, numberOfChannels: res.channels.length, sampleRate: res.rate });
      res.channels.forEach((x, i) => b.copyToChannel(x, i));
      c.buffer = b;
      c.hash = res.hash;
      c.lkfs = res.lkfs;
      c.state = 'ready';
      c.verdict = c.native ? (res.hash === c.native.hash && res.channels[0].length === c.native.frames ? 'pass' : 'fail') : undefined;
      const i = this.queue.indexOf(c);
      if (i >= 0) this.queue.splice(i, 1);
      this.refresh(c);
      this.arrived(c);
    };
    put(cell, r);
    this.showView();
    // The render read the dry clip too: the row's input cells need no job of their own.
    if (r.dry) {
      this.grid.columns.forEach((col, k) => {
        const c = this.cells[cell.row][k];
        if (col.kind === 'input' && c.state !== 'ready') put(c, r.dry);
      });
    }
  }

  // A cell became ready: it joins its playing row, or starts when it was asked for.
  arrived(cell) {
    const p = this.player;
    if (p.playing && p.row === cell.row) {
      p.join(cell.column, cell.buffer);
      this.applyMatch();
    }
    if (this.pending === cell) this.start(cell);
  }

  applyMatch() {
    const p = this.player;
    const on = $('grid-match').checked;
    const dbs = new Map();
    if (p.row >= 0) {
      const line = this.cells[p.row];
      const dry = line.find((c) => this.grid.columns[c.column].kind === 'input' && c.state === 'ready');
      const target = dry ? dry.lkfs : NaN;
      for (const c of line) if (c.state === 'ready' && Number.isFinite(c.lkfs) && Number.isFinite(target)) dbs.set(c.column, target - c.lkfs);
    }
    p.setMatch(on, dbs);
    this.refreshAll();
  }

  say(text) {
    setText($('grid-now'), text);
  }

  refreshAll() {
    for (const line of this.cells) for (const c of line) this.refresh(c);
    if (!this.player.playing) setText($('grid-position'), clock(this.player.offset));
  }

  refresh(cell) {
    const p = this.player;
    const playing = p.playing && p.row === cell.row && p.column === cell.column;
    const col = this.grid.columns[cell.column];
    const clip = this.clipOf(cell.row);
    const [state, long] = cellWords(cell, playing);
    setText(cell.button.querySelector('.cell-state'), state);
    const mark = cell.verdict ? MARK[cell.verdict] : '';
    setText(cell.button.querySelector('.cell-mark'), mark);
    let verdict = '';
    if (cell.verdict === 'pass') verdict = `; same samples as native (hash ${cell.hash})`;
    else if (cell.verdict === 'fail') verdict = `; differs from native: hash ${cell.hash}, native ${cell.native.hash}`;
    let match = '';
    if (playing && p.match && Number.isFinite(p.matchDb.get(cell.column))) match = `; loudness matched by ${db(p.matchDb.get(cell.column))}`;
    const label = `${clip.name}, ${col.name}: ${long}${verdict}${match}`;
    showCell(cell, label, playing, this.chosen && this.chosen.row === cell.row && this.chosen.column === cell.column);
    if (cell.verdict) cell.td.dataset.verdict = cell.verdict;
    else delete cell.td.dataset.verdict;
  }
}
