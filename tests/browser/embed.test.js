// <earshot-effect> (web/embed.js) on a plain page that `earshot site` did not
// build, with the effects and clips on a second origin: two elements share
// one AudioContext, both pass their self-check, a render is bit-identical to
// `earshot render`, the host page's aggressive CSS and the element's styles
// do not reach each other, the element works from the keyboard and fits a
// 390 px screen, and a missing file, a file that is not an effect and a
// refused cross-origin read are each shown in their element, naming the URL.
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
// a WAV's samples, channel after channel, the WAV read by SciPy.
function wavHash(path) {
  const code = `
import sys, numpy as np, scipy.io.wavfile as w
r, x = w.read(sys.argv[1])
assert x.dtype == np.float32, x.dtype
x = x.reshape(len(x), -1)
h = 0xcbf29ce484222325
for c in range(x.shape[1]):
    for b in np.ascontiguousarray(x[:, c]).astype('<f4').tobytes():
        h = ((h ^ b) * 0x100000001b3) & 0xffffffffffffffff
print('%016x' % h)
`;
  return mustRun(PYTHON, ['-c', code, path]).stdout.trim();
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
  browser = await launch();
});

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
  await page.locator('#host-text').click();
  let focused = null;
  for (let i = 0; i < 30 && !focused; i++) {
    await page.keyboard.press('Tab');
    focused = await page.evaluate(() => {
      const a = document.activeElement;
      const inner = a && a.shadowRoot && a.shadowRoot.activeElement;
      return inner && inner.tagName === 'BUTTON' ? { host: a.id, outline: getComputedStyle(inner).outlineStyle, width: getComputedStyle(inner).outlineWidth } : null;
    });
  }
  assert.deepEqual(focused, { host: 'fx-a', outline: 'solid', width: '3px' });

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
