// The page's spectrograms in headless Chromium: the Worker's STFT magnitudes
// equal scipy.signal.stft's within the tolerances below; the pictures put a
// full-scale sine at 0 dB on its row of the log axis, the difference view
// shows 20·log10(2) for a signal against its half, the cursor follows the
// position; on the offline panel both views draw, switch by keyboard, fit a
// 390 px screen and paint in the dark theme's colours, with no console error;
// bad input is refused with a message naming the fault.
//
// Tolerances against SciPy (SciPy 1.10 documentation of scipy.signal.stft;
// reference computed in double precision from the same float32 samples):
// |page − SciPy| ≤ 1e-6 of the clip's largest magnitude (the page returns
// float32 magnitudes: 6e-8 relative rounding; measured 4.5e-8), and ≤ 1e-3 dB
// for every bin within 100 dB of that largest magnitude (measured 5e-7 dB).
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { ARTIFACTS, WORK, buildSite, serve, launch, openPage, waitForCheck, mustRun, PYTHON, REPO } from './helpers.js';
import { CIVIDIS, COOL_WARM } from '../../web/js/colormaps.js';

let built;
let server;
let browser;

before(async () => {
  built = buildSite('spectrogram-test');
  server = await serve(built.out);
  browser = await launch();
});

after(async () => {
  if (browser) await browser.close();
  if (server) server.stop();
});

// The LUT index whose colour is nearest to [r, g, b].
function nearestIndex(lut, rgb) {
  let best = -1;
  let bestD = Infinity;
  for (let i = 0; i < 256; i++) {
    const d = (lut[3 * i] - rgb[0]) ** 2 + (lut[3 * i + 1] - rgb[1]) ** 2 + (lut[3 * i + 2] - rgb[2]) ** 2;
    if (d < bestD) [best, bestD] = [i, d];
  }
  return best;
}

for (const [rate, n, hop] of [[48000, 2048, 512], [16000, 512, 128]]) {
  test(`STFT magnitudes from the Worker equal scipy.signal.stft at ${rate} Hz (periodic Hann ${n}, hop ${hop})`, async () => {
    const dir = join(WORK, 'stft-reference');
    const meta = JSON.parse(mustRun(PYTHON, [join(REPO, 'tests/browser/stft_reference.py'), dir, String(rate), '1.3',
      String(n), String(hop)]).stdout);
    const signal = new Float32Array(readFileSync(join(dir, `signal-${rate}.f32`)).buffer.slice(0));
    const buf = readFileSync(join(dir, `scipy-${rate}.f64`));
    const ref = new Float64Array(buf.buffer, buf.byteOffset, buf.length / 8);
    const { page, problems } = await openPage(browser.context, server.url);
    const got = await page.evaluate(async ([samples, r]) => {
      const m = await import('./js/spectrogram.js');
      const s = m.stftSettings(r);
      const out = await m.stftMagnitudes(Float32Array.from(samples), r, s);
      return { n: out.n, hop: out.hop, frames: out.frames, bins: out.bins, data: Array.from(out.data) };
    }, [Array.from(signal), rate]);
    assert.equal(got.n, n, 'frame length the page chose');
    assert.equal(got.hop, hop, 'hop the page chose');
    assert.equal(got.frames, meta.frames, 'frames (scipy: boundary zeros, padded)');
    assert.equal(got.bins, meta.bins);
    let peak = 0;
    for (const v of ref) peak = Math.max(peak, v);
    let maxAbs = 0;
    let maxDb = 0;
    let counted = 0;
    for (let i = 0; i < ref.length; i++) {
      maxAbs = Math.max(maxAbs, Math.abs(got.data[i] - ref[i]));
      if (ref[i] > peak * 1e-5) {
        maxDb = Math.max(maxDb, Math.abs(20 * Math.log10(got.data[i] / ref[i])));
        counted++;
      }
    }
    console.log(`${rate} Hz: max |page − SciPy| = ${(maxAbs / peak).toExponential(2)} of the peak; ` +
      `max dB error ${maxDb.toExponential(2)} over ${counted} bins within 100 dB of the peak (SciPy ${meta.scipy})`);
    assert.ok(counted > ref.length / 10, `only ${counted} bins within 100 dB of the peak`);
    assert.ok(maxAbs <= 1e-6 * peak, `max abs error ${maxAbs} > 1e-6 × peak ${peak}`);
    assert.ok(maxDb <= 1e-3, `max dB error ${maxDb} > 1e-3 dB`);
    await page.close();
    assert.deepEqual(problems, []);
  });
}

test('pictures: a full-scale sine at 0 dB on its row, noise against its half at +6.02 dB, the cursor at the position', async () => {
  const { page, problems } = await openPage(browser.context, server.url);
  const r = await page.evaluate(async () => {
    const m = await import('./js/spectrogram.js');
    const rate = 48000;
    // A bin-centred sine (43 · 48000/2048 Hz): its peak bin holds its whole amplitude.
    const f = (43 * rate) / 2048;
    const x = new Float32Array(rate);
    for (let i = 0; i < x.length; i++) x[i] = Math.sin((2 * Math.PI * f * i) / rate);
    // Broadband (a fixed LCG's uniform noise): every bin above the −120 dB floor.
    let seed = 12345;
    const noise = new Float32Array(rate);
    for (let i = 0; i < noise.length; i++) {
      seed = (Math.imul(seed, 1664525) + 1013904223) >>> 0;
      noise[i] = seed / 2 ** 32 - 0.5;
    }
    const half = noise.map((v) => v / 2);
    const make = () => {
      const c = document.createElement('canvas');
      c.style.width = '600px';
      c.style.height = '200px';
      document.body.appendChild(c);
      return c;
    };
    const a = make();
    const d = make();
    const info = await m.drawSpectrogram(a, x, rate);
    const dinfo = await m.drawSpectrogram(d, noise, rate, { reference: half });
    // The plot's place on the canvas, in device pixels.
    const { x: x0, y: y0, width: pw, height: ph } = info.plot;
    const col = x0 + Math.round(pw / 2);
    // Read through a copy made for reading (no readback warning on the page's canvases).
    const read = (c, px, py, w, h) => {
      const copy = document.createElement('canvas');
      copy.width = c.width;
      copy.height = c.height;
      const g = copy.getContext('2d', { willReadFrequently: true });
      g.drawImage(c, 0, 0);
      return Array.from(g.getImageData(px, py, w, h).data);
    };
    const pixels = (c, px) => read(c, px, y0, 1, ph);
    const level = pixels(a, col);
    const diff = pixels(d, col);
    m.setSpectrogramCursor(a, 0.25);
    const cursorX = Math.round(x0 + 0.25 * (pw - 1));
    const cursor = read(a, cursorX, y0 + 5, 1, 1);
    const ink = getComputedStyle(document.documentElement).getPropertyValue('--ink').trim();
    const corner = read(a, 1, 1, 1, 1);
    const bg = getComputedStyle(document.documentElement).getPropertyValue('--wave-bg').trim();
    // Ten minutes at 8 kHz: 75 001 frames, bounded to PER_COLUMN per column.
    const long = new Float32Array(8000 * 600);
    for (let i = 0; i < long.length; i++) long[i] = 0.5 * Math.sin(i * 0.3);
    const linfo = await m.drawSpectrogram(make(), long, 8000);
    // A grid cell: no axis, no legend, the picture fills the canvas.
    const bare = make();
    const cell = (await m.drawSpectrogram(bare, x, rate, { axes: false, legend: false })).plot;
    cell.canvas = [bare.width, bare.height];
    // Bad input: each refused with a message naming what is wrong.
    const errors = [];
    for (const [samples, r, opts] of [[new Float32Array(0), rate, {}], [[x, x.subarray(1)], rate, {}],
      [x, rate, { mode: 'difference' }], [x, 0, {}], [[1, 2, 3], rate, {}], [x, rate, { fMin: 30000 }]])
      errors.push(await m.drawSpectrogram(make(), samples, r, opts).then(() => 'drawn', (e) => e.message));
    return { info, dinfo, linfo, level, diff, f, ph, cursor, ink, corner, bg, cell, errors, bound: [m.PER_COLUMN, m.MAX_COLUMNS] };
  });
  assert.equal(r.info.mode, 'level');
  assert.equal(r.dinfo.mode, 'difference');
  assert.equal(r.info.rows, r.ph);
  assert.deepEqual(r.cell, { x: 0, y: 0, width: r.cell.canvas[0], height: r.cell.canvas[1], canvas: r.cell.canvas });
  assert.deepEqual(r.errors, [
    'spectrogram: the samples are empty',
    'spectrogram: the channels of the samples differ in length',
    'spectrogram: the difference view needs a reference',
    'spectrogram: sample rate 0 is not a positive number',
    'spectrogram: the samples must be a Float32Array or an array of Float32Arrays',
    'spectrogram: fMin 30000 Hz must lie between 0 and 24000 Hz',
  ]);
  const [perColumn, maxColumns] = r.bound;
  assert.equal(r.linfo.frames, Math.ceil((8000 * 600) / r.linfo.hop) + 1);
  assert.ok(r.linfo.columns <= Math.min(maxColumns, r.linfo.plot.width), `${r.linfo.columns} columns`);
  assert.equal(r.linfo.perColumn, perColumn);
  assert.ok(r.linfo.framesComputed <= perColumn * r.linfo.columns,
    `a 10-minute clip took ${r.linfo.framesComputed} FFTs for ${r.linfo.columns} columns`);
  // Rows from the top: row y is at fMax · (fMin/fMax)^(y/(rows−1)).
  const rows = r.ph;
  const expectRow = (rows - 1) * (1 - Math.log(r.f / 20) / Math.log(24000 / 20));
  const idx = [];
  for (let y = 0; y < rows; y++) idx.push(nearestIndex(CIVIDIS, r.level.slice(4 * y, 4 * y + 3)));
  const brightest = idx.indexOf(Math.max(...idx));
  assert.ok(Math.abs(brightest - expectRow) <= 1.5, `the sine's row is ${brightest}, expected ${expectRow.toFixed(1)}`);
  // 0 dB is the top of the −120 … 0 dB scale: LUT index 255 (a rounding step allowed).
  assert.ok(idx[brightest] >= 254, `a full-scale sine shows at LUT index ${idx[brightest]}, expected 255 (0 dB)`);
  // Difference: 20·log10(2) = 6.02 dB everywhere, LUT index round(255 · (6.02 + 24) / 48) = 160 (common math, no source).
  const want = Math.round((255 * (20 * Math.log10(2) + 24)) / 48);
  for (let y = 0; y < rows; y++) {
    const i = nearestIndex(COOL_WARM, r.diff.slice(4 * y, 4 * y + 3));
    if (Math.abs(i - want) > 1) assert.fail(`difference row ${y} shows LUT index ${i}, expected ${want} (+6.02 dB)`);
  }
  const hex = (s) => [1, 3, 5].map((i) => parseInt(s.slice(i, i + 2), 16));
  assert.deepEqual(r.cursor.slice(0, 3), hex(r.ink), 'the cursor is drawn in the ink colour at 25 %');
  assert.deepEqual(r.corner.slice(0, 3), hex(r.bg), 'the background is the theme\'s --wave-bg');
  await page.close();
  assert.deepEqual(problems, []);
});

test('offline panel: spectrograms and the difference view draw, switch by keyboard, fit 390 px, follow the dark theme', async () => {
  for (const scheme of ['light', 'dark']) {
    const { page, problems } = await openPage(browser.context, server.url);
    await page.emulateMedia({ colorScheme: scheme });
    await waitForCheck(page);
    await page.click('#clip-use');
    await page.waitForSelector('#offline-source:not([hidden])');
    await page.click('#render');
    await page.waitForSelector('#offline-status[data-kind=ok]', { timeout: 60000 });
    await page.waitForSelector('#spec-in[data-state=drawn]');
    await page.waitForSelector('#spec-out[data-state=drawn]');
    assert.equal(await page.getAttribute('#spec-caption', 'data-n'), '2048');
    assert.equal(await page.getAttribute('#spec-caption', 'data-hop'), '512');
    assert.match(await page.textContent('#spec-caption'), /periodic Hann window of 2048 samples \(42\.7 ms\) at 48\u202f000 Hz, hop 512 samples \(10\.7 ms\).*cividis/);
    // The theme's background around the plot.
    const px = await page.evaluate(() => {
      const c = document.getElementById('spec-in');
      return { corner: Array.from(c.getContext('2d').getImageData(1, 1, 1, 1).data),
        bg: getComputedStyle(document.documentElement).getPropertyValue('--wave-bg').trim() };
    });
    const hex = (s) => [1, 3, 5].map((i) => parseInt(s.slice(i, i + 2), 16));
    assert.deepEqual(px.corner.slice(0, 3), hex(px.bg), `${scheme}: spectrogram background`);
    await page.screenshot({ path: join(ARTIFACTS, `spectrogram-${scheme}-desktop.png`), fullPage: true });
    // Keyboard: focus the checked radio, arrow to the next one (the difference view).
    await page.focus('#view-spectrograms');
    await page.keyboard.press('ArrowRight');
    assert.equal(await page.isChecked('#view-difference'), true);
    await page.waitForSelector('#spec-diff[data-state=drawn]');
    assert.equal(await page.isHidden('#spec-in'), true);
    assert.match(await page.textContent('#spec-caption'), /20·log10\|processed\| − 20·log10\|original\|.*cool-warm/);
    const outline = await page.evaluate(() => getComputedStyle(document.activeElement).outlineStyle);
    assert.equal(outline, 'solid', 'the focused view switch shows its focus');
    await page.screenshot({ path: join(ARTIFACTS, `difference-${scheme}-desktop.png`), fullPage: true });
    for (const view of ['difference', 'spectrograms']) {
      await page.check(`#view-${view}`);
      await page.setViewportSize({ width: 390, height: 844 });
      const overflow = await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth);
      assert.ok(overflow <= 0, `${scheme}, ${view}: the page is ${overflow} px wider than a 390 px screen`);
      await page.setViewportSize({ width: 1280, height: 900 });
    }
    await page.setViewportSize({ width: 390, height: 844 });
    // Drawn anew at the new width (the page waits 250 ms after a resize).
    await page.waitForFunction(() => ['spec-in', 'spec-out'].every((id) => {
      const c = document.getElementById(id);
      return c.dataset.state === 'drawn' && c.width === Math.round(c.clientWidth * Math.max(1, window.devicePixelRatio));
    }));
    await page.screenshot({ path: join(ARTIFACTS, `spectrogram-${scheme}-phone.png`), fullPage: true });
    // Played and paused, the cursor stands where the player is.
    await page.click('#play');
    await page.waitForFunction(() => document.getElementById('play').textContent === 'Pause');
    await page.waitForFunction(() => Number(document.getElementById('position').value) > 100);
    await page.click('#play');
    await page.waitForFunction(() => document.getElementById('play').textContent === 'Play');
    const cur = await page.evaluate(() => {
      const c = document.getElementById('spec-out');
      const p = Number(document.getElementById('position').value) / 1000;
      const [x0, , pw] = c.dataset.plot.split(' ').map(Number);
      const x = Math.round(x0 + p * (pw - 1));
      return { p, row: Array.from(c.getContext('2d').getImageData(x - 1, 30, 3, 1).data),
        ink: getComputedStyle(document.documentElement).getPropertyValue('--ink').trim() };
    });
    const ink = hex(cur.ink);
    const found = [0, 1, 2].some((i) => cur.row.slice(4 * i, 4 * i + 3).every((v, j) => v === ink[j]));
    assert.ok(cur.p > 0.1 && found, `${scheme}: no cursor at ${cur.p} of the clip: ${cur.row}`);
    await page.close();
    assert.deepEqual(problems, []);
  }
});
