// The spectrogram Worker: FFTs, levels in dB and colours, off the page's
// thread; the page only draws the strips of RGBA pixels it returns
// (spectrogram.js). Every array arrives and leaves transferred.
//
// Messages in (all carry `id`):
//   { type: 'columns', batch, n, hop, sampleRate, rows, fMin, fMax, mode, range,
//     perColumn, counts: Uint8Array(cols), signal: Float32Array(cols·perColumn·n),
//     reference: Float32Array | null }
//       column c holds counts[c] frames of n samples at c·perColumn·n (the rest
//       unused); its power per bin is the largest over its frames (a frame
//       decimated away cannot hide a transient inside the column's kept
//       frames). mode 'level': 20·log10(2|X|/Σw) over range [lo, hi] dB, in
//       cividis. mode 'difference': 20·log10|S| − 20·log10|R| per bin (both
//       floored at range[0] dB), over [−range[1], +range[1]] dB, in cool-warm.
//       → { type: 'columns', id, batch, cols, rows, rgba: Uint8ClampedArray }
//         (rows × cols pixels, row 0 = highest frequency)
//   { type: 'magnitudes', samples: Float32Array, n, hop }
//       every frame of the whole signal, |X[k]|/Σw (scipy.signal.stft's
//       scaling='spectrum') → { type: 'magnitudes', id, frames, bins, data: Float32Array }
// Failures → { type: 'failed', id, message }.
import { FramePower, frameCount, logRows, rowPower, takeFrame } from './stft.js';
import { CIVIDIS, COOL_WARM } from './colormaps.js';

const MAX_MAGNITUDES = 1 << 24; // values in one 'magnitudes' answer (64 MiB)
const powers = new Map(); // n → FramePower
const rowMaps = new Map(); // key → logRows

function framePower(n) {
  let p = powers.get(n);
  if (!p) {
    p = new FramePower(n);
    powers.set(n, p);
  }
  return p;
}

function rowMap(rows, fMin, fMax, n, sampleRate) {
  const key = `${rows} ${fMin} ${fMax} ${n} ${sampleRate}`;
  let m = rowMaps.get(key);
  if (!m) {
    if (rowMaps.size > 16) rowMaps.clear();
    m = logRows(rows, fMin, fMax, n, sampleRate);
    rowMaps.set(key, m);
  }
  return m;
}

function columns(msg) {
  const { n, rows, fMin, fMax, sampleRate, mode, range, perColumn, counts, signal, reference } = msg;
  if (!(rows > 0) || !(n > 0) || !(perColumn > 0)) throw new RangeError('columns: rows, n and perColumn must be positive');
  const cols = counts.length;
  if (signal.length < cols * perColumn * n || (reference && reference.length < cols * perColumn * n))
    throw new RangeError(`columns: ${cols} columns of ${perColumn} frames of ${n} samples need more samples than were sent`);
  const fp = framePower(n);
  const map = rowMap(rows, fMin, fMax, n, sampleRate);
  const half = n / 2 + 1;
  const ps = new Float64Array(half);
  const pr = new Float64Array(half);
  const rgba = new Uint8ClampedArray(cols * rows * 4);
  // Power of a full-scale sine's peak bin: (Σw/2)²; levels are relative to it.
  const full = (fp.windowSum / 2) ** 2;
  const [lo, hi] = range;
  const floor = full * Math.pow(10, lo / 10);
  const diff = mode === 'difference';
  const lut = diff ? COOL_WARM : CIVIDIS;
  for (let c = 0; c < cols; c++) {
    const base = c * perColumn * n;
    for (let j = 0; j < counts[c]; j++) {
      fp.power(signal, base + j * n, ps, j > 0);
      if (diff) fp.power(reference, base + j * n, pr, j > 0);
    }
    for (let y = 0; y < rows; y++) {
      let t;
      if (diff) {
        const d = 10 * Math.log10(Math.max(floor, rowPower(ps, map, y)) / Math.max(floor, rowPower(pr, map, y)));
        t = (d + hi) / (2 * hi);
      } else {
        t = (10 * Math.log10(Math.max(1e-300, rowPower(ps, map, y) / full)) - lo) / (hi - lo);
      }
      const i = Math.round(255 * Math.min(1, Math.max(0, t))) * 3;
      const o = (y * cols + c) * 4;
      rgba[o] = lut[i];
      rgba[o + 1] = lut[i + 1];
      rgba[o + 2] = lut[i + 2];
      rgba[o + 3] = 255;
    }
  }
  return { type: 'columns', id: msg.id, batch: msg.batch, cols, rows, rgba };
}

function magnitudes(msg) {
  const { samples, n, hop } = msg;
  if (!(hop > 0 && hop <= n)) throw new RangeError(`magnitudes: hop ${hop} must lie in 1 … ${n}`);
  const frames = frameCount(samples.length, hop);
  const bins = n / 2 + 1;
  if (frames * bins > MAX_MAGNITUDES)
    throw new RangeError(`magnitudes: ${frames} frames × ${bins} bins is more than ${MAX_MAGNITUDES} values`);
  const fp = framePower(n);
  const frame = new Float32Array(n);
  const p = new Float64Array(bins);
  const data = new Float32Array(frames * bins);
  for (let t = 0; t < frames; t++) {
    takeFrame([samples], samples.length, t, n, hop, frame, 0);
    fp.power(frame, 0, p, false);
    for (let k = 0; k < bins; k++) data[t * bins + k] = Math.sqrt(p[k]) / fp.windowSum;
  }
  return { type: 'magnitudes', id: msg.id, frames, bins, data };
}

self.onmessage = (e) => {
  const msg = e.data;
  try {
    if (msg.type === 'columns') {
      const r = columns(msg);
      self.postMessage(r, [r.rgba.buffer]);
    } else if (msg.type === 'magnitudes') {
      const r = magnitudes(msg);
      self.postMessage(r, [r.data.buffer]);
    } else {
      throw new Error(`unknown message type '${msg.type}'`);
    }
  } catch (err) {
    self.postMessage({ type: 'failed', id: msg.id, message: err && err.message ? err.message : String(err) });
  }
};
