// <earshot-effect> (web/embed.js) on a plain page that `earshot site` did not
// build, with the effects and clips on a second origin: two elements share
// one AudioContext, both pass their self-check, a render is bit-identical to
// `earshot render`, the host page's aggressive CSS and the element's styles
// do not reach each other, the element works from the keyboard and fits a
// 390 px screen, and a missing file, a file that is not an effect and a
// refused cross-origin read are each shown in their element, naming the URL.
// With `columns` the element is a comparison grid: every cell is bit-identical
// to `earshot render` of its clip and settings (Dry to the clip as SciPy reads
// it), switching columns keeps one sample-aligned timeline per row, the
// keyboard moves and plays, and bad `columns` values are shown naming the token.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { cpSync, mkdirSync, readFileSync, rmSync, writeFileSync, copyFileSync } from 'node:fs';
import { createServer } from 'node:http';
import { extname, join, normalize } from 'node:path';
import {
  ARTIFACTS, WORK, buildSite, serve, launch, openPage, earshotBin, mustRun, fixture, tmpFile, PYTHON,
} from './helpers.js';

const ROOT = join(WORK, 'embed-test');
const HOST = join(ROOT, 'host'); // the researcher's page and the copied kit
const FILES = join(ROOT, 'files'); // the second origin: open/ sends Access-Control-Allow-Origin, closed/ does not

let host;
let files;
let browser;
const refs = {};

// A static server for the second origin; Access-Control-Allow-Origin only under /open/.
function filesServer(dir) {
  const types = { '.nfx': 'application/octet-stream', '.wav': 'audio/wav', '.txt': 'text/plain', '.js': 'text/javascript', '.wasm': 'application/wasm' };
  const server = createServer((req, res) => {
    const path = normalize(decodeURIComponent(new URL(req.url, 'http://x').pathname)).replace(/^(\.\.[/\\])+/, '');
    const headers = { 'Content-Type': types[extname(path)] || 'application/octet-stream' };
    if (path.startsWith('/open/')) headers['Access-Control-Allow-Origin'] = '*';
    let body;
    try {
      body = readFileSync(join(dir, path));
    } catch {
      res.writeHead(404, headers);
      res.end('not found');
      return;
    }
    res.writeHead(200, headers);
    res.end(body);
  });
  return new Promise((resolve) => {
    server.listen(0, '127.0.0.1', () => {
      resolve({ url: `http://127.0.0.1:${server.address().port}/`, stop: () => server.close() });
    });
  });
}

// FNV-1a 64 (offset basis 0xcbf29ce484222325, prime 0x100000001b3: the FNV
// specification, draft-eastlake-fnv) over the float32 little-endian bytes of
// a WAV's samples, channel after channel, the WAV read by SciPy. A render is
// float32; a dry clip may be 16-bit, scaled by 1/32768 as libsndfile reads it
// into floats (common practice, no source; tests/browser/grid.test.js does the same).
function wavHash(path, { pcm16 = false } = {}) {
  const code = `
import sys, numpy as np, scipy.io.wavfile as w
r, x = w.read(sys.argv[1])
if sys.argv[2] == '1' and x.dtype == np.int16: x = x.astype(np.float32) / 32768.0
assert x.dtype == np.float32, x.dtype
x = x.reshape(len(x), -1)
h = 0xcbf29ce484222325
for c in range(x.shape[1]):
    for b in np.ascontiguousarray(x[:, c]).astype('<f4').tobytes():
        h = ((h ^ b) * 0x100000001b3) & 0xffffffffffffffff
print('%016x' % h)
`;
  return mustRun(PYTHON, ['-c', code, path, pcm16 ? '1' : '0']).stdout.trim();
}

function nativeRenderHash(effect, clip, controls, tag) {
  const out = tmpFile(`embed-${tag}.wav`);
  mustRun(earshotBin(), ['render', effect, clip, out, '--quiet', ...Object.entries(controls).flatMap(([k, v]) => ['--control', `${k}=${v}`])]);
  return wavHash(out);
}

function verifyHash(effect) {
  const j = JSON.parse(mustRun(earshotBin(), ['verify', effect, '--json']).stdout);
  return j.variants.find((v) => v.variant === 'scalar').hash;
}

// Global rules a host page might have: they must not break the element.
const AGGRESSIVE_CSS = `
* { color: red !important; font-size: 40px !important; }
button { display: none; }
input, select { display: none !important; }
p, div { margin: 30px !important; padding: 20px !important; border: 4px dotted red !important; }
`;

function hostPage(elements, head = '', kit = 'kit/embed.js') {
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8">${head}
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>A paper's page</title>
<link rel="icon" href="data:,">
<link rel="stylesheet" href="paper.css">
<script type="module" src="${kit}"></script>
</head><body>
<h1>Paper</h1>
<p id="host-text">Our results.</p>
<button id="host-button" type="button">Host button</button>
${elements}
</body></html>
`;
}

before(async () => {
  // The kit: the files the element needs, copied out of a site `earshot site` built.
  const built = buildSite('embed-site');
  rmSync(ROOT, { recursive: true, force: true });
  mkdirSync(join(HOST, 'kit'), { recursive: true });
  for (const f of ['embed.js', 'js', 'worklet', 'wasm']) cpSync(join(built.out, f), join(HOST, 'kit', f), { recursive: true });
  mkdirSync(join(FILES, 'open'), { recursive: true });
  mkdirSync(join(FILES, 'closed'), { recursive: true });
  for (const f of ['lstm-12.nfx', 'tcn-film.nfx', 'mono-48k-i16.wav', 'stereo-44k-f32.wav']) copyFileSync(fixture(f), join(FILES, 'open', f));
  copyFileSync(fixture('notes.txt'), join(FILES, 'open', 'notes.nfx'));
  cpSync(join(HOST, 'kit'), join(FILES, 'open', 'kit'), { recursive: true }); // the copied folder on the second origin
  copyFileSync(fixture('tcn-film.nfx'), join(FILES, 'closed', 'tcn-film.nfx'));
  writeFileSync(join(HOST, 'paper.css'), AGGRESSIVE_CSS);
  refs.lstm = verifyHash(fixture('lstm-12.nfx'));
  refs.tcn = verifyHash(fixture('tcn-film.nfx'));
  files = await filesServer(FILES);
  host = await serve(HOST);
  const f = files.url;
  writeFileSync(join(HOST, 'index.html'), hostPage(`
<earshot-effect id="fx-a" effect="${f}open/lstm-12.nfx" clips="${f}open/mono-48k-i16.wav" reference="${refs.lstm}"></earshot-effect>
<earshot-effect id="fx-b" effect="${f}open/tcn-film.nfx" clips="${f}open/mono-48k-i16.wav ${f}open/stereo-44k-f32.wav"
  controls="drive" values="drive=0.35, tone=4.5" reference="${refs.tcn}" label="Tape model"></earshot-effect>
<p id="host-after">After the elements.</p>`));
  writeFileSync(join(HOST, 'errors.html'), hostPage(`
<earshot-effect id="missing" effect="${f}open/missing.nfx" clips="${f}open/mono-48k-i16.wav"></earshot-effect>
<earshot-effect id="notfx" effect="${f}open/notes.nfx" clips="${f}open/mono-48k-i16.wav"></earshot-effect>
<earshot-effect id="nocors" effect="${f}closed/tcn-film.nfx" clips="${f}open/mono-48k-i16.wav"></earshot-effect>
<earshot-effect id="badclip" effect="${f}open/lstm-12.nfx" clips="${f}closed/nothing.wav" reference="${refs.lstm}"></earshot-effect>
<earshot-effect id="badname" effect="${f}open/tcn-film.nfx" clips="${f}open/mono-48k-i16.wav" controls="drive, fuzz"></earshot-effect>
<earshot-effect id="good" effect="${f}open/lstm-12.nfx" clips="${f}open/mono-48k-i16.wav" reference="${refs.lstm}"></earshot-effect>`));
  // A host page with a strict Content-Security-Policy (docs/embed.md lists what it must allow).
  writeFileSync(join(HOST, 'strict.html'), hostPage(`
<earshot-effect id="strict" effect="${f}open/lstm-12.nfx" clips="${f}open/mono-48k-i16.wav" reference="${refs.lstm}"></earshot-effect>`,
  `\n<meta http-equiv="Content-Security-Policy" content="default-src 'none'; script-src 'self' 'wasm-unsafe-eval'; worker-src 'self'; connect-src 'self' ${f}; style-src 'self'; img-src data:">`));
  // The copied folder itself on the second origin.
  writeFileSync(join(HOST, 'remote-kit.html'), hostPage(`
<earshot-effect id="remote" effect="${f}open/tcn-film.nfx" clips="${f}open/mono-48k-i16.wav" values="drive=0.35, tone=4.5" reference="${refs.tcn}"></earshot-effect>`,
  '', `${f}open/kit/embed.js`));
  // The comparison grid (attribute columns) beside a plain element.
  writeFileSync(join(HOST, 'grid.html'), hostPage(`
<earshot-effect id="grid" effect="${f}open/tcn-film.nfx" clips="${f}open/mono-48k-i16.wav ${f}open/stereo-44k-f32.wav"
  values="tone=4.5" columns="Soft: drive=0.2; drive=0.9, tone=2" reference="${refs.tcn}"></earshot-effect>
<earshot-effect id="plain" effect="${f}open/lstm-12.nfx" clips="${f}open/mono-48k-i16.wav" reference="${refs.lstm}"></earshot-effect>`));
  writeFileSync(join(HOST, 'grid-errors.html'), hostPage(Object.entries(BAD_COLUMNS).map(([id, [columns]]) =>
    `<earshot-effect id="${id}" effect="${f}open/tcn-film.nfx" clips="${f}open/mono-48k-i16.wav" columns="${columns}"></earshot-effect>`).join('\n')
    + `\n<earshot-effect id="grid-noclip" effect="${f}open/tcn-film.nfx" clips="${f}open/none.wav" columns="Hot: drive=0.9"></earshot-effect>`));
  browser = await launch();
});

// Bad `columns` values and the start of the error each must show (after "attribute columns: ").
const BAD_COLUMNS = {
  'bad-space': ['Soft drive=0.2', "'Soft drive=0.2' in column 1 is not NAME=NUMBER"],
  'bad-number': ['Soft: drive=loud', "'drive=loud' in column 1 is not NAME=NUMBER"],
  'bad-hex': ['drive=0.1; drive=0x1', "'drive=0x1' in column 2 is not NAME=NUMBER"],
  'bad-name': ['drive=0.5; Hot: fuzz=1', "'fuzz' in column 2 'Hot: fuzz=1': URL has no control named 'fuzz' (its controls: drive, tone)"],
  'bad-range': ['Hot: drive=3', "'drive=3' in column 1 'Hot: drive=3' is outside 0 … 1"],
  'bad-range-low': ['tone=-12.5', "'tone=-12.5' in column 1 'tone=-12.5' is outside -12 … 12"],
  'bad-empty': ['  ', 'it is empty'],
  'bad-label': [': drive=0.2', "column 1 ': drive=0.2' has nothing before ':'"],
  'bad-colons': ['A: drive=0.2: B', "column 1 'A: drive=0.2: B' has more than one ':'"],
  'bad-twice': ['drive=0.1, drive=0.2', "'drive' is set twice in column 1"],
  'bad-same': ['A: drive=0.1; a: drive=0.2', "column 2 is named 'a' as column 1 is"],
  'bad-dry': ['Dry: drive=0.1', "column 1 is named 'Dry' as the first column is"],
  'bad-many': [Array.from({ length: 9 }, (_, i) => `drive=0.${i}`).join(';'), '9 columns; at most 8'],
};

after(async () => {
  if (browser) await browser.close();
  if (host) host.stop();
  if (files) files.stop();
});

// Waits until every element named is 'ready' (rendered) or 'error' and its self-check ended.
async function settled(page, ids) {
  await page.waitForFunction((ids) => ids.every((id) => {
    const e = document.getElementById(id);
    return e && (e.state === 'error' || (e.state === 'ready' && e.checkResult));
  }), ids, { timeout: 60000 });
}

// Presses Tab from the host page's text until a button inside an element
// (with class `cls`, when given) has the focus: where, and how it is shown.
async function tabToButton(page, cls = null) {
  await page.locator('#host-text').click();
  for (let i = 0; i < 30; i++) {
    await page.keyboard.press('Tab');
    const focused = await page.evaluate((cls) => {
      const a = document.activeElement;
      const inner = a && a.shadowRoot && a.shadowRoot.activeElement;
      if (!inner || inner.tagName !== 'BUTTON' || (cls && !inner.classList.contains(cls))) return null;
      const cs = getComputedStyle(inner);
      const { row, column } = inner.parentElement.dataset;
      return { host: a.id, row, column, outline: cs.outlineStyle, width: cs.outlineWidth };
    }, cls);
    if (focused) return focused;
  }
  return null;
}

const prop = (page, id, name) => page.evaluate(([id, name]) => document.getElementById(id)[name], [id, name]);

test('two elements on a foreign page: shared AudioContext, self-checks pass, render equals earshot render, styles isolated', async () => {
  const { page, problems } = await openPage(browser.context, host.url);
  await settled(page, ['fx-a', 'fx-b']);
  for (const id of ['fx-a', 'fx-b']) {
    assert.equal(await prop(page, id, 'state'), 'ready', await prop(page, id, 'errorText'));
    const r = await prop(page, id, 'checkResult');
    assert.equal(r.pass, true, JSON.stringify(r));
    assert.equal(r.variant, 'simd');
    assert.equal(await page.locator(`#${id} .badge`).getAttribute('data-state'), 'pass');
  }
  assert.equal((await prop(page, 'fx-a', 'checkResult')).outputHash, refs.lstm);
  // One Worker renders and checks for both elements.
  assert.deepEqual(page.workers().map((w) => new URL(w.url()).pathname), ['/kit/js/offline-worker.js']);

  // Only the named control is shown; the other keeps its value from `values`.
  assert.equal(await page.locator('#fx-b input[type=range][data-control]').count(), 1);
  assert.equal(await page.locator('#fx-b input[type=range][data-control]').getAttribute('data-control'), 'drive');
  assert.deepEqual((await prop(page, 'fx-b', 'settings')).controls, { drive: 0.35, tone: 4.5 });
  assert.equal(await page.locator('#fx-b .title').textContent(), 'Tape model');

  // The rendered output hash equals the native render of the same clip and settings.
  const tcn = fixture('tcn-film.nfx');
  assert.equal(await prop(page, 'fx-b', 'outputHash'), nativeRenderHash(tcn, fixture('mono-48k-i16.wav'), { drive: 0.35, tone: 4.5 }, 'b1'));
  // The second clip (stereo, 44.1 kHz: resampled inside the core) ...
  const rendered = () => page.evaluate(() => new Promise((res) => document.getElementById('fx-b').addEventListener('earshot-rendered', (e) => res(e.detail.hash), { once: true })));
  let next = rendered();
  await page.locator('#fx-b select').selectOption({ label: 'stereo-44k-f32' });
  assert.equal(await next, nativeRenderHash(tcn, fixture('stereo-44k-f32.wav'), { drive: 0.35, tone: 4.5 }, 'b2'));
  // ... and a control typed from the keyboard.
  next = rendered();
  await page.locator('#fx-b input[type=number]').fill('0.8');
  await page.keyboard.press('Tab');
  assert.equal(await next, nativeRenderHash(tcn, fixture('stereo-44k-f32.wav'), { drive: 0.8, tone: 4.5 }, 'b3'));

  // No AudioContext before a gesture; then both play, in one shared context.
  assert.equal(await page.evaluate(() => customElements.get('earshot-effect').contextsCreated), 0);
  await page.locator('#fx-a button').click();
  await page.waitForFunction(() => document.getElementById('fx-a').playing);
  await page.locator('#fx-b button').click();
  await page.waitForFunction(() => document.getElementById('fx-b').playing);
  const shared = await page.evaluate(async () => {
    const E = customElements.get('earshot-effect');
    const a = document.getElementById('fx-a');
    const b = document.getElementById('fx-b');
    const t0 = E.audioContext.currentTime;
    await new Promise((r) => setTimeout(r, 300));
    return {
      created: E.contextsCreated, state: E.audioContext.state, advanced: E.audioContext.currentTime - t0,
      sameA: a.guard.context === E.audioContext, sameB: b.guard.context === E.audioContext,
      aPlaying: a.playing, bPlaying: b.playing,
    };
  });
  assert.deepEqual({ ...shared, advanced: shared.advanced > 0.1 },
    { created: 1, state: 'running', advanced: true, sameA: true, sameB: true, aPlaying: false, bPlaying: true });
  // The A/B switch by keyboard: arrow keys move between the two radio buttons.
  await page.locator('#fx-b input[value=processed]').focus();
  await page.keyboard.press('ArrowDown');
  assert.equal(await prop(page, 'fx-b', 'listeningTo'), 'original');
  await page.keyboard.press('ArrowUp');
  assert.equal(await prop(page, 'fx-b', 'listeningTo'), 'processed');
  await page.locator('#fx-b button').press('Enter');
  await page.waitForFunction(() => !document.getElementById('fx-b').playing);

  // Style isolation: the host's rules stay on the host's elements ...
  const styles = await page.evaluate(() => {
    const cs = (e) => getComputedStyle(e);
    const b = document.getElementById('fx-b').shadowRoot;
    const play = b.querySelector('button');
    const rect = play.getBoundingClientRect();
    return {
      hostText: [cs(document.getElementById('host-text')).color, cs(document.getElementById('host-text')).fontSize],
      hostButton: cs(document.getElementById('host-button')).display,
      hostAfterMargin: cs(document.getElementById('host-after')).marginTop,
      box: [cs(b.querySelector('.box')).color, cs(b.querySelector('.box')).fontSize],
      play: [cs(play).display, cs(play).color, cs(play).fontSize, rect.width > 0 && rect.height > 0],
      range: cs(b.querySelector('input[type=range]')).display,
      select: cs(b.querySelector('select')).display,
    };
  });
  assert.deepEqual(styles.hostText, ['rgb(255, 0, 0)', '40px']);
  assert.equal(styles.hostButton, 'none');
  assert.equal(styles.hostAfterMargin, '30px');
  // ... and none of them reach inside.
  assert.notEqual(styles.box[0], 'rgb(255, 0, 0)');
  assert.equal(styles.box[1], '15px');
  assert.notEqual(styles.play[0], 'none');
  assert.deepEqual([styles.play[2], styles.play[3]], ['15px', true]);
  assert.notEqual(styles.play[1], 'rgb(255, 0, 0)');
  assert.notEqual(styles.range, 'none');
  assert.notEqual(styles.select, 'none');

  // Keyboard and names: every control is focusable and named; focus is visible.
  const names = await page.evaluate(() => [...document.querySelectorAll('earshot-effect')].flatMap((host) =>
    [...host.shadowRoot.querySelectorAll('input, select, button, summary')].map((e) => ({
      tag: e.tagName, tab: e.tabIndex,
      named: !!((e.labels && e.labels.length) || e.getAttribute('aria-label') || e.textContent.trim() || e.closest('label')),
    }))));
  assert.ok(names.length >= 14, JSON.stringify(names));
  assert.deepEqual(names.filter((n) => n.tab < 0 || !n.named), []);
  const focused = await tabToButton(page);
  assert.deepEqual({ host: focused.host, outline: focused.outline, width: focused.width }, { host: 'fx-a', outline: 'solid', width: '3px' });

  // A phone: no sideways scroll, light and dark.
  await page.setViewportSize({ width: 390, height: 844 });
  mkdirSync(ARTIFACTS, { recursive: true });
  for (const scheme of ['light', 'dark']) {
    await page.emulateMedia({ colorScheme: scheme });
    const overflow = await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth);
    assert.ok(overflow <= 0, `${scheme}: the page is ${overflow} px wider than a 390 px screen`);
    await page.screenshot({ path: join(ARTIFACTS, `embed-phone-${scheme}.png`), fullPage: true });
  }
  const bg = await page.evaluate(() => getComputedStyle(document.getElementById('fx-a').shadowRoot.querySelector('.box')).backgroundColor);
  assert.equal(bg, 'rgb(26, 32, 41)'); // the dark panel colour of web/js/embed-style.js
  await page.close();
  assert.deepEqual(problems, []);
});

test('with the scalar build both elements still pass and render the same samples', async () => {
  const { page, problems } = await openPage(browser.context, `${host.url}?variant=scalar`);
  await settled(page, ['fx-a', 'fx-b']);
  for (const id of ['fx-a', 'fx-b']) {
    const r = await prop(page, id, 'checkResult');
    assert.equal(r.pass, true, JSON.stringify(r));
    assert.equal(r.variant, 'scalar');
  }
  assert.equal(await prop(page, 'fx-b', 'outputHash'),
    nativeRenderHash(fixture('tcn-film.nfx'), fixture('mono-48k-i16.wav'), { drive: 0.35, tone: 4.5 }, 's1'));
  await page.close();
  assert.deepEqual(problems, []);
});

test('errors are shown inside their element, naming the URL, and the other elements work', async () => {
  const { page, problems } = await openPage(browser.context, `${host.url}errors.html`);
  await settled(page, ['missing', 'notfx', 'nocors', 'badclip', 'badname', 'good']);
  const f = files.url;
  const err = async (id) => {
    assert.equal(await prop(page, id, 'state'), 'error', id);
    const shown = await page.locator(`#${id} .error`).textContent();
    assert.equal(shown, await prop(page, id, 'errorText'));
    assert.equal(await page.locator(`#${id} .error`).getAttribute('role'), 'alert');
    return shown;
  };
  assert.match(await err('missing'), new RegExp(`cannot load the effect file \\(${f}open/missing\\.nfx\\): HTTP 404`));
  assert.match(await err('notfx'), new RegExp(`^${f}open/notes\\.nfx is not an effect file earshot can use: effect file: `));
  const cors = await err('nocors');
  assert.ok(cors.includes(`${f}closed/tcn-film.nfx`), cors);
  assert.match(cors, /Access-Control-Allow-Origin/);
  assert.match(await err('badclip'), new RegExp(`Cannot render ${f}closed/nothing\\.wav: .*Access-Control-Allow-Origin`));
  assert.match(await err('badname'), /attribute controls: .*tcn-film\.nfx has no control named 'fuzz' \(its controls: drive, tone\)/);
  // The element whose clip failed still checks its effect; the good one works.
  await page.waitForFunction(() => document.getElementById('badclip').checkResult, null, { timeout: 60000 });
  assert.equal((await prop(page, 'badclip', 'checkResult')).pass, true);
  assert.equal(await prop(page, 'good', 'state'), 'ready');
  assert.equal((await prop(page, 'good', 'checkResult')).pass, true);
  await page.locator('#good button').click();
  await page.waitForFunction(() => document.getElementById('good').playing);
  await page.locator('#good button').click();
  // The only console messages are the browser's own reports of the refused requests.
  const expected = /missing\.nfx|closed\/tcn-film\.nfx|closed\/nothing\.wav|status of 404|CORS policy|net::ERR_FAILED/;
  assert.deepEqual(problems.filter((p) => !expected.test(p)), []);
  assert.ok(problems.length > 0, 'the refused requests should show in the console');
  await page.close();
});

test('playback passes the output guard: it starts quiet and its limiter holds -1 dBFS', async () => {
  const { page, problems } = await openPage(browser.context, host.url);
  await settled(page, ['fx-a']);
  // 'earshot-guard' in an OfflineAudioContext at 48 kHz, fed a stereo sine
  // of peak 2 (6 dB over full scale): at the default level, and at 0 dB.
  const run = (levelDb) => page.evaluate(async (levelDb) => {
    const ctx = new OfflineAudioContext(2, 48000, 48000);
    await ctx.audioWorklet.addModule('kit/worklet/processor.js');
    const osc = new OscillatorNode(ctx, { frequency: 440 });
    const amp = new GainNode(ctx, { gain: 2 });
    const opts = levelDb === null ? {} : { levelDb };
    const node = new AudioWorkletNode(ctx, 'earshot-guard', { outputChannelCount: [2], channelCount: 2, channelCountMode: 'explicit', processorOptions: opts });
    osc.connect(amp).connect(node).connect(ctx.destination);
    osc.start();
    const out = await ctx.startRendering();
    let peak = 0;
    for (let c = 0; c < 2; c++) for (const v of out.getChannelData(c)) peak = Math.max(peak, Math.abs(v));
    return peak;
  }, levelDb);
  const quiet = await run(null);
  const loud = await run(0);
  const ceiling = Math.pow(10, -1 / 20); // the limiter's ceiling, −1 dBFS (our choice; common practice, no source)
  // −30 dB of a peak of 2 is 0.0632 (20·log10: the definition of the decibel).
  assert.ok(Math.abs(quiet - 2 * Math.pow(10, -30 / 20)) < 1e-3, `at the default level the output peaks at ${quiet}`);
  assert.ok(loud <= ceiling * (1 + 1e-6), `at 0 dB the output peaks at ${loud} > ${ceiling}`);
  assert.ok(loud > 0.95 * ceiling, `the limiter should let a loud signal through near its ceiling, got ${loud}`);
  await page.close();
  assert.deepEqual(problems, []);
});

test('under a strict Content-Security-Policy (no inline style or script) the element is styled and works', async () => {
  const { page, problems } = await openPage(browser.context, `${host.url}strict.html`);
  await settled(page, ['strict']);
  assert.equal(await prop(page, 'strict', 'state'), 'ready', await prop(page, 'strict', 'errorText'));
  assert.equal((await prop(page, 'strict', 'checkResult')).pass, true);
  // The shadow root's constructed style sheet applies (the CSP allows no inline <style>).
  assert.equal(await page.evaluate(() => getComputedStyle(document.getElementById('strict').shadowRoot.querySelector('.box')).borderTopLeftRadius), '10px');
  await page.locator('#strict button').click();
  await page.waitForFunction(() => document.getElementById('strict').playing);
  await page.locator('#strict button').click();
  await page.close();
  assert.deepEqual(problems, []);
});

test('the copied folder on another origin (sent with Access-Control-Allow-Origin) works: Worker, worklet and builds', async () => {
  const { page, problems } = await openPage(browser.context, `${host.url}remote-kit.html`);
  await settled(page, ['remote']);
  assert.equal(await prop(page, 'remote', 'state'), 'ready', await prop(page, 'remote', 'errorText'));
  assert.equal((await prop(page, 'remote', 'checkResult')).pass, true);
  assert.equal(await prop(page, 'remote', 'outputHash'),
    nativeRenderHash(fixture('tcn-film.nfx'), fixture('mono-48k-i16.wav'), { drive: 0.35, tone: 4.5 }, 'r1'));
  // A Worker script must be same-origin: the element starts it from a blob: module.
  assert.deepEqual(page.workers().map((w) => w.url().slice(0, 5)), ['blob:']);
  await page.locator('#remote button').click();
  await page.waitForFunction(() => document.getElementById('remote').playing);
  await page.locator('#remote button').click();
  await page.close();
  assert.deepEqual(problems, []);
});

// ---------------------------------------------------------------- the comparison grid (attribute columns)

const GRID_CLIPS = ['mono-48k-i16', 'stereo-44k-f32'];
// The element's columns: Dry, then `values` (tone=4.5) under each column's own settings.
const GRID_COLUMNS = [
  { name: 'Dry', controls: null },
  { name: 'Soft', controls: { drive: 0.2, tone: 4.5 } },
  { name: 'drive=0.9, tone=2', controls: { drive: 0.9, tone: 2 } },
];
const gridCell = (r, k) => `#grid td[data-row="${r}"][data-column="${k}"]`;

// The hash each cell must have: the clip as SciPy reads it, or `earshot render` at the column's controls.
const nativeCells = (() => {
  let memo = null;
  return () => {
    if (!memo) {
      memo = GRID_CLIPS.map((clip, r) => GRID_COLUMNS.map((col, k) => (col.controls
        ? nativeRenderHash(fixture('tcn-film.nfx'), fixture(`${clip}.wav`), col.controls, `g${r}${k}`)
        : wavHash(fixture(`${clip}.wav`), { pcm16: true }))));
    }
    return memo;
  };
})();

async function gridReady(page, r, k) {
  await page.waitForSelector(`${gridCell(r, k)}[data-state=ready], ${gridCell(r, k)}[data-state=failed]`, { timeout: 90000 });
  return page.$eval(gridCell(r, k), (td) => ({ ...td.dataset, label: td.querySelector('button').getAttribute('aria-label') }));
}

// The row's timeline as the element's read-only gridPlayer shows it (js/grid-player.js).
const timeline = (page) => page.evaluate(() => {
  const E = customElements.get('earshot-effect');
  const g = document.getElementById('grid');
  const p = g.gridPlayer;
  const gains = {};
  for (const [k, v] of p.sources) gains[k] = v.gain.gain.value;
  return { playing: p.playing, row: p.row, column: p.column, start: p.start, rate: p.ctx.sampleRate, position: p.position(),
    starts: p.starts, gains, guarded: p.node === g.guard, shared: p.ctx === E.audioContext, created: E.contextsCreated };
});

function assertAligned(s, row, columns) {
  assert.equal(s.row, row);
  assert.deepEqual([...new Set(s.starts.map((x) => x.column))].sort(), columns);
  // Every source of the row plays sample i at start + i / rate, within half a sample (as grid.test.js).
  for (const st of s.starts)
    assert.ok(Math.abs(st.when - st.offset - s.start) < 0.5 / s.rate, `column ${st.column} is off the row's timeline: ${JSON.stringify(st)} start ${s.start}`);
}

test('a grid element (columns): every cell equals `earshot render` of its clip and settings, one timeline per row, through the guard', async () => {
  const native = nativeCells(); // before playing: the clips are 1.5 s and 2.5 s long
  const { page, problems } = await openPage(browser.context, `${host.url}grid.html`);
  await settled(page, ['grid', 'plain']);
  assert.equal(await prop(page, 'grid', 'state'), 'ready', await prop(page, 'grid', 'errorText'));
  assert.equal((await prop(page, 'grid', 'checkResult')).pass, true); // the self-check is as without columns
  const g = await prop(page, 'grid', 'grid');
  assert.deepEqual(g.columns.map((c) => ({ name: c.name, controls: c.controls })), GRID_COLUMNS);
  assert.deepEqual(g.rows.map((r) => r.cells.map((c) => c.state)), [['idle', 'idle', 'idle'], ['idle', 'idle', 'idle']]);
  assert.deepEqual(await page.locator('#grid thead th').allTextContents(), ['Clip', 'Dry', 'Softdrive=0.2', 'drive=0.9, tone=2']);
  assert.deepEqual(await page.locator('#grid tbody th').allTextContents(), GRID_CLIPS);
  // The player's parts give way to the grid; the level stays.
  for (const sel of ['#grid select', '#grid .controls', '#grid .ab', '#grid .row > button'])
    assert.equal(await page.locator(sel).first().isVisible(), false, sel);
  assert.equal(await page.locator('#grid .level input[type=range]').isVisible(), true);
  assert.equal(await prop(page, 'plain', 'gridPlayer'), null);
  assert.equal(await page.evaluate(() => customElements.get('earshot-effect').contextsCreated), 0);

  // The plain element plays; a cell of the grid pauses it. Row 0 starts with
  // one cell and the others join the timeline as the Worker computes them.
  await page.locator('#plain button').click();
  await page.waitForFunction(() => document.getElementById('plain').playing);
  const cells = [];
  await page.evaluate(() => {
    window.cellEvents = [];
    document.getElementById('grid').addEventListener('earshot-cell', (e) => window.cellEvents.push(e.detail));
  });
  await page.locator(`${gridCell(0, 1)} button`).click();
  for (let k = 0; k < 3; k++) cells.push(await gridReady(page, 0, k));
  await page.waitForSelector(`${gridCell(0, 1)}[data-playing=true]`);
  assert.equal(await prop(page, 'plain', 'playing'), false);
  let s = await timeline(page);
  assert.deepEqual({ playing: s.playing, column: s.column, guarded: s.guarded, shared: s.shared, created: s.created },
    { playing: true, column: 1, guarded: true, shared: true, created: 1 });
  assertAligned(s, 0, [0, 1, 2]);
  // Row 1: its cells are computed when one is played.
  await page.locator(`${gridCell(1, 2)} button`).click();
  for (let k = 0; k < 3; k++) cells.push(await gridReady(page, 1, k));
  await page.waitForSelector(`${gridCell(1, 2)}[data-playing=true]`);
  await page.waitForTimeout(250);
  const before = (await timeline(page)).position;
  await page.locator(`${gridCell(1, 0)} button`).click();
  await page.locator(`${gridCell(1, 1)} button`).click();
  await page.waitForTimeout(50); // the 5 ms switch ramp has ended
  s = await timeline(page);
  assert.equal(s.playing, true);
  assert.equal(s.column, 1);
  assert.ok(s.position >= before && s.position < before + 2, `the position went from ${before} to ${s.position} on switching`);
  assertAligned(s, 1, [0, 1, 2]);
  // After the switch ramp only the chosen column is heard (gain 1, the others 0; float32 AudioParam values).
  for (const [k, v] of Object.entries(s.gains)) assert.ok(Math.abs(v - (k === '1' ? 1 : 0)) < 1e-6, `column ${k} gain ${v}`);
  assert.equal(Object.keys(s.gains).length, 3);
  // The playing cell's accessible name and tooltip.
  const playingLabel = `stereo-44k-f32, Soft (drive=0.2): playing; output hash ${native[1][1]}`;
  assert.equal(await page.locator(`${gridCell(1, 1)} button`).getAttribute('aria-label'), playingLabel);
  assert.equal(await page.locator(`${gridCell(1, 1)} button`).getAttribute('title'), playingLabel);

  // Every cell's samples: the Worker's hash equals the native one.
  const got = await prop(page, 'grid', 'grid');
  GRID_CLIPS.forEach((clip, r) => GRID_COLUMNS.forEach((col, k) => {
    const d = cells[3 * r + k];
    assert.equal(d.state, 'ready', d.label);
    assert.equal(d.hash, native[r][k], `${clip} × ${col.name}`);
    assert.equal(got.rows[r].cells[k].hash, native[r][k]);
    // The accessible name (and tooltip) says clip, column, state and hash.
    assert.ok(d.label.startsWith(`${clip}, ${k === 0 ? 'Dry' : col.name}`), d.label);
    assert.match(d.label, /: (ready|playing);/);
    assert.ok(d.label.endsWith(`${k === 0 ? 'samples' : 'output'} hash ${native[r][k]}`), d.label);
  }));
  // The events carry the settings of each computed cell: one per cell, none twice.
  const events = await page.evaluate(() => window.cellEvents);
  assert.equal(events.length, 6);
  for (const e of events) assert.equal(e.hash, native[e.row][e.column]);
  assert.deepEqual(events.find((e) => e.row === 1 && e.column === 1).controls, { drive: 0.2, tone: 4.5 });

  // Stop by pressing the playing cell (unless the row has ended meanwhile).
  await page.locator(`${gridCell(1, 1)} button`).click();
  if (await prop(page, 'grid', 'playing')) await page.locator(`${gridCell(1, 1)} button`).click();
  await page.waitForFunction(() => !document.getElementById('grid').playing);
  assert.equal(await page.getAttribute(gridCell(1, 1), 'data-playing'), 'false');
  await page.close();
  assert.deepEqual(problems, []);
});

test('a grid element from the keyboard: one tab stop, arrows move, Space and Enter play and stop, focus visible', async () => {
  const { page, problems } = await openPage(browser.context, `${host.url}grid.html`);
  await settled(page, ['grid']);
  assert.equal(await page.locator('#grid table[role=grid] button[tabindex="0"]').count(), 1);
  const focused = await tabToButton(page, 'cell');
  assert.deepEqual(focused, { host: 'grid', row: '0', column: '0', outline: 'solid', width: '3px' });
  const at = () => page.evaluate(() => {
    const inner = document.getElementById('grid').shadowRoot.activeElement;
    return inner ? `${inner.parentElement.dataset.row}.${inner.parentElement.dataset.column}` : null;
  });
  const moves = [['ArrowRight', '0.1'], ['ArrowDown', '1.1'], ['End', '1.2'], ['ArrowRight', '1.2'], ['Home', '1.0'], ['ArrowUp', '0.0'], ['ArrowLeft', '0.0'], ['ArrowDown', '1.0'], ['ArrowDown', '1.0']];
  for (const [key, want] of moves) {
    await page.keyboard.press(key);
    assert.equal(await at(), want, `after ${key}`);
    assert.equal(await page.locator('#grid table button[tabindex="0"]').count(), 1);
  }
  // Space computes and plays the Dry cell of row 1; Space again stops it.
  await page.keyboard.press('Space');
  await page.waitForSelector(`${gridCell(1, 0)}[data-playing=true]`, { timeout: 90000 });
  assert.equal(await page.locator(`${gridCell(1, 0)} button`).getAttribute('aria-pressed'), 'true');
  await page.keyboard.press('Space');
  await page.waitForSelector(`${gridCell(1, 0)}[data-playing=false]`);
  assert.equal(await prop(page, 'grid', 'playing'), false);
  // Enter plays again; a move and Enter switch within the row on the same timeline.
  await gridReady(page, 1, 2);
  await page.keyboard.press('Enter');
  await page.waitForSelector(`${gridCell(1, 0)}[data-playing=true]`);
  const start = (await timeline(page)).start;
  await page.keyboard.press('End');
  await page.keyboard.press('Enter');
  await page.waitForSelector(`${gridCell(1, 2)}[data-playing=true]`);
  const s = await timeline(page);
  assert.equal(s.start, start);
  assertAligned(s, 1, [0, 1, 2]);
  await page.keyboard.press('Enter');
  await page.waitForSelector(`${gridCell(1, 2)}[data-playing=false]`);
  await page.close();
  assert.deepEqual(problems, []);
});

test('bad `columns` values are shown inside their element, naming the attribute and the token', async () => {
  const { page, problems } = await openPage(browser.context, `${host.url}grid-errors.html`);
  const ids = Object.keys(BAD_COLUMNS);
  await settled(page, ids);
  const url = `${files.url}open/tcn-film.nfx`;
  for (const [id, [, want]] of Object.entries(BAD_COLUMNS)) {
    assert.equal(await prop(page, id, 'state'), 'error', id);
    const shown = await page.locator(`#${id} .error`).textContent();
    assert.equal(shown, await prop(page, id, 'errorText'));
    assert.ok(shown.startsWith(`attribute columns: ${want.replace('URL', url)}`), `${id}: ${shown}`);
    assert.equal(await prop(page, id, 'gridPlayer'), null);
  }
  // A clip that cannot be read: the cell says so, and so does the element, naming the URL.
  await settled(page, ['grid-noclip']);
  await page.locator('#grid-noclip td[data-row="0"][data-column="1"] button').click();
  await page.waitForSelector('#grid-noclip td[data-column="1"][data-state=failed]', { timeout: 60000 });
  const label = await page.locator('#grid-noclip td[data-column="1"] button').getAttribute('aria-label');
  assert.match(label, /^none, Hot \(drive=0\.9\): failed: cannot load the clip \(.*none\.wav\): HTTP 404/);
  assert.equal(await page.getAttribute('#grid-noclip td[data-column="0"]', 'data-state'), 'failed');
  assert.match(await page.locator('#grid-noclip .error').textContent(), new RegExp(`^Cannot render ${files.url}open/none\\.wav: `));
  assert.equal(await prop(page, 'grid-noclip', 'playing'), false);
  await page.close();
  // The only console message is the browser's report of the missing clip.
  assert.deepEqual(problems.filter((p) => !/none\.wav|status of 404/.test(p)), []);
  assert.ok(problems.length > 0, 'the missing clip should show in the console');
});

test('a grid element fits a 390 px screen; without `columns` it is the player again, and back', async () => {
  const { page, problems } = await openPage(browser.context, `${host.url}grid.html?variant=scalar`);
  await page.setViewportSize({ width: 390, height: 844 });
  await settled(page, ['grid']);
  const overflow = async (when) => {
    const o = await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth);
    assert.ok(o <= 0, `${when}: the page is ${o} px wider than a 390 px screen`);
  };
  await overflow('loaded');
  await page.locator(`${gridCell(1, 2)} button`).click();
  await overflow('computing');
  const native = nativeCells();
  // The scalar build gives the same samples.
  for (let k = 0; k < 3; k++) assert.equal((await gridReady(page, 1, k)).hash, native[1][k], `scalar, column ${k}`);
  await page.waitForSelector(`${gridCell(1, 2)}[data-playing=true]`);
  mkdirSync(ARTIFACTS, { recursive: true });
  for (const scheme of ['light', 'dark']) {
    await page.emulateMedia({ colorScheme: scheme });
    await overflow(`playing, ${scheme}`);
    await page.locator('#grid').screenshot({ path: join(ARTIFACTS, `embed-grid-phone-${scheme}.png`) });
  }
  await page.locator(`${gridCell(1, 2)} button`).click();
  await overflow('stopped');

  // Without the attribute: the player, rendering at `values`.
  const rendered = () => page.evaluate(() => new Promise((res) => document.getElementById('grid').addEventListener('earshot-rendered', (e) => res(e.detail.hash), { once: true })));
  let next = rendered();
  await page.evaluate(() => document.getElementById('grid').removeAttribute('columns'));
  assert.equal(await next, nativeRenderHash(fixture('tcn-film.nfx'), fixture('mono-48k-i16.wav'), { drive: 0.5, tone: 4.5 }, 'g-plain'));
  assert.equal(await prop(page, 'grid', 'grid'), null);
  assert.equal(await page.locator('#grid table').count(), 0);
  assert.equal(await page.locator('#grid .row > button').isVisible(), true);
  assert.equal(await page.locator('#grid select').isVisible(), true);
  // And with it again: the grid, its cells computed anew.
  await page.evaluate(() => document.getElementById('grid').setAttribute('columns', 'Hot: drive=0.9, tone=2'));
  await page.waitForFunction(() => { const g = document.getElementById('grid').grid; return g && g.columns.length === 2; });
  assert.equal(await page.locator('#grid .row > button').isVisible(), false);
  await page.locator(`${gridCell(0, 1)} button`).click();
  assert.equal((await gridReady(page, 0, 1)).hash, native[0][2]);
  await page.locator(`${gridCell(0, 1)} button`).click();
  await overflow('grid again');
  await page.close();
  assert.deepEqual(problems, []);
});
