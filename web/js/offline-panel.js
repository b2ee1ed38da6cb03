// "Render a file": an uploaded file or a bundled clip through the effect, in
// a Worker (progress, cancel), then waveforms, spectrograms (or the level
// difference, processed − original) with a play-position cursor, lockstep A/B
// playback with an optional loudness-matched switch, and a float32 WAV download.
//
// WAV files are read by the Worker at their own rate, a slice at a time (the
// core resamples to the model rate and back, exactly as `earshot render`
// does); anything else is decoded by the browser straight to the model rate.
import { $, el, clear, setText, status } from './dom.js';
import { looksLikeWav, floatWavHeader, MAX_RENDER_FRAMES } from './wav.js';
import { fetchBytes, siteUrl } from './site.js';
import { drawWave, themeColour } from './waveform.js';
import { drawSpectrogram, setSpectrogramCursor, spectrogramStale, stftSettings, SPECTROGRAM_DEFAULTS, PER_COLUMN } from './spectrogram.js';
import { Player } from './player.js';
import { hz, seconds as fmtSeconds, clock, db, dbfs, fixed } from './format.js';

function showValue(v) {
  return v === undefined ? '–' : Number.isInteger(v) ? String(v) : String(Number(v.toPrecision(6)));
}

function mixText(m) {
  return `${fixed(100 * m, 0)} % wet`;
}

// The settings a render used, as the result details list them.
export function settingsText(s) {
  const ctl = Object.entries(s.controls).map(([k, v]) => `${k} ${showValue(v)}`);
  return [ctl.length ? ctl.join(', ') : 'no controls', `mix ${mixText(s.mix)}`, `input gain ${db(s.inputDb)}`,
    `output gain ${db(s.outputDb)}`].concat(s.bypass ? ['bypass on'] : []).join('; ');
}

export class OfflinePanel {
  constructor(engine, controls, site) {
    this.engine = engine;
    this.controls = controls;
    this.site = site;
    this.effect = null;
    this.source = null; // { blob, name }
    this.worker = null;
    this.job = 0;
    this.result = null; // facts of the last render (the audio lives in the player)
    this.player = new Player(() => this.updatePlay());
    this.status = $('offline-status');

    $('offline-file').addEventListener('change', (e) => {
      const f = e.target.files && e.target.files[0];
      if (f) this.setSource(f, f.name, 'your file');
    });
    if (site.clips.length) {
      $('clip-row').hidden = false;
      for (const c of site.clips) $('clip-select').appendChild(el('option', { value: c.id }, c.name));
      $('clip-use').addEventListener('click', () => this.useClip($('clip-select').value));
    }
    $('render').addEventListener('click', () => this.render());
    $('rerender').addEventListener('click', () => this.render());
    controls.onChange(() => this.markStale());
    $('render-cancel').addEventListener('click', () => this.cancel('Cancelled.'));
    $('play').addEventListener('click', () => this.togglePlay());
    $('position').addEventListener('input', (e) => this.player.seek((Number(e.target.value) / 1000) * this.player.duration));
    for (const id of ['ab-original', 'ab-processed'])
      $(id).addEventListener('change', (e) => e.target.checked && this.player.setWhich(e.target.value));
    $('match').addEventListener('change', () => this.applyMatch());
    $('download').addEventListener('click', () => this.download());
    document.addEventListener('keydown', (e) => {
      if (e.key !== 't' && e.key !== 'T') return;
      if (e.ctrlKey || e.metaKey || e.altKey || $('result').hidden) return;
      const t = e.target;
      if (t && (t.tagName === 'INPUT' && t.type !== 'range' && t.type !== 'radio' && t.type !== 'checkbox' || t.tagName === 'SELECT' || t.tagName === 'TEXTAREA')) return;
      const next = this.player.which === 'original' ? 'ab-processed' : 'ab-original';
      $(next).checked = true;
      this.player.setWhich($(next).value);
    });
    for (const id of ['view-spectrograms', 'view-difference', 'view-none'])
      $(id).addEventListener('change', (e) => e.target.checked && this.showSpectra());
    window.addEventListener('resize', () => {
      this.redraw();
      clearTimeout(this.resizeTimer);
      this.resizeTimer = setTimeout(() => this.showSpectra(), 250);
    });
    // A theme change repaints the canvases in the new theme's colours.
    if (window.matchMedia) window.matchMedia('(prefers-color-scheme: dark)').addEventListener('change', () => this.redraw());
    const tick = () => {
      if (this.player.playing) this.updatePosition();
      requestAnimationFrame(tick);
    };
    requestAnimationFrame(tick);
  }

  setEffect(fx) {
    this.effect = fx;
    this.updateButtons();
    this.markStale();
  }

  // What changed between the shown result and what a render would use now:
  // the effect, a control, the mix, a gain or bypass. An out-of-date result
  // says so and offers to render again; it is never shown as current.
  markStale() {
    const r = this.result;
    const box = $('result-stale');
    if (!r) {
      box.hidden = true;
      return;
    }
    const now = this.controls.settings();
    const was = r.settings;
    const changes = [];
    if (this.effect && this.effect.id !== r.effectId) changes.push(`effect ${r.effectName} → ${this.effect.name}`);
    else {
      for (const [name, v] of Object.entries(was.controls))
        if (now.controls[name] !== v) changes.push(`${name} ${showValue(v)} → ${showValue(now.controls[name])}`);
    }
    if (now.mix !== was.mix) changes.push(`mix ${mixText(was.mix)} → ${mixText(now.mix)}`);
    if (now.inputDb !== was.inputDb) changes.push(`input gain ${db(was.inputDb)} → ${db(now.inputDb)}`);
    if (now.outputDb !== was.outputDb) changes.push(`output gain ${db(was.outputDb)} → ${db(now.outputDb)}`);
    if (now.bypass !== was.bypass) changes.push(now.bypass ? 'bypass on' : 'bypass off');
    box.hidden = changes.length === 0;
    $('result').dataset.stale = changes.length ? 'true' : 'false';
    setText($('result-stale-text'), `Out of date: changed since this render: ${changes.join('; ')}.`);
  }

  setSource(blob, name, kind) {
    if (kind !== 'bundled clip') this.clipId = undefined;
    this.source = { blob, name };
    const src = $('offline-source');
    setText(src, `Ready: ${name} (${kind}, ${(blob.size / 1048576).toFixed(1)} MB).`);
    src.hidden = false;
    status(this.status, 'info', '');
    this.updateButtons();
  }

  async useClip(id) {
    const clip = this.site.clips.find((c) => c.id === id);
    if (!clip) return;
    $('clip-select').value = id;
    this.clipId = id;
    try {
      const bytes = await fetchBytes(siteUrl(this.site, clip.file), `clip '${clip.name}'`);
      this.setSource(new Blob([bytes]), clip.name, 'bundled clip');
    } catch (e) {
      status(this.status, 'error', e.message);
    }
  }

  updateButtons() {
    $('render').disabled = !(this.effect && this.source) || !!this.worker || !!this.preparing;
  }

  cancel(message) {
    if (this.worker) {
      this.worker.terminate();
      this.worker = null;
    }
    this.job++;
    $('render-cancel').hidden = true;
    $('render-progress-row').hidden = true;
    if (message) status(this.status, 'info', message);
    this.updateButtons();
  }

  async render() {
    const fx = this.effect;
    const src = this.source;
    if (!fx || !src) return;
    this.cancel(null);
    const id = this.job;
    const settings = this.controls.settings();
    $('render-cancel').hidden = false;
    $('render-progress-row').hidden = false;
    $('render-progress').value = 0;
    setText($('render-progress-text'), '');
    status(this.status, 'busy', `Rendering ${src.name} through ${fx.name}…`);
    let isWav = false;
    try {
      isWav = looksLikeWav(new Uint8Array(await src.blob.slice(0, 12).arrayBuffer()));
    } catch (e) {
      return this.fail(id, `cannot read '${src.name}': ${e.message}`);
    }
    if (isWav) this.start(id, fx, settings, { kind: 'wav', file: src.blob, name: src.name });
    else this.decodeThenStart(id, fx, settings, src, null);
  }

  async decodeThenStart(id, fx, settings, src, wavReason) {
    const rate = fx.info.model_rate;
    setText($('render-progress-text'), 'decoding…');
    let buffer;
    try {
      const ctx = new OfflineAudioContext(1, 1, rate);
      buffer = await ctx.decodeAudioData(await src.blob.arrayBuffer());
    } catch (e) {
      const why = e && e.message ? e.message : String(e);
      return this.fail(id, `'${src.name}' could not be read as audio: ${wavReason ? wavReason + '; ' : ''}the browser could not decode it either (${why}). Try a WAV, FLAC, Ogg or MP3 file.`);
    }
    if (id !== this.job) return;
    if (buffer.numberOfChannels > 2)
      return this.fail(id, `'${src.name}' has ${buffer.numberOfChannels} channels; the page renders mono or stereo files only`);
    if (buffer.length > MAX_RENDER_FRAMES)
      return this.fail(id, `'${src.name}' is ${buffer.length} frames long once decoded; the page renders at most ${MAX_RENDER_FRAMES} frames per file (11.6 minutes at 48 kHz): use 'earshot render' for longer files`);
    const channels = [];
    for (let c = 0; c < buffer.numberOfChannels; c++) channels.push(buffer.getChannelData(c).slice());
    this.start(id, fx, settings, {
      kind: 'pcm', rate, channels, name: src.name,
      how: `decoded by the browser and resampled to ${hz(rate)} (the model rate)`,
    }, channels.map((c) => c.buffer));
  }

  start(id, fx, settings, source, transfer = []) {
    if (id !== this.job) return;
    const w = this.engine.worker();
    this.worker = w;
    this.updateButtons();
    const started = performance.now();
    w.onmessage = (e) => {
      const m = e.data;
      if (m.id !== id || id !== this.job) return;
      if (m.type === 'progress') {
        const f = m.total ? m.done / m.total : 0;
        $('render-progress').value = f;
        const secs = (performance.now() - started) / 1000;
        setText($('render-progress-text'), `${Math.round(100 * f)} % · ${fmtSeconds(secs)}`);
      } else if (m.type === 'fallback') {
        w.terminate();
        this.worker = null;
        this.decodeThenStart(id, fx, settings, this.source, m.reason);
      } else if (m.type === 'failed') {
        this.fail(id, m.message);
      } else if (m.type === 'rendered') {
        w.terminate();
        this.worker = null;
        this.done(fx, settings, m.result);
      }
    };
    w.onerror = (e) => this.fail(id, e.message || 'the rendering worker stopped');
    w.postMessage(this.engine.job({ type: 'render', id, effect: fx.bytes.slice(0), settings, source }), transfer);
  }

  fail(id, message) {
    if (id !== this.job) return;
    this.cancel(null);
    status(this.status, 'error', `Rendering failed: ${message}`);
  }

  async done(fx, settings, r) {
    const id = this.job;
    $('render-cancel').hidden = true;
    setText($('render-progress-text'), 'preparing playback…');
    const audioSeconds = r.frames / r.rate;
    this.result = null;
    $('result').hidden = true;
    this.preparing = true;
    this.updateButtons();
    const loaded = await this.player.load(r, (f) => {
      $('render-progress').value = f;
      setText($('render-progress-text'), `preparing playback… ${Math.round(100 * f)} %`);
    });
    this.preparing = false;
    if (!loaded || id !== this.job) return;
    $('render-progress-row').hidden = true;
    this.updateButtons();
    this.result = { ...r, effectName: fx.name, effectId: fx.id, settings, input: null, output: null };
    $('result').hidden = false;
    this.spectra = { result: this.result, drawn: new Set() };
    this.showSpectra();
    this.redraw();
    const facts = clear($('result-facts'));
    const add = (k, v) => facts.append(el('dt', {}, k), el('dd', {}, v));
    add('File', `${r.name}: ${r.channels === 1 ? 'mono' : 'stereo'}, ${hz(r.rate)}, ${fmtSeconds(audioSeconds)}, ${r.how}`);
    add('Effect', `${fx.name} (model rate ${hz(r.modelRate)})`);
    add('Resampling', r.rate === r.modelRate ? 'none (the file is at the model rate)' : `inside the core, ${hz(r.rate)} → ${hz(r.modelRate)} → ${hz(r.rate)}`);
    add('Latency', r.latency ? `${r.latency} samples, trimmed so the result lines up with the original` : 'none');
    add('Build', r.variant);
    add('Render time', `${fmtSeconds(r.processMs / 1000)} of processing, ${fixed(audioSeconds * r.channels / Math.max(1e-3, r.processMs / 1000), 1)}× real time per channel`);
    add('Peak', `original ${fixed(dbfs(r.inputPeak), 1)} dBFS, processed ${fixed(dbfs(r.outputPeak), 1)} dBFS${r.outputPeak > 1 ? ' (above full scale: the WAV keeps it, playback clips)' : ''}`);
    if (r.nonfinite) add('Non-finite blocks', `${r.nonfinite} (each silenced and the state reset)`);
    add('Settings', settingsText(settings));
    const hash = r.outputHash; // computed by the Worker (offline-worker.js)
    $('result').dataset.hash = hash;
    add('Output hash', `${hash} (FNV-1a 64 of the processed float32 samples, channel after channel)`);
    this.markStale();
    this.applyMatch();
    status(this.status, 'ok', `Rendered ${r.name} through ${fx.name}.`);
    this.updatePlay();
    this.updatePosition();
  }

  applyMatch() {
    const r = this.result;
    if (!r) return;
    const on = $('match').checked;
    const gain = Number.isFinite(r.inputLkfs) && Number.isFinite(r.outputLkfs) ? r.inputLkfs - r.outputLkfs : null;
    this.player.setMatch(on && gain !== null, gain || 0);
    const L = (v) => (Number.isFinite(v) ? `${v.toFixed(1)} LUFS` : 'too quiet or short to measure');
    const by = r.loudnessBy === 'core' ? 'measured by the core, as earshot loudness does' : 'measured in JavaScript';
    let text = `Integrated loudness (ITU-R BS.1770-4, ${by}): original ${L(r.inputLkfs)}, processed ${L(r.outputLkfs)}.`;
    const line = $('loudness-line');
    line.dataset.original = String(r.inputLkfs);
    line.dataset.processed = String(r.outputLkfs);
    line.dataset.by = r.loudnessBy;
    if (on) text += gain === null ? ' Matching is off: one side cannot be measured.' : ` While matching, the processed side plays ${db(gain)}.`;
    setText($('loudness-line'), text);
  }

  togglePlay() {
    if (this.player.playing) this.player.pause();
    else this.player.play().catch((e) => status(this.status, 'error', `Playback failed: ${e.message}`));
    // play() is async; update after it has begun.
    setTimeout(() => this.updatePlay(), 50);
    this.updatePlay();
  }

  updatePlay() {
    setText($('play'), this.player.playing ? 'Pause' : 'Play');
    this.updatePosition();
  }

  updatePosition() {
    const d = this.player.duration;
    const p = this.player.position();
    $('position').value = String(d ? Math.round((1000 * p) / d) : 0);
    setText($('position-out'), `${clock(p)} / ${clock(d)}`);
    this.redraw();
  }

  redraw() {
    const r = this.result;
    if (!r || $('result').hidden) return;
    const d = this.player.duration;
    const pos = d ? this.player.position() / d : null;
    drawWave($('wave-in'), r.inputPeaks, themeColour('--original'), pos);
    drawWave($('wave-out'), r.outputPeaks, themeColour('--processed'), pos);
    // The pictures on show, repainted in the theme's current colours.
    const shown = $('spec-diff-figure').hidden ? ['spec-in', 'spec-out'] : ['spec-diff'];
    for (const id of shown) if (!$(id).hidden) setSpectrogramCursor($(id), pos);
  }

  // The view chosen under the waveforms: the two spectrograms, the level
  // difference, or nothing. Each picture is computed once per result and
  // size, in the spectrogram Worker.
  showSpectra() {
    const s = this.spectra;
    if (!s || s.result !== this.result || $('result').hidden) return;
    const view = ['spectrograms', 'difference', 'none'].find((v) => $(`view-${v}`).checked);
    $('spec-in').hidden = view !== 'spectrograms';
    $('spec-out').hidden = view !== 'spectrograms';
    $('spec-diff-figure').hidden = view !== 'difference';
    const caption = $('spec-caption');
    caption.hidden = view === 'none';
    const orig = this.player.original;
    const proc = this.player.processed;
    if (view === 'none' || !orig || !proc) return;
    this.redraw(); // a picture shown again gets the current position
    const chans = (b) => Array.from({ length: b.numberOfChannels }, (_, c) => b.getChannelData(c));
    const rate = orig.sampleRate;
    const { n, hop } = stftSettings(rate);
    const ms = (k) => `${fixed((1000 * k) / rate, 1)} ms`;
    const D = SPECTROGRAM_DEFAULTS;
    caption.dataset.n = String(n);
    caption.dataset.hop = String(hop);
    setText(caption, `Short-time Fourier transform of the channels' average: periodic Hann window of ${n} samples (${ms(n)}) at ${hz(rate)}, hop ${hop} samples (${ms(hop)}); frequency on a log axis from ${hz(D.fMin)} to ${hz(rate / 2)}. ` +
      (view === 'spectrograms'
        ? `Level in dB relative to a full-scale sine, ${db(D.levelRange[0], 0)} to ${fixed(D.levelRange[1], 0)} dB, colour map cividis (Nuñez, Anderton & Renslow 2018).`
        : `Difference per frequency bin: 20·log10|processed| − 20·log10|original| (each floored at ${db(D.levelRange[0], 0)}), ±${D.diffRange} dB, colour map cool-warm (Moreland 2009).`) +
      ` A clip longer than the picture is wide keeps up to ${PER_COLUMN} frames per pixel column and the loudest value per bin.`);
    const jobs = view === 'spectrograms'
      ? [['spec-in', chans(orig), {}], ['spec-out', chans(proc), {}]]
      : [['spec-diff', chans(proc), { reference: chans(orig) }]];
    for (const [id, samples, opts] of jobs) {
      const canvas = $(id);
      if (s.drawn.has(id) && !spectrogramStale(canvas)) continue;
      s.drawn.add(id);
      drawSpectrogram(canvas, samples, rate, opts).then(() => this.redraw(), (e) => {
        s.drawn.delete(id);
        status(this.status, 'error', `The ${id === 'spec-diff' ? 'difference' : 'spectrogram'} could not be drawn: ${e.message}`);
      });
    }
  }

  // A float32 WAV of the processed result, built a slice at a time.
  async download() {
    const r = this.result;
    const buf = this.player.processed;
    if (!r || !buf) return;
    const button = $('download');
    button.disabled = true;
    try {
      const C = buf.numberOfChannels;
      const frames = buf.length;
      const chans = Array.from({ length: C }, (_, c) => buf.getChannelData(c));
      const parts = [floatWavHeader(C, buf.sampleRate, frames)];
      const slice = 1 << 18;
      for (let off = 0; off < frames; off += slice) {
        const n = Math.min(slice, frames - off);
        const inter = new Float32Array(n * C);
        for (let c = 0; c < C; c++) {
          const ch = chans[c];
          for (let t = 0; t < n; t++) inter[t * C + c] = ch[off + t];
        }
        parts.push(inter);
        if (off + slice < frames) await new Promise((res) => setTimeout(res, 0));
      }
      const blob = new Blob(parts, { type: 'audio/wav' });
      const url = URL.createObjectURL(blob);
      const stem = r.name.replace(/\.[^.]*$/, '') || 'audio';
      const a = el('a', { href: url, download: `${stem}-${r.effectId}.wav` });
      document.body.appendChild(a);
      a.click();
      a.remove();
      setTimeout(() => URL.revokeObjectURL(url), 60000);
    } finally {
      button.disabled = false;
    }
  }
}
