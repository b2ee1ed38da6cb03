// The offline Web Worker: renders files and runs the self-check, off the
// page's thread. One job at a time; the page cancels a job by terminating
// the worker and starting a new one.
//
// Messages in (all carry `id`, `wasmUrl` and `variant`, the build to use):
//   { type: 'check', effect: ArrayBuffer, reference: {...} | null }
//       the standard test signal at the model rate, controls at the file's
//       defaults → { type: 'checked', id, result }. A reference of a site
//       (site.json) or { output_hash, seconds? } alone (web/embed.js).
//   { type: 'render', effect: ArrayBuffer, settings, source }
//       source { kind: 'wav', file: Blob, name } (read here, at the file's
//       rate; the core resamples to the model rate and back) or
//       { kind: 'pcm', rate, channels: [Float32Array], name } (already decoded)
//       → { type: 'progress', id, done, total } ... { type: 'rendered', id, ... }
//       or { type: 'fallback', id, reason } when a WAV needs the browser's decoder
//   { type: 'decode', source: { kind: 'wav', file: Blob, name } }
//       the WAV's samples at its own rate, their loudness and hash, no effect
//       (the comparison grid's dry and reference cells) → { type: 'decoded', id, result }
// Failures → { type: 'failed', id, message }.
import { AlignedRender, loadVariant, MAX_RATE, MIN_RATE } from '../worklet/loader.js';
import { readWavHeader, decodeFrames, WavError, MAX_RENDER_FRAMES } from './wav.js';
import { integratedLoudness } from './loudness.js';
import { testSignal, fnv1a64, floatBits } from './test-signal.js';

const SLICE = 1 << 16; // frames read and processed per step
const PEAK_BUCKETS = 2048; // waveform resolution sent to the page
const variants = new Map(); // wasm URL → Promise<Variant>

// One Variant per build for the Worker's life. After a trap its instance is
// renewed from the compiled module by the loader when the next effect is
// created (worklet/loader.js, Variant.renew), so the next job works.
function variantFor(url, name) {
  let v = variants.get(url);
  if (!v) {
    v = (async () => {
      const res = await fetch(url);
      if (!res.ok) throw new Error(`cannot load the ${name} WebAssembly build (${url}): HTTP ${res.status}`);
      const module = await WebAssembly.compile(await res.arrayBuffer());
      return loadVariant(module, { name });
    })();
    v.catch(() => {
      if (variants.get(url) === v) variants.delete(url); // a failed load is tried again by the next job
    });
    variants.set(url, v);
  }
  return v;
}

// An effect streaming at hostRate, or at its own model rate when hostRate is 0.
function effectAt(variant, bytes, hostRate) {
  let fx = variant.createEffect(bytes, hostRate || 48000);
  const modelRate = fx.info.model_rate;
  if (!hostRate && modelRate !== 48000) {
    fx.destroy();
    fx = variant.createEffect(bytes, modelRate);
  }
  return fx;
}

// ---------------------------------------------------------------- self-check

async function check(msg) {
  const variant = await variantFor(msg.wasmUrl, msg.variant);
  const fx = effectAt(variant, new Uint8Array(msg.effect), 0);
  const rate = fx.info.model_rate;
  const seconds = (msg.reference && msg.reference.seconds) || 3; // `earshot verify`'s default length
  const started = Date.now();
  let x;
  let y;
  let nonfinite;
  try {
    x = testSignal(rate, seconds);
    y = new Float32Array(x.length);
    fx.process(x, y);
    nonfinite = fx.nonFiniteCount;
  } finally {
    fx.destroy();
  }
  const result = {
    variant: fx.variantName,
    rate,
    seconds,
    samples: y.length,
    signalHash: fnv1a64(x),
    outputHash: fnv1a64(y),
    nonfinite,
    elapsedMs: Date.now() - started,
    excerptBits: Array.from(y.subarray(0, 64), floatBits),
    reference: null,
    pass: null,
    difference: null,
  };
  const ref = msg.reference;
  if (!ref) return result;
  result.reference = { outputHash: ref.output_hash, signalHash: ref.signal_hash, variant: ref.variant };
  // A site's reference carries the signal's hash and length; an embed's
  // (web/embed.js) only the output hash of `earshot verify FILE --json`.
  if ((ref.signal_hash !== undefined && result.signalHash !== ref.signal_hash) ||
      (ref.samples !== undefined && result.samples !== ref.samples)) {
    result.pass = false;
    result.difference = {
      kind: 'signal',
      text: `the page built a different test signal (hash ${result.signalHash}, ${result.samples} samples; native ${ref.signal_hash}, ${ref.samples} samples)`,
    };
    return result;
  }
  result.pass = result.outputHash === ref.output_hash;
  if (result.pass) return result;
  if (!ref.data && !ref.excerpt_bits) {
    result.difference = { kind: 'hash', text: `the output hash here is ${result.outputHash}, the reference is ${ref.output_hash}` };
    return result;
  }
  // Find the first differing sample: in the whole native output when it can
  // be fetched, else in the excerpt.
  let native = null;
  let source = 'the whole native output';
  try {
    const res = await fetch(new URL(ref.data, msg.siteUrl));
    if (res.ok) native = new Float32Array(await res.arrayBuffer());
  } catch {
    native = null;
  }
  if (!native || native.length !== y.length) {
    source = `the first ${ref.excerpt_bits.length} native samples`;
    native = new Float32Array(new Uint32Array(ref.excerpt_bits.map((b) => parseInt(b, 16))).buffer);
  }
  const a = new Uint32Array(y.buffer);
  const b = new Uint32Array(native.buffer, native.byteOffset, native.length);
  let index = -1;
  for (let i = 0; i < b.length; i++) {
    if (a[i] !== b[i]) {
      index = i;
      break;
    }
  }
  result.difference = index < 0
    ? { kind: 'beyond', source, text: `the hashes differ but ${source} agrees; the difference lies after sample ${b.length - 1}` }
    : {
        kind: 'sample',
        source,
        index,
        browser: y[index],
        browserBits: floatBits(y[index]),
        native: native[index],
        nativeBits: floatBits(native[index]),
      };
  return result;
}

// ---------------------------------------------------------------- render

function peaks(channels) {
  const n = channels[0].length;
  const buckets = Math.min(PEAK_BUCKETS, Math.max(1, n));
  const lo = new Float32Array(buckets);
  const hi = new Float32Array(buckets);
  for (let k = 0; k < buckets; k++) {
    const from = Math.floor((k * n) / buckets);
    const to = Math.max(from + 1, Math.floor(((k + 1) * n) / buckets));
    let mn = 0;
    let mx = 0;
    for (const ch of channels) {
      for (let i = from; i < to && i < n; i++) {
        const v = ch[i];
        if (v < mn) mn = v;
        if (v > mx) mx = v;
      }
    }
    lo[k] = mn;
    hi[k] = mx;
  }
  return { lo, hi };
}

function peakOf(channels) {
  let p = 0;
  for (const ch of channels) for (let i = 0; i < ch.length; i++) p = Math.max(p, Math.abs(ch[i]));
  return p;
}

// Integrated loudness (BS.1770-4) by the core's earshot_loudness_lkfs when the
// build exports it — the same figure `earshot loudness` prints natively — else
// by web/js/loudness.js. The Worker's memory is released with the Worker.
function loudness(variant, channels, rate) {
  if (typeof variant.exports.earshot_loudness_lkfs === 'function') {
    let v = NaN;
    try {
      v = variant.loudnessOfChannels(channels, rate);
    } catch (e) {
      if (variant.broken) throw e; // a trap is an error, not a reason to measure elsewhere
      // No room in WebAssembly memory for a copy of a long file: the JS meter.
    }
    if (!Number.isNaN(v)) return { lkfs: v, by: 'core' };
  }
  return { lkfs: integratedLoudness(channels, rate), by: 'javascript' };
}

function applySettings(fx, settings) {
  for (const [name, value] of Object.entries(settings.controls || {})) fx.setControl(name, value);
  fx.setMix(settings.bypass ? 0 : settings.mix);
  fx.setGain(settings.inputDb, settings.outputDb);
  // As `earshot render`: the render starts at the settings, without a ramp.
  fx.reset();
}

async function render(msg) {
  const { source, settings } = msg;
  let rate;
  let frames;
  let nChannels;
  let header = null;
  let input;
  let how;
  if (source.kind === 'wav') {
    const file = source.file;
    const read = (o, n) => file.slice(o, o + n).arrayBuffer();
    try {
      header = await readWavHeader(read, file.size, `'${source.name}'`);
    } catch (e) {
      if (e instanceof WavError) return { fallback: e.message };
      throw e;
    }
    rate = header.rate;
    frames = header.frames;
    nChannels = header.channels;
    how = `read as WAV (${header.format === 3 ? 'float' : 'integer'} ${header.bits}-bit) at its own rate`;
  } else {
    rate = source.rate;
    frames = source.channels[0].length;
    nChannels = source.channels.length;
    input = source.channels;
    how = source.how || 'decoded by the browser';
  }
  if (nChannels < 1 || nChannels > 2)
    throw new Error(`'${source.name}' has ${nChannels} channels; the page renders mono or stereo files only`);
  if (rate < MIN_RATE || rate > MAX_RATE)
    throw new Error(`'${source.name}' has sample rate ${rate} Hz; earshot streams run at ${MIN_RATE} .. ${MAX_RATE} Hz`);
  if (frames === 0) throw new Error(`'${source.name}' holds no audio samples`);
  if (frames > MAX_RENDER_FRAMES)
    throw new Error(`'${source.name}' is ${frames} frames long (${(frames / rate / 60).toFixed(1)} minutes); the page renders at most ${MAX_RENDER_FRAMES} frames per file (11.6 minutes at 48 kHz): use 'earshot render' for longer files`);

  const variant = await variantFor(msg.wasmUrl, msg.variant);
  const bytes = new Uint8Array(msg.effect);
  // One stream of the file's channels (stereo runs left and right in
  // lockstep), as `earshot render` runs it: each channel is bit-identical to
  // a mono stream fed that channel alone.
  let fx = null;
  try {
    fx = variant.createEffect(bytes, rate, { channels: nChannels });
    applySettings(fx, settings);
    const latency = fx.latency;
    if (!input) input = Array.from({ length: nChannels }, () => new Float32Array(frames));
    const aligned = new AlignedRender(fx, frames, SLICE);
    const output = aligned.output;
    const total = frames + latency;
    let lastReport = 0;
    const started = Date.now();
    let processMs = 0;
    for (let off = 0; off < frames; off += SLICE) {
      const n = Math.min(SLICE, frames - off);
      if (header) {
        const raw = await source.file.slice(header.dataOffset + off * header.blockAlign,
          header.dataOffset + (off + n) * header.blockAlign).arrayBuffer();
        if (raw.byteLength < n * header.blockAlign) throw new Error(`'${source.name}' ended early while reading`);
        decodeFrames(header, raw, n, input, off);
      }
      const t0 = Date.now();
      aligned.push(input.map((x) => x.subarray(off, off + n)));
      processMs += Date.now() - t0;
      const now = Date.now();
      if (now - lastReport > 100) {
        lastReport = now;
        postMessage({ type: 'progress', id: msg.id, done: aligned.done, total });
      }
    }
    aligned.finish(); // `latency` samples of silence push the tail out (as `earshot render`)
    postMessage({ type: 'progress', id: msg.id, done: total, total });
    const nonfinite = fx.nonFiniteCount; // calls silenced (in every channel at once)
    const loudIn = loudness(variant, input, rate);
    const loudOut = loudness(variant, output, rate);
    const result = {
      name: source.name,
      how,
      rate,
      frames,
      channels: nChannels,
      modelRate: fx.info.model_rate,
      latency,
      variant: fx.variantName,
      nonfinite,
      processMs,
      elapsedMs: Date.now() - started,
      input,
      output,
      inputPeaks: peaks(input),
      outputPeaks: peaks(output),
      inputPeak: peakOf(input),
      outputPeak: peakOf(output),
      inputLkfs: loudIn.lkfs,
      outputLkfs: loudOut.lkfs,
      // FNV-1a 64 of the float32 samples, channel after channel (as `earshot
      // site` hashes a grid cell), computed here, off the page's thread.
      inputHash: fnv1a64(...input),
      outputHash: fnv1a64(...output),
      loudnessBy: loudIn.by === 'core' && loudOut.by === 'core' ? 'core' : 'javascript',
    };
    return { result };
  } finally {
    if (fx) fx.destroy();
  }
}

// ---------------------------------------------------------------- decode

// A WAV read by the page's own reader (wav.js): the samples libsndfile gives.
async function decode(msg) {
  const { source } = msg;
  const file = source.file;
  const read = (o, n) => file.slice(o, o + n).arrayBuffer();
  const header = await readWavHeader(read, file.size, `'${source.name}'`);
  const { rate, frames, channels: n } = header;
  if (n < 1 || n > 2) throw new Error(`'${source.name}' has ${n} channels; the page plays mono or stereo files only`);
  if (rate < MIN_RATE || rate > MAX_RATE) throw new Error(`'${source.name}' has sample rate ${rate} Hz; the page plays ${MIN_RATE} .. ${MAX_RATE} Hz`);
  if (frames > MAX_RENDER_FRAMES) throw new Error(`'${source.name}' is ${frames} frames long; the page reads at most ${MAX_RENDER_FRAMES}`);
  const channels = Array.from({ length: n }, () => new Float32Array(frames));
  for (let off = 0; off < frames; off += SLICE) {
    const k = Math.min(SLICE, frames - off);
    const raw = await read(header.dataOffset + off * header.blockAlign, k * header.blockAlign);
    if (raw.byteLength < k * header.blockAlign) throw new Error(`'${source.name}' ended early while reading`);
    decodeFrames(header, raw, k, channels, off);
  }
  const variant = await variantFor(msg.wasmUrl, msg.variant);
  const loud = loudness(variant, channels, rate);
  return { name: source.name, rate, frames, channels, lkfs: loud.lkfs, hash: fnv1a64(...channels) };
}

// ---------------------------------------------------------------- messages

self.onmessage = async (event) => {
  const msg = event.data;
  try {
    if (msg.type === 'check') {
      const result = await check(msg);
      postMessage({ type: 'checked', id: msg.id, result });
    } else if (msg.type === 'render') {
      const r = await render(msg);
      if (r.fallback) {
        postMessage({ type: 'fallback', id: msg.id, reason: r.fallback });
        return;
      }
      const res = r.result;
      const transfer = [...res.input, ...res.output].map((a) => a.buffer);
      postMessage({ type: 'rendered', id: msg.id, result: res }, transfer);
    } else if (msg.type === 'decode') {
      const result = await decode(msg);
      postMessage({ type: 'decoded', id: msg.id, result }, result.channels.map((a) => a.buffer));
    } else {
      postMessage({ type: 'failed', id: msg.id, message: `unknown job type '${msg.type}'` });
    }
  } catch (e) {
    postMessage({ type: 'failed', id: msg.id, message: e && e.message ? e.message : String(e) });
  }
};
