// WAV reading and writing (RIFF/WAVE, Microsoft's multimedia file format).
// Reading walks the chunks through a random-access `read(offset, length)`
// so a large file never has to sit in memory whole; samples convert to
// float32 the way libsndfile does (integer PCM divided by 2^(bits−1), 8-bit
// offset by 128, float64 rounded to float32; recalled from memory of
// libsndfile's pcm.c / double64.c), so a WAV rendered here and by
// `earshot render` starts from the same samples.
// Writing produces 32-bit float WAV: the exact core output, bit for bit.

const FORMAT_PCM = 1;
const FORMAT_FLOAT = 3;
const FORMAT_EXTENSIBLE = 0xfffe;

// The longest audio the page renders: 2^25 frames per channel (11.6 minutes at
// 48 kHz). Input and output of a stereo file then take 512 MiB of float32;
// longer files are for `earshot render`, which streams.
export const MAX_RENDER_FRAMES = 2 ** 25;

export class WavError extends Error {
  constructor(message, unsupported = false) {
    super(message);
    this.name = 'WavError';
    // true: a WAV this reader does not handle (the browser's decoder may).
    this.unsupported = unsupported;
  }
}

function fourcc(view, at) {
  return String.fromCharCode(view.getUint8(at), view.getUint8(at + 1), view.getUint8(at + 2), view.getUint8(at + 3));
}

// True when the first 12 bytes say RIFF....WAVE.
export function looksLikeWav(bytes) {
  if (bytes.byteLength < 12) return false;
  const v = new DataView(bytes.buffer || bytes, bytes.byteOffset || 0, 12);
  return fourcc(v, 0) === 'RIFF' && fourcc(v, 8) === 'WAVE';
}

// Parses the chunk list. read(offset, length) → Promise<ArrayBuffer> (may be
// shorter at the end of the file); size: the file length in bytes.
// Resolves { channels, rate, bits, format, frames, dataOffset, blockAlign }.
export async function readWavHeader(read, size, name = 'the file') {
  const head = new DataView(await read(0, 12));
  if (head.byteLength < 12 || fourcc(head, 0) !== 'RIFF' || fourcc(head, 8) !== 'WAVE')
    throw new WavError(`${name} is not a WAV file (no RIFF/WAVE header)`);
  let at = 12;
  let fmt = null;
  while (at + 8 <= size) {
    const ch = new DataView(await read(at, 8));
    if (ch.byteLength < 8) break;
    const id = fourcc(ch, 0);
    const len = ch.getUint32(4, true);
    const body = at + 8;
    if (id === 'fmt ') {
      if (len < 16) throw new WavError(`${name}: the fmt chunk is ${len} bytes, shorter than 16`);
      const f = new DataView(await read(body, Math.min(len, 40)));
      let format = f.getUint16(0, true);
      const channels = f.getUint16(2, true);
      const rate = f.getUint32(4, true);
      const blockAlign = f.getUint16(12, true);
      const bits = f.getUint16(14, true);
      if (format === FORMAT_EXTENSIBLE) {
        if (f.byteLength < 40) throw new WavError(`${name}: the extensible fmt chunk is too short`);
        format = f.getUint16(24, true); // first two bytes of the subformat GUID
      }
      fmt = { format, channels, rate, blockAlign, bits };
    } else if (id === 'data') {
      if (!fmt) throw new WavError(`${name}: the data chunk comes before the fmt chunk`);
      const { format, channels, rate, bits, blockAlign } = fmt;
      const ok = (format === FORMAT_PCM && [8, 16, 24, 32].includes(bits)) || (format === FORMAT_FLOAT && (bits === 32 || bits === 64));
      if (!ok) throw new WavError(`${name}: WAV encoding ${format}/${bits}-bit is not read here`, true);
      if (channels < 1) throw new WavError(`${name}: the fmt chunk declares ${channels} channels`);
      if (blockAlign !== channels * (bits / 8)) throw new WavError(`${name}: block align ${blockAlign} does not match ${channels} × ${bits} bits`);
      if (rate < 1) throw new WavError(`${name}: sample rate ${rate} Hz`);
      // A file written while streaming may say 0 or 0xffffffff (its length was
      // unknown when the header was written; common practice, no source): take
      // what the file holds. Any other length the file does not hold is a cut-short
      // file, an error rather than a shorter render (the native reader agrees).
      const avail = Math.max(0, size - body);
      const streamed = len === 0 || len === 0xffffffff;
      if (!streamed && len > avail) {
        const declared = Math.floor(len / blockAlign);
        const held = Math.floor(avail / blockAlign);
        throw new Error(`${name} is cut short: read ${held} of ${declared} frames (its data chunk declares ${len} bytes, the file holds ${avail})`);
      }
      const dataLen = streamed ? avail : len;
      return { format, channels, rate, bits, blockAlign, frames: Math.floor(dataLen / blockAlign), dataOffset: body };
    }
    at = body + len + (len & 1); // chunks are padded to even length
  }
  throw new WavError(fmt ? `${name}: no data chunk` : `${name}: no fmt chunk`);
}

// Converts frames of interleaved WAV data to planar float32.
// bytes: ArrayBuffer holding `frames` whole frames; out: Float32Arrays, one
// per channel, written from index `at`.
export function decodeFrames(h, bytes, frames, out, at) {
  const v = new DataView(bytes);
  const C = h.channels;
  const step = h.bits / 8;
  let p = 0;
  for (let t = 0; t < frames; t++) {
    for (let c = 0; c < C; c++, p += step) {
      let x;
      if (h.format === FORMAT_FLOAT) {
        x = h.bits === 32 ? v.getFloat32(p, true) : v.getFloat64(p, true);
      } else if (h.bits === 16) {
        x = v.getInt16(p, true) / 32768;
      } else if (h.bits === 24) {
        const u = v.getUint8(p) | (v.getUint8(p + 1) << 8) | (v.getInt8(p + 2) << 16);
        x = u / 8388608;
      } else if (h.bits === 32) {
        x = Math.fround(v.getInt32(p, true)) / 2147483648;
      } else {
        x = (v.getUint8(p) - 128) / 128;
      }
      out[c][at + t] = x;
    }
  }
}

// Reads a whole WAV held in an ArrayBuffer (small files, tests).
export async function parseWav(buffer, name) {
  const read = async (o, n) => buffer.slice(o, o + n);
  const h = await readWavHeader(read, buffer.byteLength, name);
  const out = Array.from({ length: h.channels }, () => new Float32Array(h.frames));
  decodeFrames(h, buffer.slice(h.dataOffset, h.dataOffset + h.frames * h.blockAlign), h.frames, out, 0);
  return { rate: h.rate, channels: out, header: h };
}

// The 58-byte header of a float32 WAV (fmt with cbSize 0, fact, data).
export function floatWavHeader(channels, rate, frames) {
  const dataBytes = frames * channels * 4;
  const b = new ArrayBuffer(58);
  const v = new DataView(b);
  const put = (at, s) => { for (let i = 0; i < 4; i++) v.setUint8(at + i, s.charCodeAt(i)); };
  put(0, 'RIFF');
  v.setUint32(4, 50 + dataBytes, true);
  put(8, 'WAVE');
  put(12, 'fmt ');
  v.setUint32(16, 18, true);
  v.setUint16(20, FORMAT_FLOAT, true);
  v.setUint16(22, channels, true);
  v.setUint32(24, rate, true);
  v.setUint32(28, rate * channels * 4, true);
  v.setUint16(32, channels * 4, true);
  v.setUint16(34, 32, true);
  v.setUint16(36, 0, true); // cbSize
  put(38, 'fact');
  v.setUint32(42, 4, true);
  v.setUint32(46, frames, true);
  put(50, 'data');
  v.setUint32(54, dataBytes, true);
  return b;
}

// Blob parts of a float32 WAV from planar channels, interleaved a slice at a
// time. `yieldEvery` frames, the generator pauses (the caller awaits) so a
// long file does not hold the page.
export function* floatWavParts(channels, rate, sliceFrames = 1 << 18) {
  const C = channels.length;
  const frames = channels[0].length;
  yield floatWavHeader(C, rate, frames);
  for (let off = 0; off < frames; off += sliceFrames) {
    const n = Math.min(sliceFrames, frames - off);
    const inter = new Float32Array(n * C);
    for (let c = 0; c < C; c++) {
      const ch = channels[c];
      for (let t = 0; t < n; t++) inter[t * C + c] = ch[off + t];
    }
    yield inter;
  }
}

export function encodeFloatWav(channels, rate) {
  return new Blob([...floatWavParts(channels, rate)], { type: 'audio/wav' });
}
