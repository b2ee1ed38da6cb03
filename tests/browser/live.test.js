// The live path in headless Chromium with its fake capture device fed a known
// stereo WAV: microphone → MediaStreamSource → the earshot AudioWorklet at the
// device rate (44.1 kHz here) with a 48 kHz effect, so the core resamples.
// The track reports two channels, so left and right run through one
// 2-channel stream. (Chromium's fake device reports two channels for a mono
// file too, both the same: the mono processor is held by the
// OfflineAudioContext tests of site.test.js.)
//
// What is expected, and how exactly:
//  1. The worklet receives the known file, left as left and right as right
//     (each piece is found in the file by its left channel; the right
//     channel must then match at the same place): Chromium's fake device loops the
//     file and starts anywhere in it, and converts its 16-bit samples to
//     float with a scale a hair off 1/32768 (observed here: errors up to
//     1.4e-5 at a 0.45 peak, a ratio of about 1/32767). When its feeding
//     thread is late (seen on this loaded 2-core machine) it delivers 10 ms
//     of silence instead and skips those samples. Tolerance: one 16-bit step,
//     2^-15, per sample, piece by piece between such gaps; the gaps may take
//     at most 10 % of the recording.
//  2. The effect's output is `earshot render --keep-latency` of what the
//     worklet received (a stereo file: one 2-channel stream there too), bit
//     for bit: the recording restarts the stream state, and the core is
//     block-size invariant, so nothing may differ.
//  3. Against the known file itself (pieces at their offsets, gaps kept),
//     rendered natively, the output differs only by what the fake device's
//     scaling changes in the input; tolerance: ESR at most -60 dB (the
//     input's own error is about -90 dB; the untrained test network
//     amplifies it at most modestly).
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { join } from 'node:path';
import { buildSite, serve, launch, openPage, waitForCheck, download, fixture, tmpFile, mustRun, earshotBin, PYTHON } from './helpers.js';

let built;
let server;
let browser;

before(async () => {
  built = buildSite('live-test');
  server = await serve(built.out);
  browser = await launch({
    extraArgs: ['--use-fake-ui-for-media-stream', '--use-fake-device-for-media-stream',
      `--use-file-for-fake-audio-capture=${fixture('live-stereo-44k-i16.wav')}`, '--autoplay-policy=no-user-gesture-required'],
    permissions: ['microphone'],
  });
});

after(async () => {
  if (browser) await browser.close();
  if (server) server.stop();
});

// Splits the received input at the fake device's gaps (runs of frames of
// exact zeros, which the noisy test file never holds), finds each piece in
// the looped file by its first channel (least squares over every offset, by
// FFT correlation), and rebuilds the input the device meant to deliver: file
// frames, every channel, with the gaps kept.
const ANALYSIS = `
import json, sys, warnings, numpy as np, scipy.io.wavfile as w
from scipy.signal import fftconvolve
warnings.simplefilter("ignore")
rate, x = w.read(sys.argv[1]); _, y = w.read(sys.argv[2]); _, z = w.read(sys.argv[3])
fr, f = w.read(sys.argv[4]); f = f.astype(np.float64) / 32768.0
frames = lambda a: a if a.ndim == 2 else a[:, None]
x, y, z, f = frames(x.astype(np.float64)), frames(y), frames(z), frames(f)
loop = np.concatenate([f, f, f])
zero = np.all(x == 0, axis=1)
runs, i = [], 0
while i < x.shape[0]:
    if zero[i]:
        j = i
        while j < x.shape[0] and zero[j]: j += 1
        if j - i >= 32: runs.append((i, j))
        i = j
    else:
        i += 1
pieces, start = [], 0
for a, b in runs:
    if a > start: pieces.append((start, a))
    start = b
if start < x.shape[0]: pieces.append((start, x.shape[0]))
rebuilt = np.zeros((x.shape[0], f.shape[1]))
n = f.shape[0]
lead = loop[:, 0]
energy = np.concatenate([[0], np.cumsum(lead ** 2)])
max_err, matched = 0.0, 0
for a, b in pieces:
    m = min(b - a, 2048)
    if m < 32: continue
    p = x[a:a + m, 0]
    corr = fftconvolve(lead[:2 * n + m], p[::-1], mode="valid")[:n]
    se = energy[m:m + n] - energy[:n] - 2 * corr
    k = int(np.argmin(se))
    seg = loop[k:k + (b - a)]
    rebuilt[a:b] = seg
    if seg.shape == x[a:b].shape: max_err = max(max_err, float(np.max(np.abs(seg - x[a:b]))))
    else: max_err = float("inf")
    matched += b - a
res = {"rate": int(rate), "file_rate": int(fr), "channels": int(x.shape[1]), "file_channels": int(f.shape[1]),
       "gaps": len(runs), "gap_samples": int(sum(b - a for a, b in runs)),
       "matched": matched, "samples": int(x.shape[0]), "input_max_err": max_err,
       "input_peaks": [float(v) for v in np.max(np.abs(x), axis=0)],
       "output_channels": int(y.shape[1]), "output_channels_differ": bool(y.shape[1] > 1 and not np.array_equal(y[:, 0], y[:, 1]))}
z = z[:y.shape[0]]
res["exact"] = bool(y.shape == z.shape and np.array_equal(y.view(np.uint32), z.view(np.uint32)))
d = np.flatnonzero(y.view(np.uint32) != z.view(np.uint32)) if y.shape == z.shape else np.array([0])
res["first_diff"] = int(d[0]) if d.size else None
w.write(sys.argv[5], int(rate), rebuilt.astype(np.float32))
print(json.dumps(res))
`;

const ESR = `
import json, sys, warnings, numpy as np, scipy.io.wavfile as w
warnings.simplefilter("ignore")
_, y = w.read(sys.argv[1]); _, r = w.read(sys.argv[2])
r = r[:y.shape[0]].astype(np.float64); y = y.astype(np.float64)
print(json.dumps({"esr_db": float(10 * np.log10(np.sum((y - r) ** 2) / np.sum(r ** 2))), "max_abs": float(np.max(np.abs(y - r)))}))
`;

test('live input through the AudioWorklet gives the expected processed signal', async () => {
  const { page, problems } = await openPage(browser.context, `${server.url}?effect=tcn`);
  const check = await waitForCheck(page, 'site:tcn');
  assert.equal(check.state, 'pass', check.text);
  await page.click('#live-start');
  await page.waitForSelector('#live-status[data-kind=ok], #live-status[data-kind=error]', { timeout: 30000 });
  const status = await page.textContent('#live-status');
  assert.match(status, /^Live: Test TCN at 44\u202f100 Hz \(the core resamples to 48\u202f000 Hz and back\)/, status);
  // Input processing asked off and reported off by the browser.
  await page.waitForFunction(() => /Time budget used/.test(document.getElementById('live-facts').textContent));
  const facts = await page.textContent('#live-facts');
  assert.match(facts, /echo cancellation off, noise suppression off, auto gain off/);
  assert.match(facts, /2 channel\(s\), 16-bit; processed as stereo \(one stream, left and right in lockstep\)/);
  assert.match(facts, /Latency\d+\.\d ms = input/);
  await page.waitForTimeout(500);
  const meterIn = Number(await page.getAttribute('#meter-in', 'value'));
  assert.ok(meterIn > -20, `input meter at ${meterIn} dB while the fake device plays a 0.4-peak file`);

  await page.selectOption('#record-seconds', '5');
  await page.click('#record');
  await page.waitForSelector('a[data-recording="Effect output"]', { timeout: 30000 });
  const inPath = await download(page, 'a[data-recording="Received input"]', 'live-input.wav');
  const outPath = await download(page, 'a[data-recording="Effect output"]', 'live-output.wav');
  const finalFacts = await page.textContent('#live-facts');
  // Another effect while live: a new processor takes over the stream.
  await page.selectOption('#effect-select', 'site:lstm');
  await page.waitForFunction(() => /^Live: Test LSTM/.test(document.getElementById('live-status').textContent), null, { timeout: 30000 });
  await page.click('#live-stop');
  assert.equal(await page.textContent('#live-status'), 'Stopped.');
  await page.close();

  // The same controls as the page's defaults for 'tcn' in the site config.
  const fx = join(built.out, 'effects', 'tcn.nfx');
  const controls = ['--control', 'drive=0.7', '--control', 'tone=-3'];
  const cliPath = tmpFile('live-cli.wav');
  mustRun(earshotBin(), ['render', fx, inPath, cliPath, '--keep-latency', '--quiet', '--force', ...controls]);
  const segWav = tmpFile('live-expected-input.wav');
  const a = JSON.parse(mustRun(PYTHON, ['-c', ANALYSIS, inPath, outPath, cliPath, fixture('live-stereo-44k-i16.wav'), segWav]).stdout);
  console.log(`# live: ${JSON.stringify(a)}`);
  assert.equal(a.rate, 44100, 'the fake device ran at another rate; the input comparison below assumes the file rate');
  assert.equal(a.file_channels, 2);
  assert.equal(a.channels, 2, 'the recording of the received input holds both channels');
  assert.equal(a.output_channels, 2, 'the recording of the effect output holds both channels');
  assert.ok(a.output_channels_differ, 'left and right outputs differ (the file\'s channels do)');
  assert.ok(a.matched + a.gap_samples === a.samples, `${a.samples - a.matched - a.gap_samples} received samples matched nothing`);
  assert.ok(a.gap_samples <= 0.1 * a.samples, `the fake device left ${a.gap_samples} of ${a.samples} samples silent`);
  assert.ok(a.input_max_err <= 2 ** -15, `received input differs from the file by ${a.input_max_err} (> one 16-bit step)`);
  assert.equal(a.exact, true, `worklet output differs from earshot render of its input at sample ${a.first_diff}`);

  // 3: the known file (with the device's gaps), rendered natively.
  const refPath = tmpFile('live-ref.wav');
  mustRun(earshotBin(), ['render', fx, segWav, refPath, '--keep-latency', '--quiet', '--force', ...controls]);
  const e = JSON.parse(mustRun(PYTHON, ['-c', ESR, outPath, refPath]).stdout);
  assert.ok(e.esr_db <= -60, `live output vs the known file rendered natively: ESR ${e.esr_db.toFixed(1)} dB (max |error| ${e.max_abs})`);
  console.log(`# live: output vs the known file rendered natively: ESR ${e.esr_db.toFixed(1)} dB, max |error| ${e.max_abs.toExponential(2)}`);
  assert.match(finalFacts, /Late renders\d+/);
  assert.deepEqual(problems, []);
});
