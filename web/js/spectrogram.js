// Spectrograms on canvases: the page's side. The Worker (stft-worker.js)
// computes every FFT, level and colour; this module picks the frames, sends
// them in bounded batches, draws the strips it gets back, the frequency axis,
// the colour bar and a play-position cursor, in the theme's colours.
//
//   drawSpectrogram(canvas, samples, sampleRate, options) → Promise<info>
//   setSpectrogramCursor(canvas, position)   position 0 … 1 of the clip, or null
//   repaintSpectrogram(canvas)               after a theme change
//   spectrogramStale(canvas)                 its size changed since it was computed
//   stftMagnitudes(samples, sampleRate, { n, hop }) → Promise<{ frames, bins, data, n, hop }>
//
// samples (and options.reference): a Float32Array, or an array of them
// (channels, averaged). They stay the caller's: the frames needed are copied
// into batches, which are transferred.
//
// Bounds: one column per device pixel of the plot (at most MAX_COLUMNS), one
// row per device pixel (at most MAX_ROWS); a clip with more frames than
// columns keeps at most PER_COLUMN frames per column, evenly spaced, and the
// loudest value per bin. So a picture costs at most MAX_COLUMNS × PER_COLUMN
// FFTs per signal whatever the clip's length, and memory in flight is one batch
// (BATCH_FRAMES frames of N float32 samples per signal: 2 MiB at N = 2048)
// plus the picture (columns × rows × 4 bytes).
import { stftSettings, frameCount, takeFrame } from './stft.js';
import { CIVIDIS, COOL_WARM } from './colormaps.js';
import { themeColour } from './waveform.js';

export const MAX_COLUMNS = 2048;
export const MAX_ROWS = 1024;
export const PER_COLUMN = 4;
export const BATCH_FRAMES = 256;
export const SPECTROGRAM_DEFAULTS = Object.freeze({
  fMin: 20, // Hz, the bottom of the log axis
  levelRange: Object.freeze([-120, 0]), // dB relative to a full-scale sine
  diffRange: 24, // ± dB of the difference view
});
export { stftSettings };

let worker = null;
let nextId = 1;
const pending = new Map(); // id → { resolve, reject }
const states = new WeakMap(); // canvas → picture state

function stftWorker() {
  if (!worker) {
    worker = new Worker(new URL('./stft-worker.js', import.meta.url), { type: 'module', name: 'earshot spectrogram' });
    worker.onmessage = (e) => {
      const m = e.data;
      const p = pending.get(m.id);
      if (!p) return;
      pending.delete(m.id);
      if (m.type === 'failed') p.reject(new Error(`spectrogram: ${m.message}`));
      else p.resolve(m);
    };
    worker.onerror = (e) => {
      e.preventDefault();
      const err = new Error(`spectrogram: the worker stopped (${e.message || 'no message'})`);
      for (const p of pending.values()) p.reject(err);
      pending.clear();
      worker.terminate();
      worker = null;
    };
  }
  return worker;
}

function ask(msg, transfer) {
  const id = nextId++;
  const w = stftWorker();
  return new Promise((resolve, reject) => {
    pending.set(id, { resolve, reject });
    w.postMessage({ ...msg, id }, transfer);
  });
}

function channelsOf(x, what) {
  const chs = x instanceof Float32Array ? [x] : Array.isArray(x) ? x : null;
  if (!chs || !chs.length || !chs.every((c) => c instanceof Float32Array))
    throw new TypeError(`spectrogram: ${what} must be a Float32Array or an array of Float32Arrays`);
  const length = chs[0].length;
  if (!chs.every((c) => c.length === length)) throw new RangeError(`spectrogram: the channels of ${what} differ in length`);
  if (!length) throw new RangeError(`spectrogram: ${what} are empty`);
  return { chs, length };
}

function deviceRatio() {
  return Math.max(1, Math.min(3, window.devicePixelRatio || 1));
}

// Where the plot, the axis labels and the colour bar go, in device pixels.
function layout(canvas, axes, legend) {
  const dpr = deviceRatio();
  const w = Math.max(60, Math.round(canvas.clientWidth * dpr));
  const h = Math.max(40, Math.round(canvas.clientHeight * dpr));
  const left = axes ? Math.round(46 * dpr) : 0;
  const right = legend ? Math.round(68 * dpr) : 0;
  const pad = axes || legend ? Math.round(7 * dpr) : 0;
  return { dpr, w, h, x0: left, y0: pad, pw: Math.max(8, w - left - right), ph: Math.max(8, h - 2 * pad) };
}

// The frames each column keeps: column c spans frames [c·F/cols, (c+1)·F/cols).
function columnFrames(frames, cols, perColumn) {
  const out = [];
  for (let c = 0; c < cols; c++) {
    const a = Math.floor((c * frames) / cols);
    const b = Math.max(a + 1, Math.floor(((c + 1) * frames) / cols));
    const k = Math.min(perColumn, b - a);
    const list = [];
    for (let j = 0; j < k; j++) list.push(a + Math.floor(((j + 0.5) * (b - a)) / k));
    out.push(list);
  }
  return out;
}

export async function drawSpectrogram(canvas, samples, sampleRate, options = {}) {
  const opts = { ...SPECTROGRAM_DEFAULTS, axes: true, legend: true, ...options };
  const sig = channelsOf(samples, 'the samples');
  const ref = opts.reference ? channelsOf(opts.reference, 'the reference') : null;
  if (!(Number.isFinite(sampleRate) && sampleRate > 0)) throw new RangeError(`spectrogram: sample rate ${sampleRate} is not a positive number`);
  const mode = opts.mode || (ref ? 'difference' : 'level');
  if (mode !== 'level' && mode !== 'difference') throw new RangeError(`spectrogram: mode '${mode}' is neither 'level' nor 'difference'`);
  if (mode === 'difference' && !ref) throw new TypeError('spectrogram: the difference view needs a reference');
  const { n, hop, window: windowName } = stftSettings(sampleRate);
  const fMax = sampleRate / 2;
  const fMin = opts.fMin;
  if (!(fMin > 0 && fMin < fMax)) throw new RangeError(`spectrogram: fMin ${fMin} Hz must lie between 0 and ${fMax} Hz`);
  const range = mode === 'difference' ? [opts.levelRange[0], opts.diffRange] : [...opts.levelRange];
  if (!(range[1] > (mode === 'difference' ? 0 : range[0]))) throw new RangeError(`spectrogram: bad range ${range.join(' … ')} dB`);

  const L = layout(canvas, opts.axes, opts.legend);
  const length = Math.max(sig.length, ref ? ref.length : 0);
  const frames = frameCount(length, hop);
  const cols = Math.min(frames, L.pw, MAX_COLUMNS);
  const rows = Math.min(L.ph, MAX_ROWS);
  const perColumn = frames > cols ? Math.min(PER_COLUMN, Math.ceil(frames / cols)) : 1;
  const picks = columnFrames(frames, cols, perColumn);
  const image = document.createElement('canvas');
  image.width = cols;
  image.height = rows;
  const token = {};
  const prev = states.get(canvas);
  const info = { mode, n, hop, window: windowName, sampleRate, frames, columns: cols, rows, perColumn,
    framesComputed: picks.reduce((s, p) => s + p.length, 0), fMin, fMax, range, seconds: length / sampleRate,
    plot: { x: L.x0, y: L.y0, width: L.pw, height: L.ph } };
  const st = { token, image, L, opts, mode, fMin, fMax, range, info, cursor: prev ? prev.cursor : null, ready: false };
  states.set(canvas, st);
  if (canvas.width !== L.w) canvas.width = L.w;
  if (canvas.height !== L.h) canvas.height = L.h;
  canvas.dataset.state = 'computing';

  const g = image.getContext('2d');
  const batchCols = Math.max(1, Math.floor(BATCH_FRAMES / perColumn));
  for (let c0 = 0; c0 < cols; c0 += batchCols) {
    const bc = Math.min(batchCols, cols - c0);
    const counts = new Uint8Array(bc);
    const signal = new Float32Array(bc * perColumn * n);
    const reference = ref ? new Float32Array(bc * perColumn * n) : null;
    for (let c = 0; c < bc; c++) {
      const list = picks[c0 + c];
      counts[c] = list.length;
      list.forEach((t, j) => {
        const at = (c * perColumn + j) * n;
        takeFrame(sig.chs, sig.length, t, n, hop, signal, at);
        if (reference) takeFrame(ref.chs, ref.length, t, n, hop, reference, at);
      });
    }
    const r = await ask({ type: 'columns', batch: c0, n, hop, sampleRate, rows, fMin, fMax, mode, range, perColumn,
      counts, signal, reference }, reference ? [signal.buffer, reference.buffer, counts.buffer] : [signal.buffer, counts.buffer]);
    if (states.get(canvas) !== st) return { ...info, superseded: true };
    g.putImageData(new ImageData(r.rgba, r.cols, r.rows), c0, 0);
    paint(canvas, st);
  }
  st.ready = true;
  paint(canvas, st);
  Object.assign(canvas.dataset, { state: 'drawn', mode, columns: String(cols), rows: String(rows),
    plot: `${L.x0} ${L.y0} ${L.pw} ${L.ph}` });
  return info;
}

export function setSpectrogramCursor(canvas, position) {
  const st = states.get(canvas);
  if (!st) return;
  st.cursor = position !== null && Number.isFinite(position) ? Math.max(0, Math.min(1, position)) : null;
  paint(canvas, st);
}

export function repaintSpectrogram(canvas) {
  const st = states.get(canvas);
  if (st) paint(canvas, st);
}

export function spectrogramStale(canvas) {
  const st = states.get(canvas);
  if (!st) return true;
  const L = layout(canvas, st.opts.axes, st.opts.legend);
  return L.w !== st.L.w || L.h !== st.L.h;
}

// Every frame of a whole signal, |X[k]| / Σw per bin (scipy.signal.stft,
// scaling='spectrum'): for checks and for callers who want numbers, not
// pictures. The Worker refuses more than 2^24 values.
export async function stftMagnitudes(samples, sampleRate, { n, hop } = stftSettings(sampleRate)) {
  const sig = channelsOf(samples, 'the samples');
  const mono = new Float32Array(sig.length);
  for (let i = 0; i < sig.length; i++) {
    let v = 0;
    for (const c of sig.chs) v += c[i];
    mono[i] = sig.chs.length > 1 ? v / sig.chs.length : v;
  }
  const r = await ask({ type: 'magnitudes', samples: mono, n, hop }, [mono.buffer]);
  return { frames: r.frames, bins: r.bins, data: r.data, n, hop };
}

// Ticks of a log axis: 1, 2, 5 per decade within [lo, hi].
function logTicks(lo, hi) {
  const out = [];
  for (let d = Math.pow(10, Math.floor(Math.log10(lo))); d <= hi; d *= 10)
    for (const m of [1, 2, 5]) if (m * d >= lo && m * d <= hi) out.push(m * d);
  return out;
}

function hzLabel(f) {
  return f >= 1000 ? `${f / 1000} kHz` : `${f} Hz`;
}

function dbLabel(v, signed) {
  const s = Math.abs(v) < 1e-9 ? '0' : `${v < 0 ? '−' : signed ? '+' : ''}${Math.abs(v)}`;
  return `${s} dB`;
}

function paint(canvas, st) {
  const { L, opts, fMin, fMax, range, mode } = st;
  const { dpr, w, h, x0, y0, pw, ph } = L;
  if (canvas.width !== w || canvas.height !== h) return; // resized: the caller draws anew
  const g = canvas.getContext('2d');
  const muted = themeColour('--muted');
  g.fillStyle = themeColour('--wave-bg');
  g.fillRect(0, 0, w, h);
  g.imageSmoothingEnabled = false;
  g.drawImage(st.image, 0, 0, st.image.width, st.image.height, x0, y0, pw, ph);
  g.font = `${Math.round(11 * dpr)}px system-ui, sans-serif`;
  g.textBaseline = 'middle';
  if (opts.axes) {
    g.fillStyle = muted;
    g.textAlign = 'right';
    let last = -Infinity;
    for (const f of logTicks(fMin, fMax)) {
      const y = y0 + ph * (1 - Math.log(f / fMin) / Math.log(fMax / fMin));
      if (Math.abs(y - last) < 13 * dpr) continue;
      last = y;
      g.fillRect(x0 - 4 * dpr, Math.round(y), 4 * dpr, Math.max(1, Math.round(dpr)));
      g.fillText(hzLabel(f), x0 - 6 * dpr, Math.min(h - 6 * dpr, Math.max(6 * dpr, y)));
    }
  }
  if (opts.legend) {
    const bx = x0 + pw + 6 * dpr;
    const bw = 9 * dpr;
    const lut = mode === 'difference' ? COOL_WARM : CIVIDIS;
    for (let y = 0; y < ph; y++) {
      const i = Math.round((255 * (ph - 1 - y)) / Math.max(1, ph - 1)) * 3;
      g.fillStyle = `rgb(${lut[i]},${lut[i + 1]},${lut[i + 2]})`;
      g.fillRect(bx, y0 + y, bw, 1);
    }
    const [lo, hi] = mode === 'difference' ? [-range[1], range[1]] : range;
    const step = mode === 'difference' ? range[1] / 2 : (hi - lo) / 6;
    g.fillStyle = muted;
    g.textAlign = 'left';
    for (let v = lo; v <= hi + 1e-9; v += step) {
      const y = y0 + ph * (1 - (v - lo) / (hi - lo));
      g.fillRect(bx + bw, Math.round(y), 3 * dpr, Math.max(1, Math.round(dpr)));
      g.fillText(dbLabel(Math.round(v * 10) / 10, mode === 'difference'), bx + bw + 5 * dpr, y);
    }
  }
  if (st.cursor !== null) {
    const x = Math.round(x0 + st.cursor * (pw - 1));
    const lw = Math.max(1, Math.round(dpr));
    g.fillStyle = themeColour('--wave-bg');
    g.fillRect(x - lw, y0, 3 * lw, ph);
    g.fillStyle = themeColour('--ink');
    g.fillRect(x, y0, lw, ph);
  }
}
