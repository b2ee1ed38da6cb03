// The page's pure modules in Node, against outside references: the test
// signal against the native one, K-weighting and integrated loudness against
// ITU-R BS.1770-4, EBU Tech 3341 and libebur128, the WAV reader and writer
// against SciPy, the spectrogram colour maps against matplotlib and CIELAB.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { testSignal, fnv1a64 } from '../../web/js/test-signal.js';
import { kWeighting, integratedLoudness } from '../../web/js/loudness.js';
import { parseWav, encodeFloatWav, readWavHeader } from '../../web/js/wav.js';
import { earshotBin, ensureFixtures, fixture, mustRun, tmpFile, PYTHON, REPO } from './helpers.js';

test('the page builds the same test signal as the native tool, at every rate tried', () => {
  ensureFixtures();
  for (const rate of [8000, 22050, 44100, 48000, 96000, 192000]) {
    const r = mustRun(earshotBin(), ['verify', fixture('lstm-12.nfx'), '--json', '--rate', String(rate)]);
    const native = JSON.parse(r.stdout).signal;
    const x = testSignal(rate, 3);
    assert.equal(x.length, native.samples, `${rate} Hz: length`);
    assert.equal(fnv1a64(x), native.hash, `${rate} Hz: hash`);
  }
});

test('FNV-1a 64 matches the published test vectors', () => {
  // Fowler/Noll/Vo test vectors (isthe.com/chongo/tech/comp/fnv, recalled from
  // memory): "" → cbf29ce484222325, "a" → af63dc4c8601ec8c, "foobar" → 85944171f73967e8.
  const bytes = (s) => {
    const b = new Uint8Array(Math.ceil(s.length / 4) * 4);
    for (let i = 0; i < s.length; i++) b[i] = s.charCodeAt(i);
    return b;
  };
  // fnv1a64 hashes whole float32 samples; "a" and "foobar" are not whole, so
  // hash them through a view of the exact bytes.
  const hashBytes = (s) => fnv1a64({ buffer: bytes(s).buffer, byteOffset: 0, byteLength: s.length });
  assert.equal(hashBytes(''), 'cbf29ce484222325');
  assert.equal(hashBytes('a'), 'af63dc4c8601ec8c');
  assert.equal(hashBytes('foobar'), '85944171f73967e8');
});

test('K-weighting at 48 kHz reproduces the coefficients of ITU-R BS.1770-4, tables 1 and 2', () => {
  const { shelf, highpass } = kWeighting(48000);
  // BS.1770-4 Table 1 (pre-filter) and Table 2 (RLB high-pass), 14 decimals.
  const close = (a, b, what) => assert.ok(Math.abs(a - b) < 1e-12, `${what}: ${a} vs ${b}`);
  close(shelf.b0, 1.53512485958697, 'shelf b0');
  close(shelf.b1, -2.69169618940638, 'shelf b1');
  close(shelf.b2, 1.19839281085285, 'shelf b2');
  close(shelf.a1, -1.69065929318241, 'shelf a1');
  close(shelf.a2, 0.73248077421585, 'shelf a2');
  assert.deepEqual([highpass.b0, highpass.b1, highpass.b2], [1, -2, 1]);
  close(highpass.a1, -1.99004745483398, 'high-pass a1');
  close(highpass.a2, 0.99007225036621, 'high-pass a2');
});

function sine(rate, seconds, freq, dbfs) {
  const a = Math.pow(10, dbfs / 20);
  const x = new Float32Array(Math.round(rate * seconds));
  for (let i = 0; i < x.length; i++) x[i] = a * Math.sin((2 * Math.PI * freq * i) / rate);
  return x;
}

test('integrated loudness meets EBU Tech 3341 cases 1, 2 and 3 and the BS.1770 sine figure', () => {
  // EBU Tech 3341 (2016) table 1, tolerance ±0.1 LU (recalled from memory):
  // case 1: stereo 1 kHz sine at −23 dBFS, 20 s → −23.0 LUFS;
  // case 2: the same at −33 dBFS → −33.0 LUFS;
  // case 3: −36, −23, −36 dBFS for 10, 60, 10 s → −23.0 LUFS (relative gate).
  for (const rate of [44100, 48000]) {
    const s23 = sine(rate, 20, 1000, -23);
    assert.ok(Math.abs(integratedLoudness([s23, s23], rate) + 23) <= 0.1, `case 1 at ${rate}`);
    const s33 = sine(rate, 20, 1000, -33);
    assert.ok(Math.abs(integratedLoudness([s33, s33], rate) + 33) <= 0.1, `case 2 at ${rate}`);
    const parts = [sine(rate, 10, 1000, -36), sine(rate, 60, 1000, -23), sine(rate, 10, 1000, -36)];
    const c3 = new Float32Array(parts.reduce((n, p) => n + p.length, 0));
    let at = 0;
    for (const p of parts) {
      c3.set(p, at);
      at += p.length;
    }
    assert.ok(Math.abs(integratedLoudness([c3, c3], rate) + 23) <= 0.1, `case 3 at ${rate}`);
    // BS.1770-4 §2: a 0 dBFS 1 kHz sine in one channel reads −3.01 LKFS.
    assert.ok(Math.abs(integratedLoudness([sine(rate, 10, 1000, 0)], rate) + 3.01) <= 0.1, `sine at ${rate}`);
  }
  // Silence and a signal below the absolute gate have no loudness.
  assert.equal(integratedLoudness([new Float32Array(48000)], 48000), -Infinity);
  assert.equal(integratedLoudness([sine(48000, 2, 1000, -80)], 48000), -Infinity);
});

// libebur128 (Debian libebur128-1, a general-purpose BS.1770 / EBU R 128
// library, bound in tests/python/ebur128_ref.py) measures noise bursts
// straddling both gates, written as raw float32; the page's fallback meter
// must read the same at every rate.
test('the fallback loudness meter agrees with libebur128 at eight rates, mono and stereo', () => {
  const raw = tmpFile('ebur128-bursts.f32');
  const out = mustRun(PYTHON, [join(REPO, 'tests', 'python', 'ebur128_ref.py'), raw]).stdout;
  const cases = JSON.parse(out);
  const buf = readFileSync(raw);
  const all = new Float32Array(buf.buffer, buf.byteOffset, buf.byteLength / 4);
  let at = 0;
  let worst = 0;
  for (const c of cases) {
    const channels = [];
    for (let k = 0; k < c.channels; k++, at += c.frames) channels.push(all.subarray(at, at + c.frames));
    const got = integratedLoudness(channels, c.rate);
    assert.ok(Number.isFinite(c.lufs), JSON.stringify(c));
    worst = Math.max(worst, Math.abs(got - c.lufs));
    // Our tolerance; both compute in double precision (measured 2.8e-10 LU).
    assert.ok(Math.abs(got - c.lufs) <= 1e-6, `${c.rate} Hz, ${c.channels} ch: page ${got}, libebur128 ${c.lufs}`);
  }
  assert.equal(at, all.length);
  console.log(`# fallback meter vs libebur128: max |diff| ${worst.toExponential(2)} LU over ${cases.length} cases`);
});

test('the WAV reader gives the samples SciPy reads, scaled as libsndfile scales integers', async () => {
  const path = tmpFile('units-formats');
  // SciPy writes each encoding; int data divided by 2^(bits-1) is the float libsndfile gives.
  const code = `
import sys, json, numpy as np, scipy.io.wavfile as w
rng = np.random.default_rng(3)
x = rng.uniform(-1, 1, (500, 2))
out = {}
for name, data in [("i16", np.round(x * 32767).astype(np.int16)), ("i32", np.round(x * 2147483000).astype(np.int32)),
                   ("u8", np.round(x * 127 + 128).astype(np.uint8)), ("f32", x.astype(np.float32)), ("f64", x)]:
    w.write(sys.argv[1] + name + ".wav", 22050, data)
    scale = {"i16": 32768.0, "i32": 2147483648.0, "u8": 128.0}.get(name)
    ref = (data.astype(np.float64) - (128 if name == "u8" else 0)) / scale if scale else data.astype(np.float64)
    out[name] = ref.astype(np.float32).tolist()
print(json.dumps(out))
`;
  const ref = JSON.parse(mustRun(PYTHON, ['-c', code, path]).stdout);
  for (const [name, frames] of Object.entries(ref)) {
    const buf = readFileSync(`${path}${name}.wav`);
    const wav = await parseWav(buf.buffer.slice(buf.byteOffset, buf.byteOffset + buf.length), name);
    assert.equal(wav.rate, 22050);
    assert.equal(wav.channels.length, 2);
    for (let t = 0; t < frames.length; t++)
      for (let c = 0; c < 2; c++)
        assert.equal(wav.channels[c][t], Math.fround(frames[t][c]), `${name} frame ${t} channel ${c}`);
  }
});

test('the float32 WAV writer gives files SciPy reads back unchanged, and bad WAVs are named', async () => {
  const left = new Float32Array([0, 0.5, -0.25, 1.5, -1e-30]);
  const right = new Float32Array([1, -1, 0.125, 3e-8, 0.75]);
  const blob = encodeFloatWav([left, right], 44100);
  const path = tmpFile('units-written.wav');
  writeFileSync(path, Buffer.from(await blob.arrayBuffer()));
  const r = mustRun(PYTHON, ['-c', `
import sys, json, numpy as np, scipy.io.wavfile as w
rate, x = w.read(sys.argv[1])
print(json.dumps({"rate": rate, "dtype": str(x.dtype), "bits": x.view(np.uint32).tolist()}))`, path]);
  const got = JSON.parse(r.stdout);
  assert.equal(got.rate, 44100);
  assert.equal(got.dtype, 'float32');
  const bits = (a) => Array.from(new Uint32Array(a.buffer));
  assert.deepEqual(got.bits.map((row) => row[0]), bits(left));
  assert.deepEqual(got.bits.map((row) => row[1]), bits(right));

  const read = (buf) => async (o, n) => buf.slice(o, o + n);
  const notWav = new TextEncoder().encode('hello, not a wav file at all').buffer;
  await assert.rejects(readWavHeader(read(notWav), notWav.byteLength, "'x.txt'"), /'x\.txt' is not a WAV file/);
  const noData = new Uint8Array(await blob.arrayBuffer()).slice(0, 38).buffer;
  await assert.rejects(readWavHeader(read(noData), noData.byteLength, "'cut.wav'"), /'cut\.wav': no data chunk/);
});

test('a WAV cut short is an error naming frames read and declared; a streamed length takes what the file holds', async () => {
  // The file is written by SciPy (scipy.io.wavfile): 16-bit mono, 1000 frames,
  // data chunk at byte 36 (RIFF/WAVE layout: 12-byte RIFF header, 24-byte fmt chunk).
  const path = tmpFile('units-cut.wav');
  mustRun(PYTHON, ['-c', `
import sys, numpy as np, scipy.io.wavfile as w
w.write(sys.argv[1], 48000, (np.arange(1000) % 200 - 100).astype(np.int16))`, path]);
  const whole = readFileSync(path);
  const read = (buf) => async (o, n) => buf.buffer.slice(buf.byteOffset + o, buf.byteOffset + Math.min(o + n, buf.length));
  const full = await readWavHeader(read(whole), whole.length, "'whole.wav'");
  assert.equal(full.frames, 1000);
  assert.equal(whole.toString('latin1', 36, 40), 'data');
  // Cut after 400 frames and one odd byte (libsndfile would read 400 frames and say nothing).
  const cut = whole.subarray(0, 44 + 400 * 2 + 1);
  await assert.rejects(readWavHeader(read(cut), cut.length, "'cut.wav'"),
    (e) => !(e.unsupported) && /^'cut\.wav' is cut short: read 400 of 1000 frames/.test(e.message));
  // 0xffffffff (and 0): the length was unknown when the header was written; the
  // frames are what the file holds (common practice, no source).
  for (const marker of [0xffffffff, 0]) {
    const streamed = Buffer.from(cut);
    streamed.writeUInt32LE(marker, 40);
    const h = await readWavHeader(read(streamed), streamed.length, "'streamed.wav'");
    assert.equal(h.frames, 400, `data length ${marker}`);
  }
});

// CIELAB L* of an sRGB colour: IEC 61966-2-1 (sRGB transfer function and
// D65 luminance weights) and CIE 15:2004 (L* = 116·f(Y) − 16).
function lightness(r, g, b) {
  const lin = (c) => (c /= 255) <= 0.04045 ? c / 12.92 : ((c + 0.055) / 1.055) ** 2.4;
  const Y = 0.2126 * lin(r) + 0.7152 * lin(g) + 0.0722 * lin(b);
  return Y > (6 / 29) ** 3 ? 116 * Math.cbrt(Y) - 16 : (116 * Y) / (3 * (6 / 29) ** 2);
}

test('the spectrogram colour maps equal matplotlib\'s cividis and coolwarm, and their lightness runs as published', async () => {
  const { CIVIDIS, COOL_WARM } = await import('../../web/js/colormaps.js');
  // matplotlib (Debian's python3-matplotlib) ships cividis as the table of Nuñez,
  // Anderton & Renslow 2018 (PLOS ONE 13(7): e0199239) and coolwarm after
  // Moreland 2009 ("Diverging Color Maps for Scientific Visualization").
  const code = `
import json
from matplotlib import cm
print(json.dumps({n: [[round(255 * c) for c in rgba[:3]] for rgba in cm.get_cmap(n)([i / 255 for i in range(256)])]
                  for n in ("cividis", "coolwarm")}))
`;
  const ref = JSON.parse(mustRun(PYTHON, ['-c', code]).stdout);
  for (const [name, lut] of [['cividis', CIVIDIS], ['coolwarm', COOL_WARM]]) {
    assert.equal(lut.length, 256 * 3, name);
    let worst = 0;
    for (let i = 0; i < 256; i++)
      for (let j = 0; j < 3; j++) worst = Math.max(worst, Math.abs(lut[3 * i + j] - ref[name][i][j]));
    assert.ok(worst <= 1, `${name}: an entry differs from matplotlib's by ${worst}/255`);
  }
  // Cividis: lightness rises steadily end to end (its paper's design goal; no
  // step back by more than 0.5 L*, from below 20 to above 85).
  const L = Array.from({ length: 256 }, (_, i) => lightness(CIVIDIS[3 * i], CIVIDIS[3 * i + 1], CIVIDIS[3 * i + 2]));
  for (let i = 1; i < 256; i++) assert.ok(L[i] > L[i - 1] - 0.5, `cividis: L* falls at ${i}: ${L[i - 1]} → ${L[i]}`);
  assert.ok(L[0] < 20 && L[255] > 85, `cividis: L* ${L[0]} … ${L[255]}`);
  // Cool-warm: lightest in the middle, the ends of about equal lightness (Moreland 2009's design, recalled from memory).
  const M = Array.from({ length: 256 }, (_, i) => lightness(COOL_WARM[3 * i], COOL_WARM[3 * i + 1], COOL_WARM[3 * i + 2]));
  const top = M.indexOf(Math.max(...M));
  assert.ok(Math.abs(top - 127.5) <= 8, `cool-warm: lightest at ${top}`);
  assert.ok(Math.abs(M[0] - M[255]) < 5, `cool-warm ends: L* ${M[0]} and ${M[255]}`);
});
