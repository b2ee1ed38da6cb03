// The built site in headless Chromium: loads cleanly, the self-check passes
// with both builds, an offline render is bit-identical to `earshot render`,
// bad files get clear errors and leave the page working, text from files
// stays text. Screenshots go to build/browser-tests/artifacts/.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { mkdirSync, readFileSync, writeFileSync, truncateSync } from 'node:fs';
import { join } from 'node:path';
import {
  ARTIFACTS, MARKUP_NAME, buildSite, serve, launch, openPage, waitForCheck, download, compareWavBits,
  earshotBin, mustRun, run, fixture, tmpFile, PYTHON,
} from './helpers.js';

let built;
let server;
let browser;

before(async () => {
  built = buildSite('site-test');
  server = await serve(built.out);
  browser = await launch();
});

after(async () => {
  if (browser) await browser.close();
  if (server) server.stop();
});

async function selectEffect(page, id) {
  await page.selectOption('#effect-select', `site:${id}`);
  return waitForCheck(page, `site:${id}`);
}

test('the page loads with no console errors, shows the config as text, and its screenshots are saved', async () => {
  const { page, problems } = await openPage(browser.context, server.url);
  const check = await waitForCheck(page);
  assert.equal(check.state, 'pass', check.text);
  // Config text with markup is shown literally (no element made from it).
  assert.equal(await page.textContent('#site-title'), built.config.title);
  assert.equal(await page.title(), built.config.title);
  assert.equal(await page.locator('#site-title em').count(), 0);
  assert.equal(await page.textContent('#site-credits li'), built.config.credits[0]);
  assert.equal(await page.locator('#site-credits u').count(), 0);
  assert.match(await page.textContent('#variant-line'), /simd build/);
  // The verdict also sits above the fold as a compact badge, in words and a mark.
  assert.equal(await page.getAttribute('#check-badge', 'data-state'), 'pass');
  assert.match(await page.textContent('#check-badge'), /✓ .*same samples as native \(simd build\)/);
  const badge = await page.locator('#check-badge').boundingBox();
  assert.ok(badge && badge.y + badge.height <= 900, `the self-check badge ends at ${badge && badge.y + badge.height} px, below the fold`);
  // A Content-Security-Policy allowing only what the page uses, and no inline script or handler.
  const csp = await page.getAttribute('meta[http-equiv="Content-Security-Policy"]', 'content');
  assert.match(csp, /default-src 'none'/);
  assert.match(csp, /script-src 'self' 'wasm-unsafe-eval';/);
  assert.equal(await page.locator('script:not([src])').count(), 0);
  assert.equal(await page.evaluate(() => [...document.querySelectorAll('*')].filter((e) => [...e.attributes].some((a) => a.name.startsWith('on'))).length), 0);
  // Every control has a label (or aria-label) and is reachable by the keyboard.
  const unlabelled = await page.evaluate(() => [...document.querySelectorAll('input, select, button')]
    .filter((e) => !(e.labels && e.labels.length) && !e.getAttribute('aria-label') && !(e.tagName === 'BUTTON' && e.textContent.trim()))
    .map((e) => e.id || e.outerHTML.slice(0, 60)));
  assert.deepEqual(unlabelled, []);
  assert.equal(await page.evaluate(() => [...document.querySelectorAll('input, select, button')].filter((e) => e.tabIndex < 0).length), 0);
  mkdirSync(ARTIFACTS, { recursive: true });
  await page.screenshot({ path: join(ARTIFACTS, 'page-desktop.png'), fullPage: true });
  const phone = await browser.context.newPage();
  await phone.setViewportSize({ width: 390, height: 844 });
  await phone.goto(server.url);
  await waitForCheck(phone);
  // Usable on a phone: nothing wider than the screen.
  const overflow = await phone.evaluate(() => document.documentElement.scrollWidth - window.innerWidth);
  assert.ok(overflow <= 0, `the page is ${overflow} px wider than a 390 px screen`);
  await phone.screenshot({ path: join(ARTIFACTS, 'page-phone.png'), fullPage: true });
  await phone.close();
  await page.close();
  assert.deepEqual(problems, []);
});

for (const variant of ['simd', 'scalar']) {
  test(`self-check passes for every bundled effect with the ${variant} build`, async () => {
    const { page, problems } = await openPage(browser.context, `${server.url}?variant=${variant}`);
    await waitForCheck(page);
    assert.match(await page.textContent('#variant-line'), new RegExp(`Running the ${variant} build`));
    for (const fx of built.site.effects) {
      const r = await selectEffect(page, fx.id);
      assert.equal(r.state, 'pass', `${fx.id}: ${r.text}`);
      const facts = await page.textContent('#check-facts');
      // The hash shown is the builder's, which is the native scalar variant's
      // output (checked against `earshot verify` in builder.test.js).
      assert.ok(facts.includes(fx.reference.output_hash), facts);
      assert.ok(facts.includes(`Build in this browser${variant}`), facts);
    }
    await page.close();
    assert.deepEqual(problems, []);
  });
}

test('the self-check reports the first differing sample when the native reference disagrees', async () => {
  // A page whose reference for 'lstm' is altered at sample 1000 (served from
  // a copy of the site): the check must fail and name that sample.
  const { page, problems } = await openPage(browser.context, server.url);
  await waitForCheck(page);
  const ctx = browser.context;
  await ctx.route('**/site.json', async (route) => {
    const res = await route.fetch();
    const site = await res.json();
    site.effects[0].reference.output_hash = '0123456789abcdef';
    site.effects[0].reference.data = 'reference/altered.f32';
    await route.fulfill({ response: res, json: site });
  });
  await ctx.route('**/reference/altered.f32', async (route) => {
    const res = await route.fetch({ url: new URL('reference/lstm.f32', server.url).href });
    const buf = Buffer.from(await res.body());
    const f = new Float32Array(buf.buffer, buf.byteOffset, buf.length / 4);
    f[1000] = f[1000] + 0.25;
    await route.fulfill({ status: 200, body: buf, contentType: 'application/octet-stream' });
  });
  await page.reload();
  const r = await waitForCheck(page);
  assert.equal(r.state, 'fail');
  assert.equal(await page.getAttribute('#check-badge', 'data-state'), 'fail');
  assert.match(await page.textContent('#check-badge'), /✗ .*differs from native/);
  assert.match(r.text, /first at sample 1\u202f000: this browser gives/);
  await ctx.unrouteAll();
  await page.close();
  assert.deepEqual(problems, []);
});

// Moves a slider as a user would (value, then an input event).
async function setRange(page, selector, value) {
  await page.$eval(selector, (el, v) => {
    el.value = v;
    el.dispatchEvent(new Event('input', { bubbles: true }));
  }, value);
}

async function renderUpload(page, file) {
  await page.setInputFiles('#offline-file', file);
  await page.click('#render');
  await page.waitForSelector('#offline-status[data-kind=ok], #offline-status[data-kind=error]', { timeout: 120000 });
  return { kind: await page.getAttribute('#offline-status', 'data-kind'), text: await page.textContent('#offline-status') };
}

test('an uploaded WAV rendered offline and downloaded is bit-identical to earshot render', async () => {
  const { page, problems } = await openPage(browser.context, server.url);
  await waitForCheck(page);
  await selectEffect(page, 'tcn');
  // Controls typed into the number boxes (config defaults were drive 0.7, tone -3).
  await page.fill('#control-0-value', '0.35');
  await page.press('#control-0-value', 'Enter');
  await page.fill('#control-1-value', '4.5');
  await page.press('#control-1-value', 'Enter');
  const cases = [
    // float32 stereo at 44.1 kHz: the core resamples to 48 kHz and back.
    { file: fixture('stereo-44k-f32.wav'), args: [] },
    // 16-bit mono at the model rate, with dry/wet and output gain moved.
    { file: fixture('mono-48k-i16.wav'), args: ['--mix', '0.6', '--output-gain', '-6'], mix: '60', out: '-6' },
  ];
  for (const [i, c] of cases.entries()) {
    if (c.mix) {
      await setRange(page, '#mix', c.mix);
      await setRange(page, '#output-gain', c.out);
    }
    const r = await renderUpload(page, c.file);
    assert.equal(r.kind, 'ok', r.text);
    const pagePath = await download(page, '#download', `offline-page-${i}.wav`);
    const cliPath = tmpFile(`offline-cli-${i}.wav`);
    mustRun(earshotBin(), ['render', join(built.out, built.site.effects[1].file), c.file, cliPath,
      '--control', 'drive=0.35', '--control', 'tone=4.5', '--quiet', '--force', ...c.args]);
    const cmp = compareWavBits(pagePath, cliPath);
    assert.equal(cmp.same, true, `page vs earshot render for ${c.file}: ${JSON.stringify(cmp)}`);
    assert.equal(cmp.dtypes[0], 'float32');
    // The loudness the page shows is the core's, as `earshot loudness` measures it.
    const line = await page.$eval('#loudness-line', (e) => ({ ...e.dataset }));
    assert.equal(line.by, 'core');
    const native = JSON.parse(mustRun(earshotBin(), ['loudness', '--json', c.file, cliPath]).stdout).files;
    // `earshot loudness --json` prints 15 significant digits.
    assert.equal(Number(line.original).toPrecision(15), native[0].integrated_lufs.toPrecision(15), 'original');
    assert.equal(Number(line.processed).toPrecision(15), native[1].integrated_lufs.toPrecision(15), 'processed');
  }
  await page.close();
  assert.deepEqual(problems, []);
});

test('a FLAC file is decoded by the browser, resampled to the model rate and rendered', async () => {
  const { page, problems } = await openPage(browser.context, server.url);
  await waitForCheck(page);
  const r = await renderUpload(page, fixture('stereo-44k.flac'));
  assert.equal(r.kind, 'ok', r.text);
  const facts = await page.textContent('#result-facts');
  assert.match(facts, /stereo, 48\u202f000 Hz, 2\.50 s, decoded by the browser and resampled to 48\u202f000 Hz \(the model rate\)/);
  assert.match(facts, /Resamplingnone \(the file is at the model rate\)/);
  const path = await download(page, '#download', 'offline-flac.wav');
  const info = JSON.parse(mustRun(PYTHON, ['-c', 'import sys, json, scipy.io.wavfile as w; r, x = w.read(sys.argv[1]); print(json.dumps([r, list(x.shape)]))', path]).stdout);
  assert.deepEqual(info, [48000, [120000, 2]]);
  await page.close();
  assert.deepEqual(problems, []);
});

test('a bundled clip renders and plays with lockstep A/B switching and loudness matching', async () => {
  const { page, problems } = await openPage(browser.context, server.url);
  await waitForCheck(page);
  await page.click('#clip-use');
  await page.waitForSelector('#offline-source:not([hidden])');
  await page.click('#render');
  await page.waitForSelector('#offline-status[data-kind=ok]', { timeout: 60000 });
  const loud = await page.textContent('#loudness-line');
  assert.match(loud, /original -?\d+\.\d LUFS, processed -?\d+\.\d LUFS/);
  await page.check('#match');
  assert.match(await page.textContent('#loudness-line'), /While matching, the processed side plays [+−]\d/);
  await page.click('#play');
  await page.waitForFunction(() => document.getElementById('play').textContent === 'Pause');
  await page.keyboard.press('t');
  assert.equal(await page.isChecked('#ab-original'), true);
  await page.keyboard.press('t');
  assert.equal(await page.isChecked('#ab-processed'), true);
  await page.click('#play');
  await page.close();
  assert.deepEqual(problems, []);
});

test('a result goes out of date when a setting changes, says what changed, and renders again', async () => {
  const { page, problems } = await openPage(browser.context, server.url);
  await waitForCheck(page);
  await selectEffect(page, 'tcn'); // it has controls (page defaults drive 0.7, tone -3)
  await page.click('#clip-use');
  await page.waitForSelector('#offline-source:not([hidden])');
  await page.click('#render');
  await page.waitForSelector('#offline-status[data-kind=ok]', { timeout: 60000 });
  const name = await page.getAttribute('#control-0', 'data-control');
  const before = await page.inputValue('#control-0-value');
  const facts = await page.textContent('#result-facts');
  assert.match(facts, new RegExp(`Settings${name} ${before}, .*; mix 100 % wet; input gain \\+?0\\.0 dB; output gain \\+?0\\.0 dB`));
  assert.equal(await page.isHidden('#result-stale'), true);

  // A control moves: the result says it is out of date and names the change.
  const other = String(Number(before) === 0.2 ? 0.3 : 0.2);
  await page.fill('#control-0-value', other);
  await page.press('#control-0-value', 'Tab');
  await page.waitForSelector('#result-stale:not([hidden])');
  assert.equal(await page.textContent('#result-stale-text'),
    `Out of date: changed since this render: ${name} ${before} → ${other}.`);
  // The mix too; both are listed.
  await page.$eval('#mix', (e) => { e.value = '50'; e.dispatchEvent(new Event('input')); });
  assert.match(await page.textContent('#result-stale-text'), /; mix 100 % wet → 50 % wet\.$/);
  // On a phone the notice and the result fit the screen: no sideways scroll.
  await page.setViewportSize({ width: 390, height: 844 });
  const overflow = await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth);
  assert.ok(overflow <= 0, `with a result out of date the page is ${overflow} px wider than a 390 px screen`);
  // Back to what was rendered: current again.
  await page.$eval('#mix', (e) => { e.value = '100'; e.dispatchEvent(new Event('input')); });
  await page.fill('#control-0-value', before);
  await page.press('#control-0-value', 'Tab');
  await page.waitForSelector('#result-stale', { state: 'hidden' });
  assert.equal(await page.getAttribute('#result', 'data-stale'), 'false');

  // Changed again, then "Render again": the new result lists the new value and is current.
  await page.fill('#control-0-value', other);
  await page.press('#control-0-value', 'Tab');
  await page.waitForSelector('#result-stale:not([hidden])');
  await page.evaluate(() => { document.getElementById('offline-status').dataset.kind = 'busy'; });
  await page.click('#rerender');
  await page.waitForSelector('#offline-status[data-kind=ok]', { timeout: 60000 });
  await page.waitForSelector('#result-stale', { state: 'hidden' });
  assert.match(await page.textContent('#result-facts'), new RegExp(`Settings${name} ${other}, `));
  await page.close();
  assert.deepEqual(problems, []);
});

test('the address keeps the settings: opened elsewhere it restores them and renders the same samples', async () => {
  const { page, problems } = await openPage(browser.context, server.url);
  await waitForCheck(page);
  await selectEffect(page, 'tcn');
  await page.fill('#control-0-value', '0.25');
  await page.press('#control-0-value', 'Tab');
  await page.$eval('#mix', (e) => { e.value = '40'; e.dispatchEvent(new Event('input')); });
  await page.$eval('#input-gain', (e) => { e.value = '-6'; e.dispatchEvent(new Event('input')); });
  await page.click('#clip-use');
  await page.waitForSelector('#offline-source:not([hidden])');
  await page.click('#render');
  await page.waitForSelector('#offline-status[data-kind=ok]', { timeout: 60000 });
  await page.check('#ab-original');
  const first = await page.getAttribute('#result', 'data-hash');
  assert.match(first, /^[0-9a-f]{16}$/);
  const address = page.url();
  const name = await page.getAttribute('#control-0', 'data-control');
  assert.match(address, new RegExp(`#fx=tcn&clip=[^&]+&c\\.${name}=0\\.25&.*mix=0\\.4&in=-6&out=0&ab=original$`));
  await page.close();

  const again = await openPage(browser.context, address);
  const p2 = again.page;
  await waitForCheck(p2, 'site:tcn');
  await p2.waitForFunction(() => document.body.dataset.ready === 'true');
  assert.equal(await p2.inputValue('#effect-select'), 'site:tcn');
  assert.equal(await p2.inputValue('#control-0-value'), '0.25');
  assert.equal(await p2.inputValue('#mix'), '40');
  assert.equal(await p2.inputValue('#input-gain'), '-6');
  assert.equal(await p2.isChecked('#ab-original'), true);
  await p2.waitForSelector('#offline-source:not([hidden])');
  await p2.click('#render');
  await p2.waitForSelector('#offline-status[data-kind=ok]', { timeout: 60000 });
  assert.equal(await p2.getAttribute('#result', 'data-hash'), first);
  assert.equal(p2.url(), address);
  await p2.close();
  assert.deepEqual(problems, []);
  assert.deepEqual(again.problems, []);

  // An address from anyone: unknown ids, out-of-range and non-numbers are ignored, markup stays text.
  const hostile = await openPage(browser.context,
    `${server.url.replace(/\/$/, '')}/#fx=%3Cimg%20src%3Dx%20onerror%3Dalert(1)%3E&clip=nope&c.drive=1e999&c.tone=abc&mix=7&in=-999&bypass=0`);
  await waitForCheck(hostile.page);
  await hostile.page.waitForFunction(() => document.body.dataset.ready === 'true');
  assert.equal(await hostile.page.inputValue('#mix'), '100');
  assert.equal(await hostile.page.inputValue('#input-gain'), '0');
  assert.equal(await hostile.page.$$eval('img', (l) => l.length), 0);
  await hostile.page.close();
  assert.deepEqual(hostile.problems, []);
});

// WCAG 2.1 (W3C Recommendation, 2018), definitions "relative luminance" and
// "contrast ratio": sRGB channels linearised, L = 0.2126 R + 0.7152 G + 0.0722 B,
// ratio (L1 + 0.05) / (L2 + 0.05).
function contrast(a, b) {
  const lum = (hex) => {
    const [r, g, bl] = [1, 3, 5].map((i) => parseInt(hex.slice(i, i + 2), 16) / 255)
      .map((c) => (c <= 0.03928 ? c / 12.92 : ((c + 0.055) / 1.055) ** 2.4));
    return 0.2126 * r + 0.7152 * g + 0.0722 * bl;
  };
  const [hi, lo] = [lum(a), lum(b)].sort((x, y) => y - x);
  return (hi + 0.05) / (lo + 0.05);
}

test('light and dark themes follow prefers-color-scheme and hold WCAG contrast; screenshots of both', async () => {
  for (const scheme of ['light', 'dark']) {
    const { page, problems } = await openPage(browser.context, server.url);
    await page.emulateMedia({ colorScheme: scheme });
    await waitForCheck(page);
    await page.click('#clip-use');
    await page.waitForSelector('#offline-source:not([hidden])');
    await page.click('#render');
    await page.waitForSelector('#offline-status[data-kind=ok]', { timeout: 60000 });
    const c = await page.evaluate(() => {
      const s = getComputedStyle(document.documentElement);
      const names = ['--paper', '--panel', '--ink', '--muted', '--ok', '--ok-bg', '--bad', '--bad-bg', '--processed',
        '--original', '--wave-bg', '--accent', '--accent-ink'];
      return { ...Object.fromEntries(names.map((k) => [k, s.getPropertyValue(k).trim()])),
        body: getComputedStyle(document.body).backgroundColor, scheme: s.colorScheme };
    });
    assert.equal(c.scheme, scheme);
    const [r, g, b] = c.body.match(/\d+/g).map(Number);
    assert.ok(scheme === 'dark' ? r + g + b < 150 : r + g + b > 600, `${scheme}: body background ${c.body}`);
    // SC 1.4.6 (enhanced, 7:1) for body text; SC 1.4.3 (4.5:1) for the rest of the text;
    // SC 1.4.11 (3:1) for the waveforms.
    const need = [['--ink', '--paper', 7], ['--ink', '--panel', 7], ['--muted', '--panel', 4.5], ['--ok', '--ok-bg', 4.5],
      ['--bad', '--bad-bg', 4.5], ['--accent-ink', '--accent', 4.5], ['--processed', '--wave-bg', 3], ['--original', '--wave-bg', 3]];
    for (const [fg, bg, min] of need) {
      const ratio = contrast(c[fg], c[bg]);
      assert.ok(ratio >= min, `${scheme}: ${fg} on ${bg} is ${ratio.toFixed(2)}:1, needs ${min}:1`);
    }
    await page.screenshot({ path: join(ARTIFACTS, `page-${scheme}-desktop.png`), fullPage: true });
    await page.setViewportSize({ width: 390, height: 844 });
    const overflow = await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth);
    assert.ok(overflow <= 0, `${scheme}: after a render the page is ${overflow} px wider than a 390 px screen`);
    await page.screenshot({ path: join(ARTIFACTS, `page-${scheme}-phone.png`), fullPage: true });
    await page.close();
    assert.deepEqual(problems, []);
  }
});

test('a corrupt effect file and a non-audio upload each give a clear error and leave the page working', async () => {
  const { page, problems } = await openPage(browser.context, server.url);
  await waitForCheck(page);
  await page.setInputFiles('#effect-file', fixture('corrupt.nfx'));
  await page.waitForSelector('#effect-status[data-kind=error]');
  const err = await page.textContent('#effect-status');
  assert.match(err, /'corrupt\.nfx' cannot be used as an effect: effect file header: line 1, column 2: Missing a name for object member\./);
  assert.equal(await page.inputValue('#effect-select'), 'site:lstm');

  const bad = await renderUpload(page, fixture('notes.txt'));
  assert.equal(bad.kind, 'error');
  assert.match(bad.text, /'notes\.txt' could not be read as audio/);
  const three = await renderUpload(page, fixture('three-channels.wav'));
  assert.equal(three.kind, 'error');
  assert.match(three.text, /has 3 channels; the page renders mono or stereo files only/);

  // Still working: another effect passes its self-check and a real file renders.
  const r = await selectEffect(page, 'tcn');
  assert.equal(r.state, 'pass', r.text);
  const good = await renderUpload(page, fixture('mono-48k-i16.wav'));
  assert.equal(good.kind, 'ok', good.text);
  await page.close();
  assert.deepEqual(problems, []);
});

test('a cut-short WAV, an effect file over 256 MiB and audio over the page limit are refused before reading; the page keeps working', async () => {
  const { page, problems } = await openPage(browser.context, server.url);
  await waitForCheck(page);
  // A WAV cut to half its frames: an error naming frames read and declared, not a shorter render.
  const whole = readFileSync(fixture('mono-48k-i16.wav'));
  const declared = whole.readUInt32LE(40) / 2; // 16-bit mono; data chunk at byte 36 (SciPy's layout)
  const cutPath = tmpFile('cut-half.wav');
  writeFileSync(cutPath, whole.subarray(0, 44 + Math.floor(declared / 2) * 2));
  const cut = await renderUpload(page, cutPath);
  assert.equal(cut.kind, 'error');
  assert.match(cut.text, new RegExp(`'cut-half\\.wav' is cut short: read ${Math.floor(declared / 2)} of ${declared} frames`));
  // 2^25 + 1 frames of 8-bit mono (a sparse file): over the page's limit, refused from the header.
  const longPath = tmpFile('too-long.wav');
  const frames = 2 ** 25 + 1;
  const h = Buffer.alloc(44);
  h.write('RIFF', 0, 'latin1'); h.writeUInt32LE(36 + frames + 1, 4); h.write('WAVEfmt ', 8, 'latin1');
  h.writeUInt32LE(16, 16); h.writeUInt16LE(1, 20); h.writeUInt16LE(1, 22); h.writeUInt32LE(48000, 24);
  h.writeUInt32LE(48000, 28); h.writeUInt16LE(1, 32); h.writeUInt16LE(8, 34); h.write('data', 36, 'latin1');
  h.writeUInt32LE(frames, 40);
  writeFileSync(longPath, h);
  truncateSync(longPath, 44 + frames + 1);
  const long = await renderUpload(page, longPath);
  assert.equal(long.kind, 'error');
  assert.match(long.text, /'too-long\.wav' is 33554433 frames long .*at most 33554432 frames per file/);
  // An effect file one byte over the core's 256 MiB limit (sparse): the core's own text, file not read.
  const bigPath = tmpFile('too-big.nfx');
  writeFileSync(bigPath, '');
  truncateSync(bigPath, 256 * 1024 * 1024 + 1);
  await page.setInputFiles('#effect-file', bigPath);
  await page.waitForSelector('#effect-status[data-kind=error]');
  assert.equal(await page.textContent('#effect-status'),
    "'too-big.nfx' cannot be used as an effect: effect file: 268435457 bytes exceeds the 256 MiB limit");
  // The native tool refuses the same file before reading it too (exit 3).
  const native = run(earshotBin(), ['info', bigPath]);
  assert.equal(native.status, 3);
  assert.match(native.stderr, /268435457 bytes, over the 268435456-byte \(256 MiB\) limit/);
  const good = await renderUpload(page, fixture('mono-48k-i16.wav'));
  assert.equal(good.kind, 'ok', good.text);
  await page.close();
  assert.deepEqual(problems, []);
});

test('an effect whose title and name contain markup shows them as text', async () => {
  const { page, problems } = await openPage(browser.context, server.url);
  await waitForCheck(page);
  const r = await selectEffect(page, 'markup');
  assert.equal(r.state, 'pass', r.text);
  // This one was trained at 44.1 kHz: the self-check ran at its own rate.
  assert.match(await page.textContent('#check-facts'), /132\u202f300 samples at 44\u202f100 Hz/);
  const title = '<img src=x onerror="window.__markup=1"><b>Bold</b> & <i>co</i>';
  assert.equal(await page.textContent('#card-title'), MARKUP_NAME);
  assert.ok((await page.textContent('#card-facts')).includes(title));
  assert.equal(await page.locator('#effect-card img, #effect-card b, #effect-card i, #effect-card script').count(), 0);
  // Its code link is javascript:: shown as text, never a link.
  assert.equal(await page.locator('#card-links a').count(), 0);
  assert.match(await page.textContent('#card-links'), /Code: javascript:alert\(1\)/);
  // The same file opened by the visitor.
  await page.setInputFiles('#effect-file', fixture('markup.nfx'));
  await page.waitForSelector('#check-status[data-state=none]');
  const r2 = await waitForCheck(page);
  assert.equal(r2.state, 'none', r2.text);
  assert.equal(await page.textContent('#card-title'), title);
  assert.equal(await page.locator('#effect-card img, #effect-card b, #effect-card i').count(), 0);
  assert.equal(await page.evaluate(() => window.__markup), undefined);
  await page.close();
  assert.deepEqual(problems, []);
});

test('the live processor starts at the low listening level and its limiter holds the output under -1 dBFS', async () => {
  const { page, problems } = await openPage(browser.context, server.url);
  await waitForCheck(page);
  // The processor in an OfflineAudioContext at 48 kHz, fed a 0.5-peak sine
  // through the 'lstm' effect: once at the page's default level (−30 dB, the
  // processor's own default), once at 0 dB with +24 dB of input gain.
  const run = (levelDb, inputDb) => page.evaluate(async ({ levelDb, inputDb }) => {
    const [wasm, effect] = await Promise.all(['wasm/earshot-simd.wasm', 'effects/lstm.nfx'].map((u) => fetch(u).then((r) => r.arrayBuffer())));
    const ctx = new OfflineAudioContext(2, 48000, 48000);
    await ctx.audioWorklet.addModule('worklet/processor.js');
    const osc = new OscillatorNode(ctx, { frequency: 440 });
    const amp = new GainNode(ctx, { gain: 0.5 });
    const opts = { wasm, variant: 'simd', effect, settings: { controls: {}, mix: 1, inputDb, outputDb: 0, bypass: false } };
    if (levelDb !== null) opts.levelDb = levelDb;
    const node = new AudioWorkletNode(ctx, 'earshot-live', { outputChannelCount: [2], channelCount: 1, channelCountMode: 'explicit', processorOptions: opts });
    osc.connect(amp).connect(node).connect(ctx.destination);
    osc.start();
    const out = await ctx.startRendering();
    let peak = 0;
    for (let c = 0; c < 2; c++) for (const v of out.getChannelData(c)) peak = Math.max(peak, Math.abs(v));
    return peak;
  }, { levelDb, inputDb });
  const quiet = await run(null, 0);
  const loud = await run(0, 24);
  const ceiling = Math.pow(10, -1 / 20); // the limiter's ceiling, −1 dBFS (our choice; common practice, no source)
  assert.ok(quiet < 0.1, `at the default level the output peaks at ${quiet}`);
  assert.ok(loud <= ceiling * (1 + 1e-6), `with +24 dB in, the output peaks at ${loud} > ${ceiling}`);
  assert.ok(loud > 0.5 * ceiling, `the limiter should let a loud signal through near its ceiling, got ${loud}`);
  await page.close();
  assert.deepEqual(problems, []);
});

test('a stereo input runs through the live processor as one 2-channel stream: each channel as a mono stream gives it, under the limiter', async () => {
  const { page, problems } = await openPage(browser.context, server.url);
  await waitForCheck(page);
  // An OfflineAudioContext at 48 kHz (the 'lstm' effect's rate) plays a
  // stereo buffer (different left and right) into 'earshot-live' with
  // channels 2. At 0 dB listening level and with the limiter idle the guard
  // multiplies by exactly 1, so each output channel must equal, bit for bit,
  // the loader's mono effect fed that channel alone (the core's promise for
  // its channels). Then +24 dB in: the limiter holds both channels under
  // -1 dBFS with one shared gain.
  const r = await page.evaluate(async () => {
    const { loadVariant } = await import('./worklet/loader.js');
    const [wasm, effect] = await Promise.all(['wasm/earshot-simd.wasm', 'effects/lstm.nfx'].map((u) => fetch(u).then((x) => x.arrayBuffer())));
    const n = 48000;
    const input = [new Float32Array(n), new Float32Array(n)];
    let h = 1;
    for (let i = 0; i < n; i++) {
      h = (Math.imul(h, 1664525) + 1013904223) >>> 0;
      input[0][i] = 0.3 * Math.sin((2 * Math.PI * 440 * i) / 48000);
      input[1][i] = 0.2 * Math.sin((2 * Math.PI * 660 * i) / 48000) + 0.02 * ((h >>> 8) / 16777216 - 0.5);
    }
    const render = async (inputDb) => {
      const ctx = new OfflineAudioContext(2, n, 48000);
      await ctx.audioWorklet.addModule('worklet/processor.js');
      const buf = new AudioBuffer({ length: n, numberOfChannels: 2, sampleRate: 48000 });
      input.forEach((x, c) => buf.copyToChannel(x, c));
      const src = new AudioBufferSourceNode(ctx, { buffer: buf });
      const settings = { controls: {}, mix: 1, inputDb, outputDb: 0, bypass: false };
      const node = new AudioWorkletNode(ctx, 'earshot-live', {
        outputChannelCount: [2], channelCount: 2, channelCountMode: 'explicit',
        processorOptions: { wasm, variant: 'simd', effect, settings, levelDb: 0, channels: 2 },
      });
      const ready = new Promise((res) => {
        node.port.onmessage = (e) => {
          if (e.data.type === 'ready' || e.data.type === 'error') res(e.data);
        };
      });
      src.connect(node).connect(ctx.destination);
      src.start();
      const out = await ctx.startRendering();
      return { ready: await ready, out: [out.getChannelData(0), out.getChannelData(1)] };
    };
    const plain = await render(0);
    const loud = await render(24);
    const variant = loadVariant(wasm, { name: 'simd' });
    const firstDiff = [];
    for (let c = 0; c < 2; c++) {
      const fx = variant.createEffect(effect, 48000);
      const y = fx.process(input[c], new Float32Array(n));
      fx.destroy();
      const a = new Uint32Array(y.buffer);
      const b = new Uint32Array(plain.out[c].buffer);
      let d = -1;
      for (let i = 0; i < n; i++) if (a[i] !== b[i]) { d = i; break; }
      firstDiff.push(d);
    }
    const peak = (x) => x.reduce((m, v) => Math.max(m, Math.abs(v)), 0);
    let same = true;
    for (let i = 0; i < n && same; i++) same = plain.out[0][i] === plain.out[1][i];
    return {
      ready: plain.ready, firstDiff, channelsSame: same,
      plainPeaks: plain.out.map(peak), loudPeaks: loud.out.map(peak),
    };
  });
  assert.equal(r.ready.type, 'ready', r.ready.message);
  assert.equal(r.ready.channels, 2);
  const ceiling = Math.pow(10, -1 / 20); // the limiter's ceiling, −1 dBFS (our choice; common practice, no source)
  assert.ok(Math.max(...r.plainPeaks) < ceiling, `the limiter must stay idle for the bit-exact check; peaks ${r.plainPeaks}`);
  assert.equal(r.channelsSame, false, 'left and right outputs differ');
  assert.deepEqual(r.firstDiff, [-1, -1], `first differing sample per channel: ${r.firstDiff}`);
  for (const p of r.loudPeaks) {
    assert.ok(p <= ceiling * (1 + 1e-6), `with +24 dB in, a channel peaks at ${p} > ${ceiling}`);
    assert.ok(p > 0.3 * ceiling, `with +24 dB in, each channel still sounds near the ceiling, got ${p}`);
  }
  await page.close();
  assert.deepEqual(problems, []);
});

test('a stopped live processor is no longer called, so an effect switch leaves one processor running', async () => {
  const { page, problems } = await openPage(browser.context, server.url);
  await waitForCheck(page);
  // As the live panel switches effects (web/js/live-panel.js, connectNode):
  // at 0.5 s the first node is sent 'stop' and disconnected, and a second
  // node takes its place. Chromium goes on calling a disconnected node whose
  // process() returns true (seen here: to the end of the render), so without
  // 'stop' the first processor's meters run to 2 s. (A processor's meters
  // count its own frames: the second one's run from 0 to 1.5 s.)
  const seen = await page.evaluate(async () => {
    const [wasm, effect] = await Promise.all(['wasm/earshot-simd.wasm', 'effects/lstm.nfx'].map((u) => fetch(u).then((r) => r.arrayBuffer())));
    const ctx = new OfflineAudioContext(1, 2 * 48000, 48000);
    await ctx.audioWorklet.addModule('worklet/processor.js');
    const osc = new OscillatorNode(ctx, { frequency: 330 });
    const last = { first: 0, second: 0 };
    const make = (key) => {
      const node = new AudioWorkletNode(ctx, 'earshot-live', {
        outputChannelCount: [1], channelCount: 1, channelCountMode: 'explicit',
        processorOptions: { wasm, variant: 'simd', effect, settings: { controls: {}, mix: 1, inputDb: 0, outputDb: 0, bypass: false } },
      });
      node.port.onmessage = (e) => {
        if (e.data.type === 'meters') last[key] = Math.max(last[key], e.data.seconds);
      };
      osc.connect(node);
      node.connect(ctx.destination);
      return node;
    };
    const first = make('first');
    ctx.suspend(0.5).then(() => {
      first.port.postMessage({ type: 'stop' });
      osc.disconnect();
      first.disconnect();
      make('second');
      ctx.resume();
    });
    osc.start();
    await ctx.startRendering();
    await new Promise((r) => setTimeout(r, 500)); // let the last meters arrive
    return last;
  });
  assert.ok(seen.second > 1.4, `the second processor metered to ${seen.second} s of 1.5 s`);
  assert.ok(seen.first < 1.0, `the stopped processor was still called at ${seen.first} s (stopped at 0.5 s)`);
  await page.close();
  assert.deepEqual(problems, []);
});

test('a render can be cancelled and the next one runs', async () => {
  const long = tmpFile('cancel-120s.wav');
  mustRun(PYTHON, ['-c', `
import sys, numpy as np, scipy.io.wavfile as w
t = np.arange(48000 * 120) / 48000
x = 0.3 * np.sin(2 * np.pi * 220 * t)
w.write(sys.argv[1], 48000, np.stack([x, x], 1).astype(np.float32))`, long]);
  const { page, problems } = await openPage(browser.context, `${server.url}?variant=scalar`);
  await waitForCheck(page);
  await selectEffect(page, 'tcn');
  await page.setInputFiles('#offline-file', long);
  await page.click('#render');
  await page.waitForFunction(() => Number(document.getElementById('render-progress').value) > 0, null, { timeout: 60000 });
  await page.click('#render-cancel');
  assert.equal(await page.textContent('#offline-status'), 'Cancelled.');
  assert.equal(await page.isHidden('#render-progress-row'), true);
  assert.equal(await page.isEnabled('#render'), true);
  await page.waitForTimeout(1500);
  assert.equal(await page.textContent('#offline-status'), 'Cancelled.', 'a cancelled render must not report later');
  const r = await renderUpload(page, fixture('mono-48k-i16.wav'));
  assert.equal(r.kind, 'ok', r.text);
  await page.close();
  assert.deepEqual(problems, []);
});
