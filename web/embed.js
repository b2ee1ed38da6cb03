// <earshot-effect>: an effect, one or more dry clips and the effect's
// controls, for any page (docs/embed.md). One <script type="module"
// src=".../embed.js"> defines the element; the files it needs lie beside it
// as in a site built by `earshot site` (js/, worklet/, wasm/).
//
//   <earshot-effect effect="fx/tape.nfx" clips="clips/guitar.wav clips/voice.wav"
//                   controls="drive, tone" values="drive=0.7" reference="3f585c76eb9366a2">
//   </earshot-effect>
//
// Attributes: effect (URL of the effect file, required), clips (URLs of dry
// clips, separated by spaces), controls (names to show, separated by commas
// or spaces; absent: all; empty: none), values (initial control values,
// NAME=VALUE separated by commas, as `earshot render --control`), reference
// (the scalar output hash `earshot verify FILE --json` prints: the
// self-check's expectation), label (a name to show instead of the file's title),
// columns (optional: settings of the effect that turn the element into a
// comparison grid, rows = clips, columns = Dry and one per setting;
// js/embed-grid.js, e.g. columns="Soft: drive=0.2; Hot: drive=0.8").
//
// Every element on a page shares one capability check, one compiled
// WebAssembly module and one instance for reading effect files (the page's
// Engine, js/engine.js), one offline Worker (js/offline-worker.js: renders
// and self-checks, one job at a time) and one AudioContext, made on the
// first press of Play (autoplay policies allow audio only after a gesture).
// Playback goes through the page's output guard (worklet/processor.js,
// 'earshot-guard': listening level starting at -30 dB, limiter at -1 dBFS);
// one element plays at a time.
import { detectCapabilities } from './worklet/capabilities.js';
import { Engine } from './js/engine.js';
import { fetchBytes } from './js/site.js';
import { el, setText } from './js/dom.js';
import { fnv1a64 } from './js/test-signal.js';
import { looksLikeWav, MAX_RENDER_FRAMES } from './js/wav.js';
import { clock, hz } from './js/format.js';
import { Player } from './js/player.js';
import { niceStep, show } from './js/controls-panel.js';
import { EMBED_CSS } from './js/embed-style.js';
import { EmbedGrid, parseColumns, resolveColumns } from './js/embed-grid.js';

const BASE = new URL('./', import.meta.url).href;
const LEVEL_START_DB = -30; // as the page's live listening level: output starts quiet

// ---------------------------------------------------------------- shared by every element

const kit = {
  engine: null, // Promise<Engine>
  worker: null,
  jobs: new Map(), // id → { resolve, reject, onProgress }
  nextId: 1,
  queue: Promise.resolve(),
  ctx: null,
  guardModule: null, // Promise of the worklet module in kit.ctx
  contextsCreated: 0,
  playing: null, // the element playing now
  sheet: null,
};

function engine() {
  if (!kit.engine) {
    kit.engine = (async () => {
      const caps = detectCapabilities();
      if (!caps.variant) throw new Error(caps.reasons.join('; '));
      if (!caps.features.worker) throw new Error('this browser has no Web Worker to render in');
      const site = { base: BASE, wasm: { simd: 'wasm/earshot-simd.wasm', scalar: 'wasm/earshot-scalar.wasm' } };
      return new Engine(site, caps.variant).load();
    })();
    kit.engine.catch(() => { kit.engine = null; }); // the next element tries again
  }
  return kit.engine;
}

// The one Worker. A Worker script must be same-origin with the page: when
// this kit is served from elsewhere, a same-origin blob module imports it
// (the kit's server then sends Access-Control-Allow-Origin).
function worker(eng) {
  if (kit.worker) return kit.worker;
  let w;
  const script = new URL('js/offline-worker.js', BASE);
  if (script.origin === location.origin) {
    w = eng.worker();
  } else {
    const blob = new Blob([`import ${JSON.stringify(script.href)};`], { type: 'text/javascript' });
    w = new Worker(URL.createObjectURL(blob), { type: 'module', name: 'earshot offline' });
  }
  w.onmessage = (e) => {
    const m = e.data;
    const job = kit.jobs.get(m.id);
    if (!job) return;
    if (m.type === 'progress') {
      if (job.onProgress) job.onProgress(m.total ? m.done / m.total : 0);
      return;
    }
    kit.jobs.delete(m.id);
    if (m.type === 'failed') job.reject(new Error(m.message));
    else job.resolve(m);
  };
  w.onerror = (e) => {
    e.preventDefault();
    const err = new Error(`the rendering worker stopped: ${e.message || 'it could not start'}`);
    for (const job of kit.jobs.values()) job.reject(err);
    kit.jobs.clear();
    w.terminate();
    if (kit.worker === w) kit.worker = null;
  };
  kit.worker = w;
  return w;
}

// Jobs run one after another (memory stays that of one job); resolves the
// Worker's answer ('checked', 'rendered' or 'fallback').
function runJob(message, transfer = [], onProgress = null) {
  const run = async () => {
    const eng = await engine();
    const w = worker(eng);
    const id = kit.nextId++;
    return new Promise((resolve, reject) => {
      kit.jobs.set(id, { resolve, reject, onProgress });
      w.postMessage(eng.job({ ...message, id }), transfer);
    });
  };
  const p = kit.queue.then(run, run);
  kit.queue = p.catch(() => {});
  return p;
}

// The one AudioContext, made inside a user gesture (Play).
async function audio() {
  if (!kit.ctx) {
    kit.ctx = new AudioContext({ latencyHint: 'playback' });
    kit.contextsCreated += 1;
    kit.guardModule = kit.ctx.audioWorklet.addModule(new URL('worklet/processor.js', BASE).href);
  }
  await kit.guardModule;
  if (kit.ctx.state !== 'running') await kit.ctx.resume();
  return kit.ctx;
}

function sheet() {
  if (kit.sheet === null) {
    try {
      kit.sheet = new CSSStyleSheet();
      kit.sheet.replaceSync(EMBED_CSS);
    } catch {
      kit.sheet = false; // no constructable sheets: a <style> per element
    }
  }
  return kit.sheet;
}

// ---------------------------------------------------------------- attributes

function clipList(text) {
  return (text || '').split(/\s+/).filter(Boolean).map((u) => new URL(u, document.baseURI).href);
}

function clipName(url) {
  const last = new URL(url).pathname.split('/').filter(Boolean).pop() || url;
  let name = last;
  try {
    name = decodeURIComponent(last);
  } catch { /* kept as written */ }
  return name.replace(/\.[^.]*$/, '') || name;
}

function parseValues(text) {
  const out = {};
  for (const part of (text || '').split(',').map((s) => s.trim()).filter(Boolean)) {
    const eq = part.indexOf('=');
    const name = eq < 0 ? '' : part.slice(0, eq).trim();
    const v = eq < 0 ? NaN : Number(part.slice(eq + 1).trim());
    if (!name || part.slice(eq + 1).trim() === '' || !Number.isFinite(v))
      throw new Error(`attribute values: '${part}' is not NAME=NUMBER`);
    out[name] = v;
  }
  return out;
}

// ---------------------------------------------------------------- the element

let instances = 0;

export class EarshotEffect extends HTMLElement {
  static get observedAttributes() {
    return ['effect', 'clips', 'controls', 'values', 'reference', 'label', 'columns'];
  }

  // The shared AudioContext (null before the first Play) and how many were
  // ever made: read-only, for pages and tests.
  static get audioContext() {
    return kit.ctx;
  }

  static get contextsCreated() {
    return kit.contextsCreated;
  }

  constructor() {
    super();
    this.uid = `e${++instances}`;
    this._state = 'idle';
    this._info = null;
    this._check = null;
    this._hash = null;
    this._error = null;
    this.loadSeq = 0;
    this.renderSeq = 0;
    this.values = {};
    this.levelDb = LEVEL_START_DB;
    this.guard = null; // this element's 'earshot-guard' node in the shared context
    this.player = new Player(() => this.showPlaying(), () => this.output());
    this.rendered = false;
    this.comparison = null; // the comparison grid (js/embed-grid.js) when the element has `columns`
    this.clipData = new Map(); // url → Promise<ArrayBuffer>, the grid's clips, fetched once per load
    this.root = this.attachShadow({ mode: 'open' });
    const s = sheet();
    if (s) this.root.adoptedStyleSheets = [s];
    else this.root.appendChild(el('style', {}, EMBED_CSS));
    this.build();
  }

  // ---- read-only state, for pages and tests
  get state() { return this._state; } // 'idle' | 'loading' | 'rendering' | 'ready' | 'error'
  get effectInfo() { return this._info; } // the core's info JSON of the effect
  get checkResult() { return this._check; } // the self-check's result (offline-worker.js)
  get outputHash() { return this._hash; } // FNV-1a 64 of the processed samples, channel after channel
  get errorText() { return this._error; }
  get playing() { return this.comparison ? this.comparison.player.playing : this.player.playing; }
  get listeningTo() { return this.player.which; }
  // With `columns`: the grid's columns and cells ({ columns, rows: [{ clip, cells: [{ state, hash, ... }] }] }),
  // and its player (js/grid-player.js: the row's timeline and its sources); null without.
  get grid() { return this.comparison ? this.comparison.snapshot() : null; }
  get gridPlayer() { return this.comparison ? this.comparison.player : null; }
  get settings() { return { controls: { ...this.values }, mix: 1, inputDb: 0, outputDb: 0, bypass: false }; }

  connectedCallback() {
    if (this._state === 'idle') this.schedule();
  }

  disconnectedCallback() {
    this.pause();
  }

  attributeChangedCallback(name, was, now) {
    if (was === now || !this.isConnected || this._state === 'idle') return;
    if (name === 'label') setText(this.ui.title, now || (this._info && this._info.title) || 'Effect');
    else this.schedule();
  }

  schedule() {
    if (this.pending) return;
    this.pending = true;
    queueMicrotask(() => {
      this.pending = false;
      this.load().catch((e) => this.fail(`Something went wrong: ${e && e.message ? e.message : e}`));
    });
  }

  build() {
    const u = (this.ui = {});
    const id = (s) => `${this.uid}-${s}`;
    u.title = el('p', { class: 'title', id: id('title') }, 'Effect');
    u.badgeText = el('span', { class: 'badge', 'data-state': 'running' }, 'Self-check: waiting');
    u.checkFacts = el('div', { class: 'facts' });
    u.check = el('details', { class: 'check' }, el('summary', {}, u.badgeText), u.checkFacts);
    u.controls = el('div', { class: 'controls' });
    u.clip = el('select', { id: id('clip') });
    u.clipRow = el('div', { class: 'row' }, el('label', { for: id('clip') }, 'Clip'), u.clip);
    u.play = el('button', { type: 'button', disabled: true, 'aria-describedby': id('title') }, 'Play');
    u.time = el('span', { class: 'time', 'aria-live': 'off' }, '0:00.0 / 0:00.0');
    u.abProcessed = el('input', { type: 'radio', name: id('ab'), value: 'processed', checked: true });
    u.abOriginal = el('input', { type: 'radio', name: id('ab'), value: 'original' });
    u.ab = el('fieldset', { class: 'ab' }, el('legend', {}, 'Hear'),
      el('label', {}, u.abProcessed, 'Processed'), el('label', {}, u.abOriginal, 'Original (dry)'));
    u.level = el('input', { type: 'range', id: id('level'), min: -60, max: 0, step: 1, value: LEVEL_START_DB });
    u.levelOut = el('output', { for: id('level') }, `${LEVEL_START_DB} dB`);
    u.status = el('p', { class: 'status', role: 'status' });
    u.error = el('p', { class: 'error', role: 'alert' });
    u.grid = el('div', { class: 'grid-slot' }); // the comparison grid, with `columns`
    u.box = el('div', { class: 'box', role: 'group', 'aria-labelledby': id('title') },
      el('div', { class: 'head' }, u.title, u.check),
      u.controls, u.clipRow, u.grid,
      el('div', { class: 'row' }, u.play, u.time, u.ab,
        el('span', { class: 'level' }, el('label', { for: id('level') }, 'Level'), u.level, u.levelOut)),
      u.status, u.error);
    u.clipRow.hidden = true;
    u.grid.hidden = true;
    this.root.appendChild(u.box);

    u.play.addEventListener('click', () => (this.player.playing ? this.pause() : this.play()));
    for (const r of [u.abProcessed, u.abOriginal]) r.addEventListener('change', () => r.checked && this.setWhich(r.value));
    u.level.addEventListener('input', () => {
      this.levelDb = Number(u.level.value);
      setText(u.levelOut, `${this.levelDb} dB`);
      if (this.guard) this.guard.port.postMessage({ type: 'level', db: this.levelDb });
    });
    u.clip.addEventListener('change', () => this.render());
  }

  setState(s) {
    this._state = s;
    this.dispatchEvent(new CustomEvent('earshot-state', { detail: { state: s } }));
  }

  fail(message) {
    this._error = message;
    setText(this.ui.error, message);
    setText(this.ui.status, '');
    this.setState('error');
  }

  // Loads the effect named by the attributes, then checks it and renders the first clip.
  async load() {
    const seq = ++this.loadSeq;
    this.pause();
    this._info = null;
    this._check = null;
    this._hash = null;
    this._error = null;
    this.rendered = false;
    this.bytes = null;
    this.clipData = new Map();
    const u = this.ui;
    if (this.comparison) this.comparison.dispose();
    this.comparison = null;
    this.showMode(this.hasAttribute('columns'));
    setText(u.error, '');
    u.play.disabled = true;
    this.setState('loading');
    const src = this.getAttribute('effect');
    if (!src) return this.fail('This element names no effect: give it an effect="URL" attribute.');
    let columns = null;
    if (this.hasAttribute('columns')) {
      try {
        columns = parseColumns(this.getAttribute('columns'));
      } catch (e) {
        return this.fail(e.message);
      }
    }
    const url = new URL(src, document.baseURI).href;
    setText(u.status, `Loading ${url}…`);
    let eng;
    let bytes;
    let loaded;
    try {
      eng = await engine();
    } catch (e) {
      if (seq === this.loadSeq) this.fail(`earshot could not start in this browser: ${e.message}`);
      return;
    }
    try {
      bytes = await fetchBytes(url, 'the effect file');
    } catch (e) {
      if (seq === this.loadSeq) this.fail(`Cannot use this effect: ${e.message}`);
      return;
    }
    try {
      loaded = eng.inspect(bytes);
    } catch (e) {
      if (seq === this.loadSeq) this.fail(`${url} is not an effect file earshot can use: ${e.message}`);
      return;
    }
    if (seq !== this.loadSeq) return;
    this.bytes = bytes;
    this._info = loaded.info;
    const controls = (loaded.info.effect && loaded.info.effect.controls) || [];
    try {
      this.values = this.initialValues(controls, url);
      this.showControls(controls, url);
      if (columns) columns = resolveColumns(columns, controls, this.values, url);
    } catch (e) {
      return this.fail(e.message);
    }
    setText(u.title, this.getAttribute('label') || loaded.info.title || clipName(url));
    this.clips = clipList(this.getAttribute('clips'));
    u.clip.replaceChildren(...this.clips.map((c, i) => el('option', { value: String(i) }, clipName(c))));
    u.clipRow.hidden = columns !== null || this.clips.length < 2;
    this.selfCheck(seq);
    if (!this.clips.length) {
      setText(u.status, 'No clip to play: give this element a clips="URL ..." attribute.');
      this.setState('ready');
      return;
    }
    if (columns) {
      this.makeGrid(columns, seq);
      return;
    }
    await this.render();
  }

  // The player's parts or the grid's (with `columns`: the controls, the clip
  // menu, Play, the time and the A/B switch give way to the grid).
  showMode(grid) {
    const u = this.ui;
    u.grid.hidden = !grid;
    u.controls.hidden = grid;
    for (const n of [u.play, u.time, u.ab]) n.hidden = grid;
    if (grid) u.clipRow.hidden = true;
    u.grid.replaceChildren(); // a grid of an earlier load goes
  }

  makeGrid(columns, seq) {
    const u = this.ui;
    const stale = () => seq !== this.loadSeq;
    const clips = this.clips;
    const grid = new EmbedGrid({
      uid: this.uid,
      titleId: `${this.uid}-title`,
      clips: clips.map((url) => ({ url, name: clipName(url) })),
      columns,
      render: async (row, controls, progress) => {
        const url = clips[row];
        const data = await this.clipBytes(url);
        if (stale()) return null;
        const settings = { controls: { ...controls }, mix: 1, inputDb: 0, outputDb: 0, bypass: false };
        return this.renderData(data, url, settings, progress, stale);
      },
      output: () => this.output(),
      beforePlay: () => {
        if (kit.playing && kit.playing !== this) kit.playing.pause();
        kit.playing = this;
      },
      changed: () => this.showPlaying(),
      onCell: (detail) => this.dispatchEvent(new CustomEvent('earshot-cell', { detail })),
      say: (text) => setText(u.status, text),
      alert: (text) => setText(u.error, text),
    });
    this.comparison = grid;
    u.grid.replaceChildren(grid.box);
    setText(u.status, `${clips.length} × ${columns.length} cells; each is computed when first played.`);
    this.setState('ready');
  }

  // A grid's clip, fetched once per load (tried again after a failure).
  clipBytes(url) {
    if (!this.clipData.has(url)) {
      const p = fetchBytes(url, 'the clip');
      p.catch(() => this.clipData.delete(url));
      this.clipData.set(url, p);
    }
    return this.clipData.get(url);
  }

  initialValues(controls, url) {
    const names = controls.map((c) => c.name);
    const given = parseValues(this.getAttribute('values'));
    const values = {};
    for (const c of controls) values[c.name] = c.default;
    for (const [name, v] of Object.entries(given)) {
      const c = controls.find((k) => k.name === name);
      if (!c) throw new Error(`attribute values: ${url} has no control named '${name}' (its controls: ${names.join(', ') || 'none'})`);
      if (v < c.min || v > c.max) throw new Error(`attribute values: ${name}=${v} is outside ${c.min} … ${c.max}`);
      values[name] = v;
    }
    return values;
  }

  showControls(controls, url) {
    const attr = this.getAttribute('controls');
    let shown = controls;
    if (attr !== null) {
      const wanted = attr.split(/[\s,]+/).filter(Boolean);
      for (const n of wanted) {
        if (!controls.some((c) => c.name === n))
          throw new Error(`attribute controls: ${url} has no control named '${n}' (its controls: ${controls.map((c) => c.name).join(', ') || 'none'})`);
      }
      shown = controls.filter((c) => wanted.includes(c.name));
    }
    const box = this.ui.controls;
    box.replaceChildren(...shown.map((c, i) => this.controlRow(c, i)));
  }

  controlRow(c, i) {
    const id = `${this.uid}-c${i}`;
    const value = this.values[c.name];
    const range = el('input', { id, type: 'range', min: c.min, max: c.max, step: niceStep(c.max - c.min), 'data-control': c.name });
    range.value = String(value);
    const number = el('input', {
      type: 'number', min: c.min, max: c.max, step: 'any', 'data-control': c.name,
      'aria-label': `${c.name} value${c.unit ? ` in ${c.unit}` : ''}`,
    });
    number.value = show(value);
    const set = (v, from) => {
      if (!Number.isFinite(v) || v < c.min || v > c.max) {
        number.setCustomValidity(`${c.name} takes ${c.min} … ${c.max}`);
        number.reportValidity();
        return;
      }
      number.setCustomValidity('');
      this.values[c.name] = v;
      if (from !== range) range.value = String(v);
      if (from !== number) number.value = show(v);
      this.render();
    };
    range.addEventListener('input', () => { number.value = show(Number(range.value)); });
    range.addEventListener('change', () => set(Number(range.value), range));
    number.addEventListener('change', () => set(number.value === '' ? NaN : Number(number.value), number));
    const label = el('label', { for: id }, c.unit ? `${c.name} (${c.unit})` : c.name);
    return el('div', { class: 'control' }, label, range, number);
  }

  async selfCheck(seq) {
    const u = this.ui;
    const ref = (this.getAttribute('reference') || '').trim().toLowerCase();
    u.badgeText.dataset.state = 'running';
    setText(u.badgeText, 'Self-check: running');
    setText(u.checkFacts, '');
    if (ref && !/^[0-9a-f]{16}$/.test(ref)) {
      u.badgeText.dataset.state = 'fail';
      setText(u.badgeText, 'Self-check: no valid reference');
      setText(u.checkFacts, `attribute reference: '${ref}' is not 16 hexadecimal digits (the scalar hash of 'earshot verify FILE --json')`);
      return;
    }
    let m;
    try {
      m = await runJob({ type: 'check', effect: this.bytes.slice(0), reference: ref ? { output_hash: ref } : null });
    } catch (e) {
      if (seq !== this.loadSeq) return;
      u.badgeText.dataset.state = 'fail';
      setText(u.badgeText, 'Self-check: could not run');
      setText(u.checkFacts, e.message);
      return;
    }
    if (seq !== this.loadSeq) return;
    const r = m.result;
    this._check = r;
    const facts = [`${r.samples} samples of the test signal of 'earshot verify' at ${hz(r.rate)}, controls at the file's defaults, ${r.variant} build, ${r.elapsedMs} ms.`,
      ` Output hash here: `, el('code', {}, r.outputHash), '.'];
    if (r.pass === null) {
      u.badgeText.dataset.state = 'none';
      setText(u.badgeText, 'Self-check: no reference');
      facts.push(' No reference hash was given to compare with (attribute reference).');
    } else if (r.pass) {
      u.badgeText.dataset.state = 'pass';
      setText(u.badgeText, 'Self-check: pass');
      facts.push(' Bit-identical to the native build.');
    } else {
      u.badgeText.dataset.state = 'fail';
      setText(u.badgeText, 'Self-check: fail');
      facts.push(` Reference `, el('code', {}, r.reference.outputHash), `: ${r.difference.text}.`);
    }
    u.checkFacts.replaceChildren(...facts.map((f) => (typeof f === 'string' ? document.createTextNode(f) : f)));
    this.dispatchEvent(new CustomEvent('earshot-checked', { detail: r }));
  }

  // Renders the chosen clip with the current values in the shared Worker.
  async render() {
    if (!this.bytes || !this.clips || !this.clips.length || this.comparison) return;
    const seq = ++this.renderSeq;
    const loadSeq = this.loadSeq;
    const u = this.ui;
    const url = this.clips[Number(u.clip.value) || 0];
    const name = clipName(url);
    const settings = this.settings;
    this.setState('rendering');
    setText(u.error, '');
    setText(u.status, `Rendering ${name}…`);
    const stale = () => seq !== this.renderSeq || loadSeq !== this.loadSeq;
    let result;
    try {
      const data = await fetchBytes(url, 'the clip');
      if (stale()) return;
      const progress = (f) => { if (!stale()) setText(u.status, `Rendering ${name}… ${Math.round(100 * f)} %`); };
      result = await this.renderData(data, url, settings, progress, stale);
    } catch (e) {
      if (!stale()) this.fail(`Cannot render ${url}: ${e.message}`);
      return;
    }
    if (stale()) return;
    const wasPlaying = this.player.playing;
    const at = this.player.position();
    this._hash = fnv1a64(...result.output);
    this.pause();
    if (!(await this.player.load(result)) || stale()) return; // a newer render took over
    this.rendered = true;
    this.player.seek(Math.min(at, this.player.duration));
    u.play.disabled = false;
    setText(u.status, `${name}: ${result.channels === 1 ? 'mono' : 'stereo'}, ${hz(result.rate)}, rendered by the ${result.variant} build.`);
    this.updateTime();
    this.setState('ready');
    this.dispatchEvent(new CustomEvent('earshot-rendered', { detail: { hash: this._hash, clip: url, settings } }));
    if (wasPlaying) this.play();
  }

  // A clip's bytes rendered in the shared Worker with `settings`: a WAV the
  // Worker reads itself, anything else decoded by the browser first. Resolves
  // the Worker's 'rendered' result, or null once stale() says the element moved on.
  async renderData(data, url, settings, progress, stale) {
    const name = clipName(url);
    let m = null;
    if (looksLikeWav(new Uint8Array(data, 0, Math.min(12, data.byteLength))))
      m = await runJob({ type: 'render', effect: this.bytes.slice(0), settings, source: { kind: 'wav', file: new Blob([data]), name } }, [], progress);
    if (stale()) return null;
    if (!m || m.type === 'fallback') {
      const channels = await decode(data, this._info.model_rate, url, m && m.reason);
      if (stale()) return null;
      m = await runJob({ type: 'render', effect: this.bytes.slice(0), settings,
        source: { kind: 'pcm', rate: this._info.model_rate, channels, name } }, channels.map((c) => c.buffer), progress);
    }
    return m.result;
  }

  // ---- playback (js/player.js: both sides start together, A/B moves two gains)

  // The player's output: the shared context (made here, in the gesture of
  // the first Play) and this element's output guard.
  async output() {
    const ctx = await audio();
    if (!this.guard || this.guard.context !== ctx) {
      this.guard = new AudioWorkletNode(ctx, 'earshot-guard', {
        numberOfInputs: 1, numberOfOutputs: 1, outputChannelCount: [2],
        channelCount: 2, channelCountMode: 'explicit', channelInterpretation: 'speakers',
        processorOptions: { levelDb: this.levelDb },
      });
      this.guard.connect(ctx.destination);
    }
    return { ctx, node: this.guard };
  }

  async play() {
    if (this.comparison) {
      this.comparison.playChosen();
      return;
    }
    if (!this.rendered) return;
    if (kit.playing && kit.playing !== this) kit.playing.pause();
    kit.playing = this;
    try {
      await this.player.play();
    } catch (e) {
      this.fail(`Cannot play: ${e.message}`);
    }
    this.showPlaying();
    const tick = () => {
      this.updateTime();
      if (this.player.playing) requestAnimationFrame(tick);
    };
    requestAnimationFrame(tick);
  }

  pause() {
    this.player.pause();
    if (this.comparison) this.comparison.stop();
    this.showPlaying();
  }

  showPlaying() {
    if (!this.playing && kit.playing === this) kit.playing = null;
    setText(this.ui.play, this.player.playing ? 'Pause' : 'Play');
    this.updateTime();
  }

  updateTime() {
    setText(this.ui.time, `${clock(this.player.position())} / ${clock(this.player.duration)}`);
  }

  setWhich(which) {
    this.player.setWhich(which === 'original' ? 'original' : 'processed');
    this.ui.abProcessed.checked = this.player.which === 'processed';
    this.ui.abOriginal.checked = this.player.which === 'original';
  }
}

// A clip that is not a WAV the Worker reads: the browser's decoder, straight
// to the model rate (as the page does).
async function decode(data, rate, url, why) {
  let buffer;
  try {
    buffer = await new OfflineAudioContext(1, 1, rate).decodeAudioData(data.slice(0));
  } catch (e) {
    throw new Error(`${why ? why + '; ' : ''}the browser could not decode it either (${e && e.message ? e.message : e})`);
  }
  if (buffer.numberOfChannels > 2) throw new Error(`${url} has ${buffer.numberOfChannels} channels; mono or stereo clips only`);
  if (buffer.length > MAX_RENDER_FRAMES) throw new Error(`${url} is ${buffer.length} frames long; at most ${MAX_RENDER_FRAMES}`);
  return Array.from({ length: buffer.numberOfChannels }, (_, c) => buffer.getChannelData(c).slice());
}

if (!customElements.get('earshot-effect')) customElements.define('earshot-effect', EarshotEffect);
