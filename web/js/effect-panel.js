// "Effect": the picker (bundled effects and effect files the visitor opens)
// and the card describing the chosen one. Titles, credits and links come from
// effect files and the config: all shown as text; links only for http(s).
import { $, el, clear, setText, status, link, isWebAddress } from './dom.js';
import { fetchBytes, siteUrl } from './site.js';
import { count, hz, bytes as fmtBytes } from './format.js';
import { MAX_FILE_BYTES } from '../worklet/loader.js';

export class EffectPanel {
  constructor(engine, site, onSelect) {
    this.engine = engine;
    this.site = site;
    this.onSelect = onSelect;
    this.entries = []; // { key, name, entry | null, bytes | null, loaded | null }
    this.current = null;
    this.select = $('effect-select');
    this.status = $('effect-status');
    for (const e of site.effects) this.add({ key: `site:${e.id}`, name: e.name || e.id, entry: e });
    this.select.disabled = false;
    this.select.addEventListener('change', () => this.choose(this.select.value));
    $('effect-file').addEventListener('change', (ev) => this.openFile(ev.target));
  }

  add(item) {
    this.entries.push(item);
    this.select.appendChild(el('option', { value: item.key }, item.name));
    return item;
  }

  // The effect a shared address (#fx=) or ?effect= names, else the first.
  initialKey(shared) {
    const wanted = shared || new URLSearchParams(location.search).get('effect');
    const hit = wanted && this.entries.find((e) => e.entry && e.entry.id === wanted);
    return (hit || this.entries[0]).key;
  }

  async choose(key) {
    const item = this.entries.find((e) => e.key === key);
    if (!item) return;
    this.select.value = key;
    status(this.status, 'busy', `Loading ${item.name}…`);
    try {
      if (!item.bytes) item.bytes = await fetchBytes(siteUrl(this.site, item.entry.file), `effect '${item.name}'`);
      if (!item.loaded) item.loaded = this.engine.inspect(item.bytes);
    } catch (e) {
      status(this.status, 'error', `This effect cannot be used: ${e.message}`);
      if (this.current) this.select.value = this.current.key;
      return;
    }
    status(this.status, 'info', '');
    this.current = this.describe(item);
    this.showCard(this.current);
    this.onSelect(this.current);
  }

  // An effect file the visitor opened: checked by the core before it is offered.
  async openFile(input) {
    const file = input.files && input.files[0];
    input.value = '';
    if (!file) return;
    let bytes;
    let loaded;
    if (file.size > MAX_FILE_BYTES) {
      // Refused before reading: the core's own text, without holding the file.
      status(this.status, 'error', `'${file.name}' cannot be used as an effect: effect file: ${file.size} bytes exceeds the 256 MiB limit`);
      return;
    }
    try {
      bytes = await file.arrayBuffer();
      loaded = this.engine.inspect(bytes);
    } catch (e) {
      status(this.status, 'error', `'${file.name}' cannot be used as an effect: ${e.message}`);
      return;
    }
    const title = loaded.info.title || file.name;
    const item = this.add({ key: `file:${this.entries.length}`, name: `${title} (your file)`, entry: null, bytes, loaded, fileName: file.name });
    await this.choose(item.key);
  }

  describe(item) {
    const { info, latencyAt } = item.loaded;
    const controls = (info.effect && info.effect.controls) || [];
    const defaults = {};
    for (const c of controls) defaults[c.name] = c.default;
    const pageDefaults = { ...defaults, ...((item.entry && item.entry.defaults) || {}) };
    return {
      key: item.key,
      id: item.entry ? item.entry.id : (item.fileName || 'effect').replace(/\.[^.]*$/, ''),
      name: item.entry ? item.entry.name : info.title || item.fileName,
      description: item.entry ? item.entry.description : '',
      bundled: !!item.entry,
      entry: item.entry,
      fileName: item.fileName,
      bytes: item.bytes,
      info,
      latencyAt,
      controls,
      fileDefaults: defaults,
      defaults: pageDefaults,
    };
  }

  showCard(fx) {
    const { info } = fx;
    $('effect-card').hidden = false;
    setText($('card-title'), fx.name);
    const desc = $('card-description');
    setText(desc, fx.description || '');
    desc.hidden = !fx.description;
    const facts = clear($('card-facts'));
    const add = (k, v) => facts.append(el('dt', {}, k), el('dd', {}, v));
    if (info.title && info.title !== fx.name) add('Title in the file', info.title);
    add('Model sample rate', hz(info.model_rate));
    add('Parameters', count(info.parameters));
    add('Multiply-adds per sample', `${count(info.macs_per_sample)} (${(info.macs_per_sample * info.model_rate / 1e6).toFixed(1)} million per second)`);
    add('Receptive field', info.recurrent ? 'unbounded (recurrent)' : `${count(info.receptive_field)} samples (${(1000 * info.receptive_field / info.model_rate).toFixed(1)} ms)`);
    const lat = [`${fx.latencyAt[info.model_rate]} samples at ${hz(info.model_rate)}`];
    for (const r of [44100, 48000]) if (r !== info.model_rate) lat.push(`${fx.latencyAt[r]} at ${hz(r)} (resampler)`);
    add('Latency', lat.join('; '));
    add('Layers', layerSummary(info.layers || []));
    add('Controls', fx.controls.length ? fx.controls.map((c) => `${c.name} ${c.min} … ${c.max}${c.unit ? ' ' + c.unit : ''} (default ${c.default})`).join('; ') : 'none');
    add('File', `${fx.bundled ? fx.entry.file : fx.fileName} · ${fmtBytes(fx.bytes.byteLength)}`);

    const cr = (info.effect && info.effect.credits) || {};
    const parts = [];
    if (Array.isArray(cr.authors) && cr.authors.length) parts.push(`By ${cr.authors.join(', ')}`);
    if (cr.licence) parts.push(`licence: ${cr.licence}`);
    const credits = $('card-credits');
    setText(credits, parts.join(' · '));
    credits.hidden = parts.length === 0;
    const links = clear($('card-links'));
    for (const [label, url] of [['Paper', cr.paper], ['Code', cr.code]]) {
      if (!url) continue;
      links.appendChild(el('li', {}, isWebAddress(url) ? link(url, label) : `${label}: ${url}`));
    }
    links.hidden = !links.firstChild;
  }
}

function layerSummary(layers) {
  const counts = new Map();
  for (const l of layers) counts.set(l.type, (counts.get(l.type) || 0) + 1);
  return [...counts].map(([t, n]) => (n > 1 ? `${t} ×${n}` : t)).join(', ') || '—';
}
