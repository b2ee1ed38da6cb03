// Stimulus preparation with the WebAssembly core on the page: rendering a
// clip through an effect, the BS.1534-3 anchors (earshot_anchor), BS.1770-4
// loudness matching (earshot_loudness_match), and the stimulus hash
// (FNV-1a 64 over the float32 little-endian samples as played).
// Audio here is interleaved Float32Array { data, channels, rate, frames }.

// FNV-1a 64 over the bytes of `f32` (little-endian float32), as the results
// format and `earshot verify` define it. 64-bit arithmetic in two 32-bit
// halves: prime 2^40 + 0x1b3, offset basis 0xcbf29ce484222325.
export function fnv1a64Float32(f32) {
  const bytes = new Uint8Array(f32.buffer, f32.byteOffset, f32.byteLength);
  const le = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;
  let hi = 0xcbf29ce4 >>> 0;
  let lo = 0x84222325 >>> 0;
  for (let i = 0; i < bytes.length; i++) {
    const b = le ? bytes[i] : bytes[(i & ~3) + 3 - (i & 3)];
    lo = (lo ^ b) >>> 0;
    const l0 = lo & 0xffff;
    const l1 = lo >>> 16;
    const t0 = l0 * 0x1b3;
    const t1 = l1 * 0x1b3 + (t0 >>> 16);
    const nhi = (Math.imul(hi, 0x1b3) + (t1 >>> 16) + (lo << 8)) >>> 0;
    lo = (((t1 & 0xffff) << 16) | (t0 & 0xffff)) >>> 0;
    hi = nhi;
  }
  return hi.toString(16).padStart(8, '0') + lo.toString(16).padStart(8, '0');
}

export function interleave(planar) {
  const ch = planar.length;
  const n = planar[0].length;
  const out = new Float32Array(n * ch);
  for (let c = 0; c < ch; c++) {
    const x = planar[c];
    for (let t = 0; t < n; t++) out[t * ch + c] = x[t];
  }
  return out;
}

export function planar(audio) {
  const { data, channels, frames } = audio;
  const out = [];
  for (let c = 0; c < channels; c++) {
    const x = new Float32Array(frames);
    for (let t = 0; t < frames; t++) x[t] = data[t * channels + c];
    out.push(x);
  }
  return out;
}

// The core's functions over one interleaved clip copied into wasm memory.
export class CoreAudio {
  constructor(variant) {
    this.v = variant;
    const missing = ['earshot_loudness', 'earshot_loudness_match', 'earshot_anchor'].filter((f) => typeof variant.exports[f] !== 'function');
    if (missing.length) throw new Error(`this WebAssembly build lacks ${missing.join(', ')}; rebuild it from the current sources`);
  }

  withClip(audio, extraBytes, fn) {
    const v = this.v;
    const bytes = audio.data.length * 4;
    const p = v.malloc(bytes);
    const q = v.malloc(Math.max(extraBytes, 16));
    try {
      v.refresh();
      v.f32.set(audio.data, p >> 2);
      return fn(p, q);
    } finally {
      if (!v.broken) { v.free(q); v.free(p); }
    }
  }

  check(status, what) {
    if (status !== 0) throw new Error(`${what}: ${this.v.statusText(status)}`);
  }

  loudness(audio) {
    return this.withClip(audio, 8, (p, q) => {
      const e = this.v.exports;
      this.check(e.earshot_loudness(p, audio.frames, audio.channels, audio.rate, 0, q), 'loudness');
      this.v.refresh();
      return new Float64Array(this.v.memory.buffer, q, 1)[0];
    });
  }

  // A copy of `audio` matched to target LKFS, and the gain applied.
  match(audio, target) {
    return this.withClip(audio, 8, (p, q) => {
      const e = this.v.exports;
      this.check(e.earshot_loudness_match(p, audio.frames, audio.channels, audio.rate, 0, target, q),
        `matching to ${target} LKFS`);
      this.v.refresh();
      const gainDb = new Float64Array(this.v.memory.buffer, q, 1)[0];
      const data = this.v.f32.slice(p >> 2, (p >> 2) + audio.data.length);
      return { audio: { ...audio, data }, gainDb };
    });
  }

  // The low-pass anchor of `audio` with the pass band ending at `passband` Hz.
  anchor(audio, passband) {
    return this.withClip(audio, audio.data.length * 4, (p, q) => {
      const e = this.v.exports;
      this.check(e.earshot_anchor(p, q, audio.frames, audio.channels, audio.rate, passband), `the ${passband} Hz anchor`);
      this.v.refresh();
      return { ...audio, data: this.v.f32.slice(q >> 2, (q >> 2) + audio.data.length) };
    });
  }

  // `audio` through an effect file at the clip's rate, each channel with a
  // fresh effect; the effect's latency is removed so the output stays
  // sample-aligned with the clip (it is fed that many zeros at the end).
  render(effectBytes, controls, audio) {
    const out = [];
    for (const x of planar(audio)) {
      const fx = this.v.createEffect(effectBytes, audio.rate);
      try {
        for (const [k, val] of Object.entries(controls)) fx.setControl(k, val);
        // Jump to the targets: render from a settled state, not mid-ramp.
        fx.reset();
        const lat = fx.latency;
        const input = new Float32Array(x.length + lat);
        input.set(x);
        const y = new Float32Array(input.length);
        fx.process(input, y);
        if (fx.nonFiniteCount) throw new Error(`the effect produced non-finite output in ${fx.nonFiniteCount} blocks`);
        out.push(y.subarray(lat));
      } finally {
        fx.destroy();
      }
    }
    return { ...audio, data: interleave(out) };
  }
}
