// The comparison grid of a built site in headless Chromium: every cell's
// samples are bit-identical to `earshot render` of the same clip and settings
// (read back by SciPy, an independent WAV reader) and to the hash the builder
// wrote; switching columns while a row plays keeps one sample-aligned
// timeline; the keyboard reaches and plays every cell; the address restores
// the chosen cell; nothing scrolls sideways at 390 px after any interaction.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { mkdirSync } from 'node:fs';
import { join } from 'node:path';
import {
  ARTIFACTS, buildSite, serve, launch, openPage, waitForCheck, earshotBin, mustRun, fixture, tmpFile, PYTHON, WORK,
} from './helpers.js';

let built;
let server;
let browser;

// FNV-1a 64 over the float32 samples of a WAV read by SciPy, channel after
// channel (the hash `earshot site` writes for a cell; FNV-1a as published by
// Fowler, Noll and Vo: offset basis 14695981039346656037, prime 1099511628211).
function wavHash(path) {
  const code = `
import sys, numpy as np, scipy.io.wavfile as w, warnings
warnings.simplefilter("ignore")
r, x = w.read(sys.argv[1])
if x.dtype == np.int16: x = x.astype(np.float32) / 32768.0
x = np.asarray(x, dtype=np.float32)
planar = x.T.reshape(-1) if x.ndim == 2 else x
h = 14695981039346656037
for b in planar.astype('<f4').tobytes():
    h = ((h ^ b) * 1099511628211) & 0xffffffffffffffff
print("%016x %d" % (h, x.shape[0]))
`;
  const [hash, frames] = mustRun(PYTHON, ['-c', code, path]).stdout.trim().split(' ');
  return { hash, frames: Number(frames) };
}

function renderHash(effect, clip, controls) {
  const out = tmpFile(`grid-${Math.random().toString(36).slice(2)}.wav`);
  const args = ['render', effect, clip, out, '--quiet'];
  for (const [k, v] of Object.entries(controls)) args.push('--control', `${k}=${v}`);
  mustRun(earshotBin(), args);
  return wavHash(out);
}

const STEREO = join(WORK, 'grid-test', 'extra', 'stereo-48k-i16.wav');
const STEREO_REF = join(WORK, 'grid-test', 'extra', 'stereo-48k-reference.wav');

before(async () => {
  mkdirSync(join(WORK, 'grid-test', 'extra'), { recursive: true });
  // A stereo clip (two different sines, 6 s (long enough that a row still plays while a loaded machine runs the switching test), 16-bit) and, as its
  // "reference", its render through the LSTM fixture: same rate and channels.
  mustRun(PYTHON, ['-c', `
import numpy as np, scipy.io.wavfile as w, sys
t = np.arange(288000) / 48000.0
x = np.stack([0.4 * np.sin(2 * np.pi * 220 * t), 0.3 * np.sin(2 * np.pi * 331 * t + 1)], axis=1)
w.write(sys.argv[1], 48000, np.round(x * 32767).astype(np.int16))
`, STEREO]);
  mustRun(earshotBin(), ['render', fixture('lstm-12.nfx'), STEREO, STEREO_REF, '--force', '--quiet']);
  built = buildSite('grid-test', {
    clips: [
      { file: '../fixtures/mono-48k-i16.wav', id: 'mono', name: 'Mono clip' },
      { file: 'extra/stereo-48k-i16.wav', id: 'stereo', name: 'Stereo clip', reference: 'extra/stereo-48k-reference.wav' },
      { file: '../fixtures/live-44k-i16.wav', id: 'rate44', name: '44.1 kHz clip' },
    ],
    grid: {
      title: 'Grid under test',
      columns: [
        { name: 'Dry', input: true },
        { name: 'Target', reference: true },
        { name: 'LSTM', effect: 'lstm' },
        { name: 'TCN soft', effect: 'tcn', controls: { drive: 0.2 } },
        { name: 'TCN hard', effect: 'tcn', controls: { drive: 0.9, tone: 2 } },
      ],
    },
  });
  server = await serve(built.out);
  browser = await launch();
});

after(async () => {
  if (browser) await browser.close();
  if (server) server.stop();
});

async function openGrid(url, viewport) {
  const { page, problems } = await openPage(browser.context, url);
  if (viewport) await page.setViewportSize(viewport);
  await waitForCheck(page);
  await page.waitForFunction(() => document.body.dataset.ready === 'true');
  return { page, problems };
}

const cell = (r, k) => `#grid tbody tr:nth-child(${r + 1}) td:nth-of-type(${k + 1})`;

async function waitReady(page, r, k) {
  await page.waitForSelector(`${cell(r, k)}[data-state=ready], ${cell(r, k)}[data-state=failed]`, { timeout: 90000 });
  return page.$eval(cell(r, k), (td) => ({ ...td.dataset, label: td.querySelector('button').getAttribute('aria-label') }));
}

async function noSidewaysScroll(page, when) {
  const overflow = await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth);
  assert.ok(overflow <= 0, `${when}: the page is ${overflow} px wider than the screen`);
}

test('site.json: each grid cell holds the hash of `earshot render` (or of the file itself) for that clip and column', () => {
  const g = built.site.grid;
  assert.equal(g.rows.length, 3);
  assert.deepEqual(g.columns.map((c) => c.kind), ['input', 'reference', 'effect', 'effect', 'effect']);
  // Every control of an effect column is written: the column's value, else the page default.
  assert.deepEqual(g.columns[3].controls, { drive: 0.2, tone: -3 });
  const files = { mono: fixture('mono-48k-i16.wav'), stereo: STEREO, rate44: fixture('live-44k-i16.wav') };
  const effects = { lstm: fixture('lstm-12.nfx'), tcn: fixture('tcn-film.nfx') };
  for (const row of g.rows) {
    g.columns.forEach((col, k) => {
      const native = row.cells[k];
      if (col.kind === 'reference' && row.clip !== 'stereo') {
        assert.equal(native, null, `${row.clip}: no reference file, no cell`);
        return;
      }
      let want;
      if (col.kind === 'input') want = wavHash(files[row.clip]);
      else if (col.kind === 'reference') want = wavHash(STEREO_REF);
      else want = renderHash(effects[col.effect], files[row.clip], col.controls);
      assert.equal(native.hash, want.hash, `${row.clip} × ${col.name}`);
      assert.equal(native.frames, want.frames, `${row.clip} × ${col.name}`);
    });
  }
});

for (const variant of ['simd', 'scalar']) {
  test(`every grid cell computed in the browser (${variant} build) has the native samples`, async () => {
    const { page, problems } = await openGrid(`${server.url}?variant=${variant}`);
    assert.equal(await page.textContent('#grid-title'), 'Grid under test');
    const g = built.site.grid;
    for (let r = 0; r < g.rows.length; r++) {
      await page.click(cell(r, 2)); // plays; the rest of the row follows in the background
      for (let k = 0; k < g.columns.length; k++) {
        if (!g.rows[r].cells[k]) {
          assert.equal(await page.getAttribute(cell(r, k), 'data-state'), 'none');
          continue;
        }
        const d = await waitReady(page, r, k);
        assert.equal(d.state, 'ready', d.label);
        assert.equal(d.hash, g.rows[r].cells[k].hash, `${g.rows[r].clip} × ${g.columns[k].name}`);
        assert.equal(d.verdict, 'pass', d.label);
        assert.match(d.label, /same samples as native/);
      }
    }
    await page.click(cell(0, 2)); // stop whatever plays
    await page.close();
    assert.deepEqual(problems, []);
  });
}

test('switching columns while a row plays keeps one sample-aligned timeline, with or without loudness matching', async () => {
  const { page, problems } = await openGrid(server.url);
  await page.click(cell(1, 2));
  await page.waitForSelector(`${cell(1, 2)}[data-playing=true]`, { timeout: 90000 });
  for (let k = 0; k < 5; k++) await waitReady(page, 1, k);
  await page.waitForTimeout(250);
  const before = await page.evaluate(() => document.getElementById('grid').gridPlayer.position());
  await page.click(cell(1, 4));
  await page.check('#grid-match');
  await page.click(cell(1, 0));
  const s = await page.evaluate(() => {
    const p = document.getElementById('grid').gridPlayer;
    const gains = {};
    for (const [k, v] of p.sources) gains[k] = v.gain.gain.value;
    return { position: p.position(), start: p.start, rate: p.ctx.sampleRate, column: p.column, row: p.row,
      starts: p.starts, matchDb: [...p.matchDb], playing: p.playing, gains };
  });
  assert.equal(s.playing, true);
  assert.equal(s.row, 1);
  assert.equal(s.column, 0);
  assert.ok(s.position >= before, `the position went back from ${before} to ${s.position} on switching`);
  assert.ok(s.position < before + 2, `the position jumped from ${before} to ${s.position}`);
  // Every source of the row (joined at the start or later) plays sample i at start + i / rate.
  assert.ok(s.starts.length >= 5, JSON.stringify(s.starts));
  for (const st of s.starts)
    assert.ok(Math.abs(st.when - st.offset - s.start) < 0.5 / s.rate, `column ${st.column} is off the row's timeline: ${JSON.stringify(st)}`);
  // Loudness matched to the dry input: the dry column itself needs 0 dB.
  const dry = new Map(s.matchDb).get(0);
  assert.ok(Math.abs(dry) < 1e-9, `dry column matched by ${dry} dB`);
  assert.equal(await page.getAttribute(cell(1, 0), 'data-playing'), 'true');
  assert.equal(await page.getAttribute(cell(1, 4), 'data-playing'), 'false');
  await page.click(cell(1, 0));
  assert.equal(await page.getAttribute(cell(1, 0), 'data-playing'), 'false');
  await page.close();
  assert.deepEqual(problems, []);
});

test('the keyboard moves between cells and plays them; the address restores the chosen cell and its samples', async () => {
  const { page, problems } = await openGrid(server.url);
  await page.focus(`${cell(0, 0)} button`);
  await page.keyboard.press('ArrowRight');
  await page.keyboard.press('ArrowRight');
  await page.keyboard.press('ArrowDown');
  await page.keyboard.press('ArrowRight');
  assert.equal(await page.evaluate(() => document.activeElement.closest('td').cellIndex), 4);
  assert.equal(await page.evaluate(() => document.activeElement.closest('tr').rowIndex), 2);
  // One tab stop for the whole grid (the ARIA grid pattern).
  assert.equal(await page.$$eval('#grid button[tabindex="0"]', (l) => l.length), 1);
  await page.keyboard.press('Space');
  const d = await waitReady(page, 1, 3);
  await page.waitForSelector(`${cell(1, 3)}[data-playing=true]`);
  await page.keyboard.press('Space');
  await page.waitForSelector(`${cell(1, 3)}[data-playing=false]`);
  const address = page.url();
  assert.match(address, /[#&]cell=stereo\.3(&|$)/);
  await page.close();

  const again = await openGrid(address);
  const p2 = again.page;
  assert.equal(await p2.getAttribute(cell(1, 3), 'data-chosen'), 'true');
  assert.equal(await p2.getAttribute(`${cell(1, 3)} button`, 'tabindex'), '0');
  await p2.focus(`${cell(1, 3)} button`);
  await p2.keyboard.press('Enter');
  const d2 = await waitReady(p2, 1, 3);
  assert.equal(d2.hash, d.hash);
  assert.equal(p2.url(), address);
  await p2.click(cell(1, 3));
  await p2.close();

  // A cell named by anyone: an unknown clip or column is ignored.
  const hostile = await openGrid(`${server.url}#cell=nope.1`);
  assert.equal(await hostile.page.$$eval('#grid td[data-chosen=true]', (l) => l.length), 0);
  const outside = await openGrid(`${server.url}#cell=mono.99`);
  assert.equal(await outside.page.$$eval('#grid td[data-chosen=true]', (l) => l.length), 0);
  await hostile.page.close();
  await outside.page.close();
  assert.deepEqual([...problems, ...again.problems, ...hostile.problems, ...outside.problems], []);
});

test('at 390 px the grid scrolls inside its panel and the page never sideways, after every interaction; screenshots', async () => {
  const { page, problems } = await openGrid(server.url, { width: 390, height: 844 });
  await noSidewaysScroll(page, 'loaded');
  await page.click(cell(1, 2));
  await noSidewaysScroll(page, 'computing');
  for (let k = 0; k < 5; k++) await waitReady(page, 1, k);
  await noSidewaysScroll(page, 'row computed');
  await page.click(cell(1, 4));
  await page.check('#grid-match');
  await noSidewaysScroll(page, 'switched, loudness matched');
  mkdirSync(ARTIFACTS, { recursive: true });
  await page.locator('#panel-grid').screenshot({ path: join(ARTIFACTS, 'grid-phone.png') });
  await page.click(cell(1, 4));
  await noSidewaysScroll(page, 'stopped');
  await page.close();
  const desk = await openGrid(server.url);
  await desk.page.click(cell(0, 3));
  await waitReady(desk.page, 0, 4);
  await desk.page.click(cell(0, 3));
  await desk.page.locator('#panel-grid').screenshot({ path: join(ARTIFACTS, 'grid-desktop.png') });
  await desk.page.close();
  assert.deepEqual([...problems, ...desk.problems], []);
});

test('the chosen cell shows its spectrogram, and its level difference from the row\'s reference where there is one', async () => {
  const { page, problems } = await openGrid(server.url);
  await page.click(cell(1, 2));
  await waitReady(page, 1, 2);
  await page.click(cell(1, 2)); // stop
  await page.waitForSelector('#grid-view:not([hidden]) #grid-spec[data-state=drawn]', { timeout: 60000 });
  assert.equal(await page.getAttribute('#grid-spec', 'data-mode'), 'level');
  assert.match(await page.textContent('#grid-spec-caption'), /Stereo clip, LSTM: level in dB .* Hann window 2048, hop 512 at 48/);
  assert.equal(await page.isDisabled('#grid-view-difference'), false);
  await page.check('#grid-view-difference');
  await page.waitForSelector('#grid-spec[data-mode=difference][data-state=drawn]', { timeout: 60000 });
  assert.match(await page.textContent('#grid-spec-caption'), /Stereo clip: LSTM − Target/);
  // The mono row has no reference: no difference to show, the view falls back to the spectrogram.
  await page.click(cell(0, 3));
  await waitReady(page, 0, 3);
  await page.click(cell(0, 3));
  await page.waitForSelector('#grid-spec[data-mode=level][data-state=drawn]', { timeout: 60000 });
  assert.equal(await page.isDisabled('#grid-view-difference'), true);
  await page.close();
  assert.deepEqual(problems, []);
});
