// Integrated loudness per ITU-R BS.1770-4: K-weighting (a high-shelf
// pre-filter and the RLB high-pass), mean square over 400 ms blocks with 75 %
// overlap, an absolute gate at −70 LKFS and a relative gate 10 LU below the
// absolutely gated level; channel weights 1.0 (mono, left, right).
//
// The offline Worker uses the core's earshot_loudness_lkfs when the build
// exports it (then page and `earshot loudness` agree to the bit) and this
// module otherwise, e.g. when a build without it is served or wasm memory
// cannot hold a copy of a very long file.
//
// The K-weighting for any rate comes from the analog-prototype parameters
// that reproduce the Recommendation's 48 kHz coefficients (Table 1 and 2 of
// BS.1770-4) through the bilinear transform with a prewarped corner; the
// parameter values are recalled from memory and checked against the tables
// in tests/browser/units.test.js.

const SHELF = { f0: 1681.974450955533, gainDb: 3.999843853973347, q: 0.7071752369554196 };
const HIGHPASS = { f0: 38.13547087602444, q: 0.5003270373238773 };

// { b0, b1, b2, a1, a2 } of both stages at `rate` Hz (a0 = 1).
export function kWeighting(rate) {
  let K = Math.tan((Math.PI * SHELF.f0) / rate);
  const vh = Math.pow(10, SHELF.gainDb / 20);
  const vb = Math.pow(vh, 0.4996667741545416);
  let a0 = 1 + K / SHELF.q + K * K;
  const shelf = {
    b0: (vh + (vb * K) / SHELF.q + K * K) / a0,
    b1: (2 * (K * K - vh)) / a0,
    b2: (vh - (vb * K) / SHELF.q + K * K) / a0,
    a1: (2 * (K * K - 1)) / a0,
    a2: (1 - K / SHELF.q + K * K) / a0,
  };
  K = Math.tan((Math.PI * HIGHPASS.f0) / rate);
  a0 = 1 + K / HIGHPASS.q + K * K;
  const highpass = { b0: 1, b1: -2, b2: 1, a1: (2 * (K * K - 1)) / a0, a2: (1 - K / HIGHPASS.q + K * K) / a0 };
  return { shelf, highpass };
}

// Sums of K-weighted squares over consecutive segments of `step` samples
// (100 ms), for one channel.
function segmentEnergy(x, rate, step) {
  const { shelf: s, highpass: h } = kWeighting(rate);
  const n = Math.floor(x.length / step);
  const out = new Float64Array(n);
  // Direct form I, both stages in double precision.
  let x1 = 0, x2 = 0, y1 = 0, y2 = 0, z1 = 0, z2 = 0;
  for (let j = 0, t = 0; j < n; j++) {
    let acc = 0;
    for (const end = t + step; t < end; t++) {
      const v = x[t];
      const y = s.b0 * v + s.b1 * x1 + s.b2 * x2 - s.a1 * y1 - s.a2 * y2;
      x2 = x1; x1 = v;
      const z = y - 2 * y1 + y2 - h.a1 * z1 - h.a2 * z2;
      y2 = y1; y1 = y;
      z2 = z1; z1 = z;
      acc += z * z;
    }
    out[j] = acc;
    // After long silence the filter state decays towards subnormal numbers,
    // which are slow on many CPUs; values this small are some 600 dB below
    // the −70 LKFS gate, so zeroing them changes no result.
    if (Math.abs(y1) < 1e-30 && Math.abs(y2) < 1e-30) { y1 = 0; y2 = 0; }
    if (Math.abs(z1) < 1e-30 && Math.abs(z2) < 1e-30) { z1 = 0; z2 = 0; }
  }
  return out;
}

// Integrated loudness in LKFS (= LUFS) of planar channels (Float32Arrays of
// equal length) at `rate`. −Infinity when no block passes the gates or the
// signal is shorter than one 400 ms block.
export function integratedLoudness(channels, rate) {
  const step = Math.max(1, Math.round(0.1 * rate)); // a quarter of a block (75 % overlap)
  const energies = channels.map((x) => segmentEnergy(x, rate, step));
  const nSeg = energies.length ? energies[0].length : 0;
  const nBlocks = nSeg >= 4 ? nSeg - 3 : 0;
  if (nBlocks === 0) return -Infinity;
  const blockLen = 4 * step;
  // z[c][j]: mean square of channel c in block j.
  const z = energies.map((e) => {
    const b = new Float64Array(nBlocks);
    for (let j = 0; j < nBlocks; j++) b[j] = (e[j] + e[j + 1] + e[j + 2] + e[j + 3]) / blockLen;
    return b;
  });
  const blockLoudness = new Float64Array(nBlocks);
  for (let j = 0; j < nBlocks; j++) {
    let sum = 0;
    for (let c = 0; c < z.length; c++) sum += z[c][j];
    blockLoudness[j] = sum > 0 ? -0.691 + 10 * Math.log10(sum) : -Infinity;
  }
  const gatedMean = (threshold) => {
    let count = 0;
    const sums = new Float64Array(z.length);
    for (let j = 0; j < nBlocks; j++) {
      if (!(blockLoudness[j] > threshold)) continue;
      count++;
      for (let c = 0; c < z.length; c++) sums[c] += z[c][j];
    }
    if (count === 0) return -Infinity;
    let total = 0;
    for (let c = 0; c < z.length; c++) total += sums[c] / count;
    return total > 0 ? -0.691 + 10 * Math.log10(total) : -Infinity;
  };
  const absolute = gatedMean(-70);
  if (absolute === -Infinity) return -Infinity;
  const relative = Math.max(absolute - 10, -70);
  return gatedMean(relative);
}

// Gain in dB that brings `from` to `to` loudness (0 when either is silent).
export function matchGainDb(fromLkfs, toLkfs) {
  if (!Number.isFinite(fromLkfs) || !Number.isFinite(toLkfs)) return 0;
  return toLkfs - fromLkfs;
}
