// The short-time Fourier transform behind the spectrograms: a radix-2 real
// FFT, the periodic Hann window, framing as scipy.signal.stft frames
// (boundary='zeros', padded=True), and the log-frequency rows a picture is
// made of. Pure functions: the spectrogram Worker (stft-worker.js) runs them,
// and Node can import them.
//
// Framing (SciPy 1.10 documentation of scipy.signal.stft, defaults
// boundary='zeros', padded=True): frame t covers samples
// [t·hop − N/2, t·hop + N/2), zeros outside the signal, for
// t = 0 … ceil(L / hop); scaling='spectrum' divides by the window's sum.

// Frame length for a sample rate: 2048 samples (42.7 ms) at 48 kHz and the
// power of two nearest to the same duration at other rates; hop N/4.
export function stftSettings(sampleRate) {
  if (!(sampleRate > 0)) throw new RangeError(`sample rate ${sampleRate} is not a positive number`);
  const n = Math.max(64, Math.min(16384, 2 ** Math.round(Math.log2((2048 * sampleRate) / 48000))));
  return { n, hop: n / 4, window: 'periodic Hann' };
}

export function frameCount(length, hop) {
  return Math.ceil(length / hop) + 1;
}

// Periodic Hann (scipy.signal.get_window('hann', N), fftbins=True):
// w[i] = 0.5 − 0.5·cos(2πi/N).
export function periodicHann(n) {
  const w = new Float64Array(n);
  for (let i = 0; i < n; i++) w[i] = 0.5 - 0.5 * Math.cos((2 * Math.PI * i) / n);
  return w;
}

// Real FFT of n = 2^k points through one complex FFT of n/2 points
// (even samples as real parts, odd as imaginary) and the split step
// X[k] = E[k] + e^(−2πik/n)·O[k]. Double precision throughout.
export class RealFFT {
  constructor(n) {
    if (!Number.isInteger(n) || n < 4 || (n & (n - 1)) !== 0) throw new RangeError(`FFT length ${n} is not a power of two ≥ 4`);
    this.n = n;
    const m = n / 2;
    this.m = m;
    this.rev = new Uint32Array(m);
    const bits = Math.log2(m);
    for (let i = 0; i < m; i++) {
      let r = 0;
      for (let b = 0; b < bits; b++) r |= ((i >> b) & 1) << (bits - 1 - b);
      this.rev[i] = r;
    }
    // e^(−2πij/m) for the complex FFT, e^(−2πik/n) for the split.
    this.cm = new Float64Array(m / 2 || 1);
    this.sm = new Float64Array(m / 2 || 1);
    for (let j = 0; j < m / 2; j++) {
      this.cm[j] = Math.cos((2 * Math.PI * j) / m);
      this.sm[j] = -Math.sin((2 * Math.PI * j) / m);
    }
    this.cn = new Float64Array(m + 1);
    this.sn = new Float64Array(m + 1);
    for (let k = 0; k <= m; k++) {
      this.cn[k] = Math.cos((2 * Math.PI * k) / n);
      this.sn[k] = -Math.sin((2 * Math.PI * k) / n);
    }
    this.zr = new Float64Array(m);
    this.zi = new Float64Array(m);
  }

  // x: n real samples; re, im: n/2 + 1 outputs (bins 0 … n/2).
  forward(x, re, im) {
    const { m, rev, zr, zi, cm, sm, cn, sn } = this;
    for (let i = 0; i < m; i++) {
      const r = rev[i];
      zr[r] = x[2 * i];
      zi[r] = x[2 * i + 1];
    }
    for (let len = 2; len <= m; len *= 2) {
      const half = len / 2;
      const step = m / len;
      for (let s = 0; s < m; s += len) {
        for (let j = 0; j < half; j++) {
          const wr = cm[j * step];
          const wi = sm[j * step];
          const a = s + j;
          const b = a + half;
          const tr = wr * zr[b] - wi * zi[b];
          const ti = wr * zi[b] + wi * zr[b];
          zr[b] = zr[a] - tr;
          zi[b] = zi[a] - ti;
          zr[a] += tr;
          zi[a] += ti;
        }
      }
    }
    for (let k = 0; k <= m; k++) {
      const a = zr[k % m];
      const b = zi[k % m];
      const c = zr[(m - k) % m];
      const d = zi[(m - k) % m];
      const er = 0.5 * (a + c);
      const ei = 0.5 * (b - d);
      const or = 0.5 * (b + d);
      const oi = -0.5 * (a - c);
      re[k] = er + cn[k] * or - sn[k] * oi;
      im[k] = ei + cn[k] * oi + sn[k] * or;
    }
  }
}

// One frame's power |X[k]|² (k = 0 … N/2) of a windowed frame.
export class FramePower {
  constructor(n) {
    this.n = n;
    this.fft = new RealFFT(n);
    this.window = periodicHann(n);
    this.windowSum = this.window.reduce((s, v) => s + v, 0);
    this.buf = new Float64Array(n);
    this.re = new Float64Array(n / 2 + 1);
    this.im = new Float64Array(n / 2 + 1);
  }

  // frame: n samples (already taken from the signal, zeros outside it);
  // out: n/2 + 1 powers, written (max = false) or max-held (max = true).
  power(frame, offset, out, max) {
    const { n, buf, window, re, im } = this;
    for (let i = 0; i < n; i++) buf[i] = frame[offset + i] * window[i];
    this.fft.forward(buf, re, im);
    for (let k = 0; k <= n / 2; k++) {
      const p = re[k] * re[k] + im[k] * im[k];
      if (!max || p > out[k]) out[k] = p;
    }
  }
}

// Copies frame t of a signal (one array, or channels averaged) into dst at
// offset, zeros outside the signal: the framing above.
export function takeFrame(channels, length, t, n, hop, dst, offset) {
  const start = t * hop - n / 2;
  const C = channels.length;
  for (let i = 0; i < n; i++) {
    const s = start + i;
    let v = 0;
    if (s >= 0 && s < length) {
      for (let c = 0; c < C; c++) v += channels[c][s];
      if (C > 1) v /= C;
    }
    dst[offset + i] = v;
  }
}

// The rows of a log-frequency picture, bottom (row rows−1) = fMin to top
// (row 0) = fMax. A row whose band [f/√r, f·√r] (r the ratio between rows)
// holds bin centres takes the largest power among them; a narrower row
// interpolates the power linearly between the two bins around its centre.
// Returns { lo, hi, frac } per row: bins lo … hi (inclusive) or, when
// frac ≥ 0, lo + frac between bins lo and lo + 1.
export function logRows(rows, fMin, fMax, n, sampleRate) {
  const binHz = sampleRate / n;
  const half = n / 2;
  const lo = new Int32Array(rows);
  const hi = new Int32Array(rows);
  const frac = new Float64Array(rows);
  const ratio = Math.pow(fMax / fMin, 1 / Math.max(1, rows - 1));
  for (let y = 0; y < rows; y++) {
    const f = fMin * Math.pow(fMax / fMin, (rows - 1 - y) / Math.max(1, rows - 1));
    const a = Math.ceil((f / Math.sqrt(ratio)) / binHz);
    const b = Math.min(half, Math.floor((f * Math.sqrt(ratio)) / binHz));
    if (b >= a) {
      lo[y] = a;
      hi[y] = b;
      frac[y] = -1;
    } else {
      const x = Math.min(half - 1e-9, f / binHz);
      lo[y] = Math.floor(x);
      hi[y] = lo[y] + 1;
      frac[y] = x - lo[y];
    }
  }
  return { lo, hi, frac };
}

// Power of one row from a frame's powers.
export function rowPower(p, map, y) {
  const a = map.lo[y];
  const f = map.frac[y];
  if (f >= 0) return p[a] + f * (p[a + 1] - p[a]);
  let m = p[a];
  for (let k = a + 1; k <= map.hi[y]; k++) if (p[k] > m) m = p[k];
  return m;
}
