// The standard test signal of `earshot verify` and the self-check, and the
// FNV-1a 64 output hash: a line-by-line port of dsp/cli/test_signal.hpp.
// Every step is an IEEE double operation JavaScript performs exactly as C++
// does without contraction (+ − × ÷, floor, exact scaling by powers of two),
// so the samples are bit-identical to the native ones. tests/browser checks
// the hash against `earshot verify --json` at several rates.

const LN2 = 0.69314718055994530942;
const LN10 = 2.30258509299404568402;

// x · 2^n, exact (no rounding while the result stays normal).
function ldexp(x, n) {
  let y = x;
  for (; n > 0; n--) y *= 2;
  for (; n < 0; n++) y *= 0.5;
  return y;
}

// e^x: range reduction to |r| ≤ ln 2 / 2 and 24 Taylor terms (as exp_det).
export function expDet(x) {
  const k = x / LN2;
  const n = Math.trunc(k >= 0 ? k + 0.5 : k - 0.5);
  const r = x - n * LN2;
  let term = 1;
  let sum = 1;
  for (let i = 1; i < 24; ++i) {
    term = (term * r) / i;
    sum += term;
  }
  return ldexp(sum, n);
}

// sin(2π·p) for p in [0, 1) (as sin_cycles).
export function sinCycles(p) {
  const pi = 3.14159265358979323846;
  let x = (p > 0.5 ? p - 1.0 : p) * (2.0 * pi);
  if (x > pi / 2) x = pi - x;
  if (x < -pi / 2) x = -pi - x;
  const x2 = x * x;
  let term = x;
  let sum = x;
  for (let i = 3; i <= 23; i += 2) {
    term = (-term * x2) / ((i - 1) * i);
    sum += term;
  }
  return sum;
}

const wrap = (p) => p - Math.floor(p);

export function sweepTop(rate) {
  let top = 20;
  for (let k = 0; k < 10 && top * 2 <= 0.45 * rate; ++k) top *= 2;
  return top;
}

const LCG_A = 6364136223846793005n; // Knuth's MMIX constants, as test_signal.hpp
const LCG_C = 1442695040888963407n;
const MASK64 = (1n << 64n) - 1n;

// Float32Array of round(seconds · rate) samples.
export function testSignal(rate, seconds) {
  const n = Math.trunc(seconds * rate + 0.5);
  const s = new Float64Array(n > 0 ? n : 0);
  const nSweep = Math.floor((n * 8) / 10);
  const nActive = Math.floor((n * 9) / 10);

  const top = sweepTop(rate);
  let octaves = 0;
  for (let f = 20; f < top; f *= 2) ++octaves;
  const ratio = nSweep > 1 ? expDet((octaves * LN2) / (nSweep - 1)) : 1.0;
  const fade = Math.trunc(0.010 * rate + 0.5);
  let inc = 20.0 / rate;
  let phase = 0;
  for (let i = 0; i < nSweep; ++i) {
    let g = 1;
    if (fade > 0 && i < fade) g = i / fade;
    if (fade > 0 && nSweep - 1 - i < fade) g = (nSweep - 1 - i) / fade;
    s[i] += 0.5 * g * sinCycles(phase);
    phase = wrap(phase + inc);
    inc *= ratio;
  }

  const period = Math.trunc(0.5 * rate + 0.5);
  const decay = expDet(-1.0 / (0.150 * rate));
  let env = 1;
  let p1 = 0;
  let p3 = 0;
  for (let i = 0; i < nActive; ++i) {
    if (period > 0 && i % period === 0) {
      env = 1;
      p1 = 0;
      p3 = 0;
    }
    s[i] += 0.35 * env * (sinCycles(p1) + 0.5 * sinCycles(p3));
    p1 = wrap(p1 + 220.0 / rate);
    p3 = wrap(p3 + 660.0 / rate);
    env *= decay;
  }

  const burst = Math.trunc(0.030 * rate + 0.5);
  const every = Math.trunc(0.250 * rate + 0.5);
  const first = Math.trunc(0.100 * rate + 0.5);
  let state = 1n;
  for (let i = first; i < nActive; ++i) {
    if (every <= 0 || (i - first) % every >= burst) continue;
    state = (state * LCG_A + LCG_C) & MASK64;
    const u = Number(state >> 11n) * (1.0 / 9007199254740992.0);
    s[i] += 0.25 * (2.0 * u - 1.0);
  }

  let peak = 0;
  for (let i = 0; i < n; i++) peak = Math.max(peak, Math.abs(s[i]));
  const scale = peak > 0 ? expDet((-6.0 / 20.0) * LN10) / peak : 0.0;
  const out = new Float32Array(s.length);
  for (let i = 0; i < s.length; i++) out[i] = s[i] * scale;
  return out;
}

// FNV-1a 64 over the little-endian bytes of each float32 sample of the arrays
// given, in order (the hash of their concatenation, without copying), as a
// 16-digit hex string. The 64-bit state is four 16-bit limbs, so every step
// stays in exact int32 arithmetic (about 20× faster than doubles with
// modulo: a 10-minute stereo render hashes in well under a second). The prime
// is 2^40 + 0x1b3, so h · prime = h · 0x1b3 + (h << 40) mod 2^64, and h << 40
// is limb k moved to limb k + 2, shifted left by 8. The bytes are read through
// a Uint8Array view, in the platform's order: little-endian on every platform
// browsers and Node run on, as WebAssembly memory is. The one hash of the
// page: self-check, grid cells, stimuli of listening tests, results files.
export function fnv1a64(...parts) {
  // offset basis 14695981039346656037 = 0xcbf29ce484222325
  let h0 = 0x2325;
  let h1 = 0x8422;
  let h2 = 0x9ce4;
  let h3 = 0xcbf2;
  for (const samples of parts) {
    const bytes = new Uint8Array(samples.buffer, samples.byteOffset, samples.byteLength);
    for (let i = 0; i < bytes.length; i++) {
      h0 ^= bytes[i];
      const t0 = h0 * 0x1b3;
      const t1 = h1 * 0x1b3 + (t0 >>> 16);
      const t2 = h2 * 0x1b3 + (h0 << 8) + (t1 >>> 16);
      const t3 = h3 * 0x1b3 + (h1 << 8) + (t2 >>> 16);
      h0 = t0 & 0xffff;
      h1 = t1 & 0xffff;
      h2 = t2 & 0xffff;
      h3 = t3 & 0xffff;
    }
  }
  const hex = (v) => v.toString(16).padStart(4, '0');
  return hex(h3) + hex(h2) + hex(h1) + hex(h0);
}

// The bits of one float32 as 8 hex digits (for a readable difference).
export function floatBits(v) {
  const f = new Float32Array([v]);
  return new Uint32Array(f.buffer)[0].toString(16).padStart(8, '0');
}
