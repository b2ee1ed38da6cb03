// The WebAssembly loader shared, unchanged, by the AudioWorklet, the offline
// Web Worker and Node: it instantiates earshot-simd.wasm or
// earshot-scalar.wasm from bytes and wraps the C ABI
// (dsp/include/earshot/earshot.h) in an Effect object.
//
// Written for the AudioWorkletGlobalScope, which has no fetch, TextDecoder,
// TextEncoder, atob or performance.now: the module is compiled synchronously
// from bytes the caller already holds, and strings cross the boundary through
// the UTF-8 coder below.
//
//   const variant = loadVariant(wasmBytes, { name: 'simd' });
//   const fx = createEffect(effectFileBytes, sampleRate, variant);
//   fx.setControl('drive', 0.7);
//   fx.process(input, output);   // Float32Arrays of any equal length
//   fx.destroy();
//
//   const st = variant.createEffect(effectFileBytes, sampleRate, { channels: 2 });
//   st.processChannels([left, right], [outLeft, outRight]);   // planar, in lockstep
//
// process() and processChannels() allocate nothing: each effect owns one
// scratch region of CHUNK floats (256 KiB) per channel inside wasm memory and
// moves audio through it.
// Views on memory are re-derived whenever memory.buffer changes (growth
// detaches the old buffer).

export const MAX_BLOCK = 65536; // EARSHOT_MAX_BLOCK, the most one earshot_process call takes
// EARSHOT_MIN_RATE and EARSHOT_MAX_RATE: the sample rates (whole Hz) streams run at.
export const MIN_RATE = 8000;
export const MAX_RATE = 384000;
// EARSHOT_MAX_CHANNELS: the most channels one stream runs in lockstep.
export const MAX_CHANNELS = 8;
// Samples per core call. A process() call of up to CHUNK samples is exactly
// one earshot_process call, as natively: that matters only for non-finite
// output, where the core silences the whole call (for finite audio the
// partition never changes a sample).
export const CHUNK = MAX_BLOCK;

// kMaxFileBytes (dsp/core/model.hpp, dsp/FORMAT.md): a larger file is refused
// with the core's own text before it is copied into WebAssembly memory, which
// never shrinks.
export const MAX_FILE_BYTES = 256 * 1024 * 1024;
const ERROR_CAP = 1024; // bytes for the core's creation error text
const NAME_CAP = 256; // bytes for a control name passed to earshot_control_index

// The stream functions of the C ABI an Effect needs. The builds export the
// whole C ABI of dsp/include/earshot/earshot.h (these, earshot_create_bounded,
// earshot_stream_bytes and LISTENING_FUNCTIONS) plus memory, malloc, free and
// _initialize (tests/node/exports.test.mjs). A build is always served beside
// the loader it was built with (`earshot site` copies both), so a build
// without the multichannel functions is refused rather than half supported.
export const ABI_FUNCTIONS = Object.freeze([
  'earshot_create', 'earshot_process', 'earshot_create_channels', 'earshot_channels',
  'earshot_process_channels', 'earshot_control_count', 'earshot_control_index',
  'earshot_set_control', 'earshot_get_control', 'earshot_set_mix', 'earshot_set_gain',
  'earshot_reset', 'earshot_latency', 'earshot_info', 'earshot_variant',
  'earshot_nonfinite_count', 'earshot_status_text', 'earshot_destroy',
]);

// The whole-clip functions for listening tests (ITU-R BS.1770-4 loudness,
// ITU-R BS.1534-3 anchors), reached through Variant.loudness, loudnessMatch,
// anchor and loudnessOfChannels.
export const LISTENING_FUNCTIONS = Object.freeze([
  'earshot_loudness', 'earshot_loudness_lkfs', 'earshot_loudness_match', 'earshot_anchor_taps', 'earshot_anchor',
]);

// ---------------------------------------------------------------- UTF-8

// Encodes a JS string as UTF-8 into `bytes` from `at`; returns the number of
// bytes the whole string needs (which may exceed the room; nothing is written
// past bytes.length). Lone surrogates become U+FFFD, as in TextEncoder.
export function utf8Encode(text, bytes, at = 0) {
  let n = 0;
  for (let i = 0; i < text.length; i++) {
    let c = text.charCodeAt(i);
    if (c >= 0xd800 && c <= 0xdfff) {
      const d = i + 1 < text.length ? text.charCodeAt(i + 1) : 0;
      if (c <= 0xdbff && d >= 0xdc00 && d <= 0xdfff) {
        c = 0x10000 + ((c - 0xd800) << 10) + (d - 0xdc00);
        i++;
      } else {
        c = 0xfffd;
      }
    }
    if (c < 0x80) {
      put(c);
    } else if (c < 0x800) {
      put(0xc0 | (c >> 6));
      put(0x80 | (c & 63));
    } else if (c < 0x10000) {
      put(0xe0 | (c >> 12));
      put(0x80 | ((c >> 6) & 63));
      put(0x80 | (c & 63));
    } else {
      put(0xf0 | (c >> 18));
      put(0x80 | ((c >> 12) & 63));
      put(0x80 | ((c >> 6) & 63));
      put(0x80 | (c & 63));
    }
  }
  return n;

  function put(b) {
    if (at + n < bytes.length) bytes[at + n] = b;
    n++;
  }
}

// Decodes UTF-8 bytes[from, to) into a JS string. Malformed sequences
// (stray continuation bytes, overlong forms, surrogates, truncation, values
// above U+10FFFF) each become one U+FFFD, as TextDecoder does by default.
export function utf8Decode(bytes, from = 0, to = bytes.length) {
  let out = '';
  let run = [];
  const flush = () => {
    out += String.fromCharCode.apply(null, run);
    run = [];
  };
  let i = from;
  while (i < to) {
    const b = bytes[i];
    let cp = 0xfffd;
    let len = 1;
    if (b < 0x80) {
      cp = b;
    } else if (b >= 0xc2 && b <= 0xf4) {
      const need = b < 0xe0 ? 1 : b < 0xf0 ? 2 : 3;
      let v = b & (need === 1 ? 0x1f : need === 2 ? 0x0f : 0x07);
      // Allowed range of the second byte (Unicode 15, table 3-7).
      const lo = b === 0xe0 ? 0xa0 : b === 0xf0 ? 0x90 : 0x80;
      const hi = b === 0xed ? 0x9f : b === 0xf4 ? 0x8f : 0xbf;
      let k = 0;
      for (; k < need && i + 1 + k < to; k++) {
        const c = bytes[i + 1 + k];
        if (c < (k === 0 ? lo : 0x80) || c > (k === 0 ? hi : 0xbf)) break;
        v = (v << 6) | (c & 63);
      }
      len = 1 + k;
      if (k === need) cp = v;
    }
    i += len;
    if (cp >= 0x10000) {
      cp -= 0x10000;
      run.push(0xd800 + (cp >> 10), 0xdc00 + (cp & 0x3ff));
    } else {
      run.push(cp);
    }
    if (run.length >= 4096) flush();
  }
  flush();
  return out;
}

// ---------------------------------------------------------------- variant

function asBytes(x, what) {
  if (x instanceof Uint8Array) return x;
  if (x instanceof ArrayBuffer) return new Uint8Array(x);
  if (ArrayBuffer.isView(x)) return new Uint8Array(x.buffer, x.byteOffset, x.byteLength);
  throw new TypeError(`${what} must be an ArrayBuffer or a typed array of bytes, got ${describe(x)}`);
}

function describe(x) {
  if (x === null) return 'null';
  if (typeof x === 'object') return x.constructor ? x.constructor.name : 'object';
  return typeof x;
}

// Imports a module might ask for if it were built differently (a debug build
// keeps asserts); the release builds import nothing (cmake/wasm.cmake).
function hostImports() {
  const stop = (code) => {
    throw new Error(`earshot core stopped (exit code ${code}): out of memory or an internal error`);
  };
  return {
    env: { emscripten_notify_memory_growth() {} },
    wasi_snapshot_preview1: { proc_exit: stop },
  };
}

// One instantiated earshot build: its exports, its memory, and any number of
// effects living in that memory.
export class Variant {
  constructor(wasm, options = {}) {
    this.module = wasm instanceof WebAssembly.Module ? wasm : new WebAssembly.Module(asBytes(wasm, 'the WebAssembly build'));
    // The build's name ("simd" or "scalar") when the caller knows it; the core
    // then refuses to run under another name. Otherwise learnt from the first effect.
    this.name = options.name || '';
    // A trap ends an instance: its effects are lost, and the next effect
    // created renews the instance from the same module (generation + 1).
    this.generation = 0;
    this.instantiate();
  }

  instantiate() {
    const instance = new WebAssembly.Instance(this.module, hostImports());
    const e = instance.exports;
    const missing = [...ABI_FUNCTIONS, 'malloc', 'free'].filter((f) => typeof e[f] !== 'function');
    if (!(e.memory instanceof WebAssembly.Memory)) missing.push('memory');
    if (missing.length) throw new Error(`not an earshot WebAssembly build: it lacks ${missing.join(', ')}`);
    if (typeof e._initialize === 'function') e._initialize();
    this.exports = e;
    this.memory = e.memory;
    this._process = e.earshot_process;
    this._processChannels = e.earshot_process_channels;
    this.broken = null; // the Error of a trap, after which this instance is not used again
    this._buffer = null;
    this.u8 = null;
    this.f32 = null;
    this.refresh();
    this._name = this.malloc(NAME_CAP);
  }

  // After a trap: a fresh instance of the same module, so the page keeps
  // working. Effects of the trapped instance stay lost (they throw).
  renew() {
    if (!this.broken) return;
    this.generation += 1;
    this.instantiate();
  }

  // Re-derives the views after memory growth; cheap when nothing changed.
  refresh() {
    const b = this.memory.buffer;
    if (b !== this._buffer) {
      this._buffer = b;
      this.u8 = new Uint8Array(b);
      this.f32 = new Float32Array(b);
    }
  }

  get memoryBytes() {
    return this.memory.buffer.byteLength;
  }

  malloc(n) {
    const p = this.call('malloc', n);
    if (!p) throw new Error(`out of WebAssembly memory (asked for ${n} bytes)`);
    this.refresh();
    return p;
  }

  free(p) {
    if (p) this.call('free', p);
  }

  // Calls an export; a trap marks the instance unusable and becomes an Error.
  call(fn, ...args) {
    if (this.broken) throw this.broken;
    try {
      return this.exports[fn](...args);
    } catch (err) {
      return this.trapped(fn, err);
    }
  }

  // earshot_process in place on one scratch region, or (channels > 1)
  // earshot_process_channels in place, `ptr` then the address of the C array
  // of the channels' scratch regions, passed as both the input and the
  // output pointers: the hot call, without the name lookup of call().
  callProcess(handle, ptr, n, channels = 1) {
    if (this.broken) throw this.broken;
    try {
      return channels === 1 ? this._process(handle, ptr, ptr, n) : this._processChannels(handle, ptr, ptr, n);
    } catch (err) {
      return this.trapped(channels === 1 ? 'earshot_process' : 'earshot_process_channels', err);
    }
  }

  trapped(fn, err) {
    if (err instanceof WebAssembly.RuntimeError || err instanceof RangeError) {
      this.broken = new Error(`earshot core trapped in ${fn} (${err.message}); the effects of this WebAssembly instance are lost, and the next effect loaded gets a fresh instance`);
      throw this.broken;
    }
    throw err;
  }

  cString(p) {
    if (!p) return '';
    this.refresh();
    const u8 = this.u8;
    let end = p;
    while (end < u8.length && u8[end] !== 0) end++;
    return utf8Decode(u8, p, end);
  }

  statusText(status) {
    return this.cString(this.call('earshot_status_text', status));
  }

  // options: { channels } (1 .. MAX_CHANNELS, default 1): a stream of that
  // many channels in lockstep (processChannels), else a mono one (process).
  createEffect(fileBytes, hostRate, options) {
    return new Effect(this, fileBytes, hostRate, options);
  }

  // ---- Whole clips, for listening tests (earshot.h, "Listening tests").
  // Audio is interleaved float32 (frames × channels). Every call goes through
  // call(), so a trap becomes an Error and the next use gets a fresh instance.

  hasListening() {
    return LISTENING_FUNCTIONS.every((f) => typeof this.exports[f] === 'function');
  }

  // Copies `interleaved` into fresh WebAssembly memory with `extraBytes` of
  // room after it, runs fn(p, q) and frees both (a trapped instance is dropped
  // whole instead).
  withAudio(interleaved, extraBytes, fn) {
    if (this.broken) this.renew();
    const p = this.malloc(Math.max(interleaved.length * 4, 4));
    let q = 0;
    try {
      q = this.malloc(Math.max(extraBytes, 16));
      this.refresh();
      this.f32.set(interleaved, p >> 2);
      return fn(p, q);
    } finally {
      if (!this.broken) {
        this.free(q);
        this.free(p);
      }
    }
  }

  // A non-zero EARSHOT_* status becomes an Error carrying it as .status.
  checkStatus(status, what) {
    if (status === 0) return;
    const e = new Error(`${what}: ${this.statusText(status)}`);
    e.status = status;
    throw e;
  }

  // Integrated loudness in LKFS (−Infinity when no block passes the gate).
  loudness(interleaved, channels, rate) {
    const frames = interleaved.length / channels;
    return this.withAudio(interleaved, 8, (p, q) => {
      this.checkStatus(this.call('earshot_loudness', p, frames, channels, rate, 0, q), 'loudness');
      this.refresh();
      return new Float64Array(this.memory.buffer, q, 1)[0];
    });
  }

  // A copy matched to targetLkfs, and the gain applied in dB.
  loudnessMatch(interleaved, channels, rate, targetLkfs) {
    const frames = interleaved.length / channels;
    return this.withAudio(interleaved, 8, (p, q) => {
      this.checkStatus(this.call('earshot_loudness_match', p, frames, channels, rate, 0, targetLkfs, q),
        `matching to ${targetLkfs} LKFS`);
      this.refresh();
      const gainDb = new Float64Array(this.memory.buffer, q, 1)[0];
      return { data: this.f32.slice(p >> 2, (p >> 2) + interleaved.length), gainDb };
    });
  }

  // The low-pass anchor whose pass band ends at passbandHz, time-aligned.
  anchor(interleaved, channels, rate, passbandHz) {
    const frames = interleaved.length / channels;
    return this.withAudio(interleaved, interleaved.length * 4, (p, q) => {
      this.checkStatus(this.call('earshot_anchor', p, q, frames, channels, rate, passbandHz), `the ${passbandHz} Hz anchor`);
      this.refresh();
      return this.f32.slice(q >> 2, (q >> 2) + interleaved.length);
    });
  }

  // Integrated loudness of planar channels (earshot_loudness_lkfs): NaN when
  // the core refuses the arguments; throws when memory for the interleaved
  // copy cannot be had.
  loudnessOfChannels(channels, rate) {
    if (this.broken) this.renew();
    const C = channels.length;
    const n = channels[0].length;
    const p = this.malloc(Math.max(n * C * 4, 4));
    try {
      this.refresh();
      const f = this.f32;
      const base = p >> 2;
      for (let c = 0; c < C; c++) {
        const ch = channels[c];
        for (let t = 0; t < n; t++) f[base + t * C + c] = ch[t];
      }
      return this.call('earshot_loudness_lkfs', p, n, C, rate);
    } finally {
      if (!this.broken) this.free(p);
    }
  }
}

export function loadVariant(wasm, options) {
  return new Variant(wasm, options);
}

// ---------------------------------------------------------------- effect

// The channel count of createEffect's options, checked before anything is
// allocated; the core refuses the same counts with its own words.
function channelsOption(options) {
  if (options === undefined || options === null) return 1;
  if (typeof options !== 'object') throw new TypeError(`createEffect: options must be an object such as { channels: 2 }, got ${describe(options)}`);
  const c = options.channels;
  if (c === undefined) return 1;
  if (typeof c !== 'number' || !Number.isInteger(c) || c < 1 || c > MAX_CHANNELS)
    throw new RangeError(`createEffect: channels must be a whole number from 1 to ${MAX_CHANNELS}, got ${typeof c === 'number' || typeof c === 'string' ? JSON.stringify(c) : describe(c)}`);
  return c;
}

export class Effect {
  constructor(variant, fileBytes, hostRate, options) {
    const channels = channelsOption(options);
    const bytes = asBytes(fileBytes, 'the effect file');
    if (bytes.length === 0) throw new Error('effect file: no data'); // the core's own text (dsp/core/loader.cpp)
    if (bytes.length > MAX_FILE_BYTES) throw new Error(`effect file: ${bytes.length} bytes exceeds the 256 MiB limit`);
    const v = variant;
    if (v.broken) v.renew();
    this.variant = v;
    this.generation = v.generation;
    this.handle = 0;
    this.channels = channels;
    this.scratch = 0;
    this.ptrs = 0; // channels > 1: the C array of the channels' scratch addresses
    this.one = [null]; // process()'s input and output as one-channel lists for run(), made once
    this.oneOut = [null];
    const file = v.malloc(bytes.length);
    const err = v.malloc(ERROR_CAP);
    let wanted = 0;
    try {
      v.refresh();
      v.u8.set(bytes, file);
      if (v.name) {
        wanted = v.malloc(16);
        utf8Encode(v.name + '\0', v.u8, wanted);
      }
      v.u8[err] = 0;
      // A mono stream is made by earshot_create, exactly as before streams had channels.
      this.handle = channels === 1
        ? v.call('earshot_create', file, bytes.length, Number(hostRate), wanted, err, ERROR_CAP)
        : v.call('earshot_create_channels', file, bytes.length, Number(hostRate), wanted, channels, 0, err, ERROR_CAP);
      if (!this.handle) throw new Error(v.cString(err) || 'the effect could not be loaded (no reason given)');
    } finally {
      // The core copies what it keeps; the file bytes are not needed again.
      if (!v.broken) {
        v.free(wanted);
        v.free(err);
        v.free(file);
      }
    }
    try {
      const got = v.call('earshot_channels', this.handle);
      if (got !== channels) throw new Error(`the core made a stream of ${got} channels where ${channels} were asked for`);
      this.scratch = v.malloc(channels * CHUNK * 4);
      if (channels > 1) {
        this.ptrs = v.malloc(channels * 4);
        v.refresh();
        const table = new Uint32Array(v.memory.buffer, this.ptrs, channels);
        for (let c = 0; c < channels; c++) table[c] = this.scratch + c * CHUNK * 4;
      }
      this.info = JSON.parse(v.cString(v.call('earshot_info', this.handle)));
      this.variantName = v.cString(v.call('earshot_variant', this.handle));
      if (!v.name) v.name = this.variantName;
      this.latency = v.call('earshot_latency', this.handle);
      const declared = (this.info.effect && this.info.effect.controls) || [];
      this.controls = declared.map((c) => ({ ...c }));
      this.controlIndex = new Map();
      for (const c of this.controls) this.controlIndex.set(c.name, this.indexOf(c.name));
    } catch (e) {
      this.destroy();
      throw e;
    }
  }

  // earshot_control_index through the C ABI (names are looked up once, at creation).
  indexOf(name) {
    const v = this.variant;
    v.refresh();
    const need = utf8Encode(name, v.u8, this.variant._name);
    if (need >= NAME_CAP) return -1;
    v.u8[v._name + need] = 0;
    return v.call('earshot_control_index', this.handle, v._name);
  }

  live() {
    if (this.generation !== this.variant.generation || this.variant.broken)
      throw this.variant.broken || new Error('this effect was lost when its WebAssembly instance trapped; load it again');
    if (!this.handle) throw new Error('this effect has been destroyed');
  }

  // Runs input through the effect into output (Float32Arrays of equal length;
  // they may be the same array). Any length; no allocation.
  process(input, output) {
    this.live();
    if (this.channels !== 1)
      throw new Error(`process: this effect has ${this.channels} channels; use processChannels(inputs, outputs) with one array per channel`);
    const n = input.length;
    if (output.length !== n) throw new RangeError(`process: input has ${n} samples but output has ${output.length}`);
    this.one[0] = input;
    this.oneOut[0] = output;
    try {
      this.run(this.one, this.oneOut, 1, n);
    } finally {
      this.one[0] = null; // no reference to the caller's arrays kept
      this.oneOut[0] = null;
    }
    return output;
  }

  // Runs every channel through the effect in lockstep: inputs and outputs are
  // arrays of `channels` Float32Arrays (planar), all of one length, any
  // length; outputs[c] may be inputs[c]. Channel c comes out bit-identical to
  // a mono effect with the same settings fed inputs[c] alone (while the
  // output is finite). A call of up to CHUNK frames is one core call, as in
  // process(). No allocation.
  processChannels(inputs, outputs) {
    this.live();
    const C = this.channels;
    if (!inputs || inputs.length !== C)
      throw new RangeError(`processChannels: this effect has ${C} channel${C === 1 ? '' : 's'} but ${inputs ? inputs.length : describe(inputs)} input arrays were given`);
    if (!outputs || outputs.length !== C)
      throw new RangeError(`processChannels: this effect has ${C} channel${C === 1 ? '' : 's'} but ${outputs ? outputs.length : describe(outputs)} output arrays were given`);
    const n = inputs[0].length;
    for (let c = 0; c < C; c++) {
      if (inputs[c].length !== n) throw new RangeError(`processChannels: input ${c} has ${inputs[c].length} samples but input 0 has ${n}`);
      if (outputs[c].length !== n) throw new RangeError(`processChannels: output ${c} has ${outputs[c].length} samples but the inputs have ${n}`);
    }
    if (C === 1) {
      this.process(inputs[0], outputs[0]);
      return outputs;
    }
    this.run(inputs, outputs, C, n);
    return outputs;
  }

  // The copy loop of process() (C = 1: earshot_process on the scratch region)
  // and processChannels() (earshot_process_channels on the table of the
  // channels' scratch regions): pieces of at most CHUNK frames, each one core call.
  run(inputs, outputs, C, n) {
    const v = this.variant;
    const base = this.scratch >> 2;
    const where = C === 1 ? this.scratch : this.ptrs;
    for (let off = 0; off < n; off += CHUNK) {
      const k = n - off < CHUNK ? n - off : CHUNK;
      v.refresh();
      let heap = v.f32;
      for (let c = 0; c < C; c++) {
        const x = inputs[c];
        const p = base + c * CHUNK;
        for (let i = 0; i < k; i++) heap[p + i] = x[off + i];
      }
      if (v.callProcess(this.handle, where, k, C) !== k)
        throw new Error(C === 1 ? `earshot_process refused a block of ${k} samples`
          : `earshot_process_channels refused a block of ${k} frames of ${C} channels`);
      v.refresh(); // the core never allocates in process, but stay safe
      heap = v.f32;
      for (let c = 0; c < C; c++) {
        const y = outputs[c];
        const p = base + c * CHUNK;
        for (let i = 0; i < k; i++) y[off + i] = heap[p + i];
      }
    }
  }

  check(status, what) {
    if (status !== 0) throw new Error(`${what}: ${this.variant.statusText(status)}`);
  }

  // Sets a control's target by name or declaration index; it ramps over the
  // control's smoothing time. Refusals carry the core's reason.
  setControl(nameOrIndex, value) {
    this.live();
    let index = nameOrIndex;
    if (typeof nameOrIndex === 'string') {
      index = this.controlIndex.has(nameOrIndex) ? this.controlIndex.get(nameOrIndex) : -1;
      if (index < 0) {
        const names = this.controls.map((c) => c.name).join(', ') || 'none';
        throw new Error(`setControl: no control named '${nameOrIndex}' (controls: ${names})`);
      }
    } else if (!Number.isInteger(nameOrIndex)) {
      throw new TypeError(`setControl: a control is named by a string or an integer index, got ${describe(nameOrIndex)}`);
    }
    const status = this.variant.call('earshot_set_control', this.handle, index, Number(value));
    if (status !== 0) {
      const c = this.controls[index];
      const where = c ? `control '${c.name}' (${c.min} .. ${c.max})` : `control ${index}`;
      this.check(status, `setControl ${where} = ${value}`);
    }
  }

  getControl(nameOrIndex) {
    this.live();
    const index = typeof nameOrIndex === 'string' ? this.controlIndex.get(nameOrIndex) : nameOrIndex;
    return this.variant.call('earshot_get_control', this.handle, index === undefined ? -1 : index);
  }

  // Dry/wet, 0 (dry) … 1 (wet); smoothed.
  setMix(wet) {
    this.live();
    this.check(this.variant.call('earshot_set_mix', this.handle, Number(wet)), `setMix ${wet} (0 .. 1)`);
  }

  // Input and output gain in dB, each −60 … +24; smoothed.
  setGain(inputDb, outputDb = 0) {
    this.live();
    this.check(this.variant.call('earshot_set_gain', this.handle, Number(inputDb), Number(outputDb)),
      `setGain ${inputDb} dB in, ${outputDb} dB out (each -60 .. 24)`);
  }

  reset() {
    this.live();
    this.variant.call('earshot_reset', this.handle);
  }

  // Blocks that produced a non-finite value (each was silenced and the state reset).
  get nonFiniteCount() {
    this.live();
    return this.variant.call('earshot_nonfinite_count', this.handle) >>> 0;
  }

  destroy() {
    if (!this.handle && !this.scratch) return;
    const v = this.variant;
    if (!v.broken && this.generation === v.generation) {
      if (this.handle) v.call('earshot_destroy', this.handle);
      v.free(this.ptrs);
      v.free(this.scratch);
    }
    this.handle = 0;
    this.scratch = 0;
    this.ptrs = 0;
  }
}

// createEffect(fileBytes, hostRate, variant, options): an Effect for audio at
// hostRate Hz. variant: a Variant from loadVariant, or the build's bytes or
// compiled WebAssembly.Module (then the effect gets an instance of its own).
// options: { channels } as in Variant.createEffect.
export function createEffect(fileBytes, hostRate, variant, options) {
  const v = variant instanceof Variant ? variant : new Variant(variant);
  return new Effect(v, fileBytes, hostRate, options);
}

// ---------------------------------------------------------------- aligned render

// Runs audio through effects so that the output stays sample-aligned with the
// input, as `earshot render` does: the first `latency` output samples are
// dropped and finish() feeds `latency` zeros to push the tail out. The output
// holds exactly `frames` samples per channel. `effects`: one Effect of any
// channel count (a stereo file through one 2-channel stream, as `earshot
// render` runs it), or an array of Effects taking the channels in turn (each
// as many as it has). push() takes one Float32Array per channel (equal
// lengths, any length: it is processed in pieces of at most `piece` samples).
export class AlignedRender {
  constructor(effects, frames, piece = CHUNK) {
    const list = effects instanceof Effect ? [effects] : effects;
    if (!list || !list.length) throw new Error('AlignedRender needs at least one effect');
    this.effects = list;
    this.channels = list.reduce((s, fx) => s + fx.channels, 0);
    this.latency = list[0].latency;
    for (const fx of list)
      if (fx.latency !== this.latency) throw new Error(`AlignedRender: the effects' latencies differ (${this.latency} and ${fx.latency} samples)`);
    this.frames = frames;
    this.output = Array.from({ length: this.channels }, () => new Float32Array(frames));
    this.scratch = Array.from({ length: this.channels }, () => new Float32Array(piece));
    this.piece = piece;
    this.toSkip = this.latency;
    this.written = 0;
    this.done = 0; // input samples per channel fed so far, flush zeros included
  }

  push(inputs) {
    if (inputs.length !== this.channels)
      throw new Error(`AlignedRender: ${inputs.length} channels pushed to effects taking ${this.channels}`);
    const n = inputs[0].length;
    for (let off = 0; off < n; off += this.piece) {
      const k = Math.min(this.piece, n - off);
      const skip = Math.min(this.toSkip, k);
      if (this.written + k - skip > this.frames) throw new Error(`AlignedRender: more than ${this.frames} frames pushed`);
      const xs = inputs.map((x) => x.subarray(off, off + k));
      const ys = this.scratch.map((y) => y.subarray(0, k));
      let c = 0;
      for (const fx of this.effects) {
        if (fx.channels === 1) fx.process(xs[c], ys[c]);
        else fx.processChannels(xs.slice(c, c + fx.channels), ys.slice(c, c + fx.channels));
        c += fx.channels;
      }
      for (let ch = 0; ch < this.channels; ch++) this.output[ch].set(ys[ch].subarray(skip), this.written);
      this.toSkip -= skip;
      this.written += k - skip;
      this.done += k;
    }
  }

  // Feeds the `latency` zeros that push the last input samples out.
  finish() {
    const zeros = new Float32Array(Math.min(this.latency, this.piece));
    for (let left = this.latency; left > 0;) {
      const k = Math.min(left, zeros.length);
      this.push(Array.from({ length: this.channels }, () => zeros.subarray(0, k)));
      left -= k;
    }
    return this.output;
  }
}
