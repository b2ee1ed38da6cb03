// The listening page in headless Chromium: a MUSHRA set and an ABX set run
// start to finish (familiarisation, trials, a reload that resumes), the
// results are downloaded and tallied by `earshot tally`; the stimulus hashes
// are checked against the native tool's loudness matching and anchors,
// hashed by a separate FNV-1a implementation in Python.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { cpSync, existsSync, readFileSync, writeFileSync, mkdirSync, rmSync } from 'node:fs';
import https from 'node:https';
import { join } from 'node:path';
import { ARTIFACTS, REPO, PYTHON, WORK, buildSite, serve, launch, openPage, download, earshotBin, mustRun, run } from './helpers.js';
import { parseConfig } from '../../web/js/listen-config.js';
import { plan, familiarisationPlan, familiarisationSeed } from '../../web/js/listen-order.js';

const TARGET = -23;
let built;
let server;
let browser;
let bin;
let config;

// The listening test definition and its clip, written into the folder of the
// site config (paths in it are relative to that folder).
function writeDefinition(out) {
  mkdirSync(join(out, 'listen-clips'), { recursive: true });
  // A 1.5 s plucked-like tone with harmonics, 48 kHz mono float32 (our own signal).
  mustRun(PYTHON, ['-c', `
import numpy as np, scipy.io.wavfile as w, sys
r = 48000; t = np.arange(int(1.5 * r)) / r
x = sum(np.sin(2 * np.pi * 196 * k * t) / k for k in range(1, 30)) * np.exp(-2 * t) * 0.3
w.write(sys.argv[1], r, x.astype(np.float32))
`, join(out, 'listen-clips', 'tone.wav')]);
  const config = {
    format: 'earshot-listening-tests',
    version: 1,
    title: 'Browser test',
    tests: [
      {
        id: 'm-test', type: 'mushra', title: 'MUSHRA <b>test</b>', target_lufs: TARGET,
        conditions: [{ id: 'reference', role: 'reference' }, { id: 'lstm' }],
        items: [{ id: 'tone', stimuli: { reference: { file: 'listen-clips/tone.wav' }, lstm: { effect: 'lstm', clip: 'listen-clips/tone.wav' } } }],
      },
      // Ids no participant may see: the page shows item titles ("Item N" without
      // one) and numbered sounds; the condition names are for the tally only.
      {
        id: 'f-test', type: 'mushra', target_lufs: TARGET, anchors: false,
        conditions: [{ id: 'cond-ref-k2', role: 'reference', name: 'Circuit K2' }, { id: 'cond-net-m5', name: 'Network M5' }, { id: 'cond-plain-q7' }],
        items: [
          { id: 'itm-tone-x7', title: 'Plucked tone', stimuli: { 'cond-ref-k2': { file: 'listen-clips/tone.wav' }, 'cond-net-m5': { effect: 'lstm', clip: 'listen-clips/tone.wav' }, 'cond-plain-q7': { file: 'listen-clips/tone.wav' } } },
          { id: 'itm-other-q3', stimuli: { 'cond-ref-k2': { file: 'listen-clips/tone.wav' }, 'cond-net-m5': { effect: 'lstm', clip: 'listen-clips/tone.wav' }, 'cond-plain-q7': { file: 'listen-clips/tone.wav' } } },
        ],
      },
      {
        id: 'x-test', type: 'abx', target_lufs: TARGET, trials: 2, familiarisation: false,
        conditions: [{ id: 'reference', role: 'reference' }, { id: 'lstm' }],
        pairs: [['reference', 'lstm']],
        items: [{ id: 'tone', stimuli: { reference: { file: 'listen-clips/tone.wav' }, lstm: { effect: 'lstm', clip: 'listen-clips/tone.wav' } } }],
      },
      {
        id: 'p-test', type: 'ab', target_lufs: TARGET, repeats: 3, no_preference: true, familiarisation: false,
        post: 'https://results.example.org/earshot',
        conditions: [{ id: 'reference', role: 'reference' }, { id: 'lstm' }],
        pairs: [['reference', 'lstm']],
        items: [{ id: 'tone', stimuli: { reference: { file: 'listen-clips/tone.wav' }, lstm: { effect: 'lstm', clip: 'listen-clips/tone.wav' } } }],
      },
    ],
  };
  writeFileSync(join(out, 'listening.json'), JSON.stringify(config, null, 1));
  return config;
}

before(async () => {
  const p = join(REPO, 'build/native/earshot');
  // The tally must run: a missing binary is a failure, not a skip.
  assert.ok(existsSync(p) || process.env.EARSHOT_BIN, `no ${p}: build it first (cmake --preset native && cmake --build --preset native --target earshot)`);
  bin = earshotBin();
  // The definition and its clip go beside the site config; `earshot site`
  // copies them (the clip to listening/tone.wav).
  writeDefinition(join(WORK, 'listen-test'));
  built = buildSite('listen-test', { listening: 'listening.json' });
  config = parseConfig(JSON.parse(readFileSync(join(built.out, 'listening.json'), 'utf8')));
  server = await serve(built.out);
  browser = await launch({ extraArgs: ['--autoplay-policy=no-user-gesture-required'] });
});

after(async () => {
  if (browser) await browser.close();
  if (server) server.stop();
});

// Every request the page makes goes to the test server: nothing else leaves the browser.
function outsideRequests(page) {
  const urls = [];
  page.on('request', (r) => { if (!r.url().startsWith(server.url) && !r.url().startsWith('blob:')) urls.push(r.url()); });
  return urls;
}

async function step(page, name) {
  await page.waitForSelector(`body[data-step="${name}"]`, { timeout: 90000 });
}

// The keys (data-key) of the sound buttons shown as playing.
function pressed(page) {
  return page.evaluate(() => [...document.querySelectorAll('.cue[aria-pressed=true]')].map((b) => b.dataset.key));
}

async function rateAll(page, score) {
  const n = await page.locator('#trial-body input[type=range]').count();
  for (let i = 0; i < n; i++) {
    await page.locator(`#score-${i}`).evaluate((s, v) => {
      s.value = String(v);
      s.dispatchEvent(new Event('input', { bubbles: true }));
    }, score(i));
  }
  return n;
}

// FNV-1a 64 over float32 little-endian bytes (offset basis and prime from the
// FNV reference, draft-eastlake-fnv; recalled from memory), in Python.
function pyHash(wav) {
  const r = mustRun(PYTHON, ['-c', `
import sys, numpy as np, scipy.io.wavfile as w
_, x = w.read(sys.argv[1]); h = 0xcbf29ce484222325
for b in np.ascontiguousarray(x, dtype='<f4').tobytes():
    h = ((h ^ b) * 0x100000001b3) & 0xffffffffffffffff
print("fnv1a64-float32le:%016x" % h)
`, wav]);
  return r.stdout.trim();
}

function tallyCsv(file, tag) {
  const csv = join(WORK, 'listen-test', `${tag}.csv`);
  const r = run(bin, ['tally', file, '--csv', csv, '--force']);
  assert.equal(r.status, 0, `earshot tally failed:\n${r.stdout}\n${r.stderr}`);
  const [head, ...rows] = readFileSync(csv, 'utf8').trim().split('\n').map((l) => l.split(','));
  return { text: r.stdout, rows: rows.map((r) => Object.fromEntries(head.map((h, i) => [h, r[i]]))) };
}

test('a MUSHRA set runs through, resumes after a reload, and its results tally', async () => {
  const { page, problems } = await openPage(browser.context, `${server.url}listen.html?test=m-test`);
  const outside = outsideRequests(page);
  await step(page, 'intro');
  // Config text is text; the CSP has no inline script.
  assert.equal(await page.textContent('#listen-title'), 'MUSHRA <b>test</b>');
  assert.equal(await page.locator('script:not([src])').count(), 0);
  assert.equal(await page.getAttribute('body', 'data-stimuli'), '4'); // reference, lstm, two anchors
  await page.click('#start');
  await step(page, 'familiar');
  await page.click('#familiar-list .cue >> nth=0');
  await page.click('#familiar-done');
  await step(page, 'trial');
  // Reloading in the trial comes back to the same trial with the same seed.
  const seed = await page.getAttribute('body', 'data-seed');
  await page.reload();
  await step(page, 'trial');
  assert.equal(await page.getAttribute('body', 'data-seed'), seed);
  // Four stimuli (BS.1534-3: at most 12) and the five scale words.
  assert.equal(await page.textContent('.bands'), 'BadPoorFairGoodExcellent');
  await page.click('#trial-body .cue >> nth=0');
  await page.click('#trial-body .cue >> nth=2');
  assert.equal(await page.isDisabled('#trial-next'), true);
  // The order the page shows follows from the seed alone: the hidden
  // reference gets 100, the mid anchor 60, the others 20 and 35, so the
  // BS.1534-3 post-screening keeps this assessor.
  const order = plan(config.tests[0], Number(seed))[0].order;
  const want = { reference: 100, lp7000: 60, lp3500: 20, lstm: 35 };
  const n = await rateAll(page, (i) => want[order[i]]);
  assert.equal(n, 4);
  // Every control is labelled; nothing is wider than a phone screen.
  const unlabelled = await page.evaluate(() => [...document.querySelectorAll('input, button')]
    .filter((e) => !(e.labels && e.labels.length) && !e.getAttribute('aria-label') && !(e.tagName === 'BUTTON' && e.textContent.trim()))
    .map((e) => e.id || e.outerHTML.slice(0, 60)));
  assert.deepEqual(unlabelled, []);
  mkdirSync(ARTIFACTS, { recursive: true });
  await page.screenshot({ path: join(ARTIFACTS, 'listen-mushra-desktop.png'), fullPage: true });
  await page.setViewportSize({ width: 390, height: 844 });
  const overflow = await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth);
  assert.ok(overflow <= 0, `the trial is ${overflow} px wider than a 390 px screen`);
  await page.screenshot({ path: join(ARTIFACTS, 'listen-mushra-phone.png'), fullPage: true });
  await page.setViewportSize({ width: 1280, height: 900 });
  assert.equal(await page.isDisabled('#trial-next'), false);
  await page.click('#trial-next');
  await step(page, 'done');
  const file = await download(page, '#download', 'listen-mushra.json');
  const res = JSON.parse(readFileSync(file, 'utf8'));
  assert.equal(res.format, 'earshot-listening-results');
  assert.equal(res.participant.seed, Number(seed));
  assert.deepEqual(res.conditions.map((c) => c.role), ['reference', 'test', 'anchor-low', 'anchor-mid']);
  assert.deepEqual(res.trials[0].order, order);
  assert.deepEqual(res.trials[0].ratings, want);

  // The reference and low anchor as played equal the native tool's matching
  // (earshot anchors, earshot loudness --match), hashed in Python.
  const dir = join(WORK, 'listen-test', 'native');
  rmSync(dir, { recursive: true, force: true });
  mkdirSync(dir, { recursive: true });
  const clip = join(built.out, 'listening', 'tone.wav');
  mustRun(bin, ['anchors', clip, '--out', dir]);
  mustRun(bin, ['loudness', clip, '--match', String(TARGET), '--out', join(dir, 'ref.wav')]);
  mustRun(bin, ['loudness', join(dir, 'tone-lp3500.wav'), '--match', String(TARGET), '--out', join(dir, 'lp.wav')]);
  const hash = (c) => res.stimuli.find((s) => s.condition === c).hash;
  assert.equal(hash('reference'), pyHash(join(dir, 'ref.wav')));
  assert.equal(hash('lp3500'), pyHash(join(dir, 'lp.wav')));
  // The effect rendered in the browser equals `earshot render` (latency trimmed, same length).
  mustRun(bin, ['render', join(built.out, 'effects', 'lstm.nfx'), clip, join(dir, 'lstm.wav')]);
  mustRun(bin, ['loudness', join(dir, 'lstm.wav'), '--match', String(TARGET), '--out', join(dir, 'lstm-m.wav')]);
  assert.equal(hash('lstm'), pyHash(join(dir, 'lstm-m.wav')));

  const t = tallyCsv(file, 'mushra');
  assert.match(t.text, /1 of 1 assessors kept/);
  const all = t.rows.filter((r) => r.scope === 'all');
  assert.deepEqual(all.map((r) => r.condition), ['reference', 'lstm', 'lp3500', 'lp7000']);
  assert.deepEqual(outside, []);
  for (const r of all) {
    assert.equal(r.n, '1');
    assert.equal(Number(r.mean), want[r.condition]);
  }
  await page.close();
  assert.deepEqual(problems, []);
});

test('an ABX set runs through, resumes after a reload, and its results tally', async () => {
  const { page, problems } = await openPage(browser.context, `${server.url}listen.html?test=x-test`);
  await step(page, 'intro');
  await page.click('#start');
  await step(page, 'trial');
  assert.equal(await page.textContent('#trial-count'), 'Trial 1 of 2');
  await page.click('#trial-body .cue >> nth=2'); // X
  // Keys: letters play A, B and X; digits answer in the order shown; the list is visible.
  assert.match(await page.textContent('#trial-keys'), /play A, B, X.*answer “X is A”.*answer “X is B”/);
  await page.keyboard.press('b');
  assert.deepEqual(await pressed(page), ['b']);
  await page.keyboard.press('x');
  assert.deepEqual(await pressed(page), ['x']);
  await page.keyboard.press('2');
  assert.equal(await page.isChecked('#answer-b'), true);
  assert.equal(await page.isDisabled('#trial-next'), false);
  // The digit left the focus on the choice, which keeps its arrows: the native move to the other choice.
  await page.keyboard.press('ArrowUp');
  assert.equal(await page.isChecked('#answer-a'), true);
  assert.deepEqual(await pressed(page), ['x']);
  await page.check('#answer-a');
  await page.click('#trial-next');
  await page.waitForSelector('body[data-trial="1"]');
  await page.reload();
  await step(page, 'trial');
  assert.equal(await page.textContent('#trial-count'), 'Trial 2 of 2');
  await page.check('#answer-b');
  await page.click('#trial-next');
  await step(page, 'done');
  const file = await download(page, '#download', 'listen-abx.json');
  const res = JSON.parse(readFileSync(file, 'utf8'));
  assert.equal(res.trials.length, 2);
  assert.deepEqual(res.trials.map((x) => x.answer), ['a', 'b']);
  const correct = res.trials.filter((x) => x.answer === x.x).length;
  const t = tallyCsv(file, 'abx');
  const pooled = t.rows.find((r) => r.participant === '');
  assert.equal(pooled.trials, '2');
  assert.equal(Number(pooled.correct), correct);
  // One-tailed exact binomial P(X >= correct), X ~ Binomial(2, 1/2): 1, 3/4, 1/4.
  assert.ok(Math.abs(Number(pooled.p_one_tailed) - [1, 0.75, 0.25][correct]) < 1e-9);
  await page.close();
  assert.deepEqual(problems, []);
});

test('an A/B preference set with "no preference" runs through and its counts tally', async () => {
  // The https results address, answered here: the page must POST the same JSON it offers for download.
  const posted = [];
  const page = await browser.context.newPage();
  const problems = [];
  page.on('pageerror', (e) => problems.push(`page error: ${e.message}`));
  await page.route('https://results.example.org/**', (r) => {
    posted.push({ method: r.request().method(), type: r.request().headers()['content-type'], body: r.request().postData() });
    return r.fulfill({ status: 200, headers: { 'Access-Control-Allow-Origin': '*', 'Access-Control-Allow-Headers': 'content-type' }, body: 'ok' });
  });
  await page.goto(`${server.url}listen.html?test=p-test`);
  await step(page, 'intro');
  await page.click('#start');
  const given = ['a', 'none', 'b'];
  for (let k = 0; k < 3; k++) {
    await page.waitForSelector(`body[data-step="trial"][data-trial="${k}"]`);
    await page.click('#trial-body .cue >> nth=1');
    if (k === 0) {
      // Keys: 3 is "No preference" (offered here); there is no X to play in A/B.
      await page.keyboard.press('3');
      assert.equal(await page.isChecked('#answer-none'), true);
      await page.keyboard.press('x');
      assert.deepEqual(await pressed(page), ['b']);
      await page.keyboard.press('a');
      assert.deepEqual(await pressed(page), ['a']);
    }
    await page.check(`#answer-${given[k]}`);
    await page.click('#trial-next');
  }
  await step(page, 'done');
  const file = await download(page, '#download', 'listen-ab.json');
  const res = JSON.parse(readFileSync(file, 'utf8'));
  assert.deepEqual(res.trials.map((x) => x.answer), given);
  await page.waitForSelector('#post-status[data-kind=ok]');
  const sent = posted.filter((p) => p.method === 'POST');
  assert.equal(sent.length, 1);
  assert.equal(sent[0].type, 'application/json');
  assert.equal(sent[0].body, readFileSync(file, 'utf8'));
  // Preferences per condition, from the answers as presented (a/b swap per trial).
  const prefer = { reference: 0, lstm: 0 };
  for (const x of res.trials) if (x.answer !== 'none') prefer[x[x.answer]]++;
  const row = tallyCsv(file, 'ab').rows[0];
  assert.deepEqual([row.pair_a, row.pair_b], ['reference', 'lstm']);
  assert.equal(Number(row.prefer_a), prefer.reference);
  assert.equal(Number(row.prefer_b), prefer.lstm);
  assert.equal(row.no_preference, '1');
  // Two preferences split 1:1 or 2:0; two-sided exact binomial p = 1 or 0.5 (2 * (1/2)^2).
  assert.equal(Number(row.p_two_sided), prefer.reference === 1 ? 1 : 0.5);
  await page.close();
  assert.deepEqual(problems, []);
});

test('a bad listening.json is refused with a message naming the field', async () => {
  const page = await browser.context.newPage();
  const bad = structuredClone(JSON.parse(readFileSync(join(built.out, 'listening.json'), 'utf8')));
  bad.tests[0].target_lufs = 3;
  await page.route('**/listening.json', (r) => r.fulfill({ contentType: 'application/json', body: JSON.stringify(bad) }));
  await page.goto(`${server.url}listen.html`);
  await step(page, 'error');
  assert.equal(await page.textContent('#listen-error'), 'listening.json: tests[0].target_lufs: must be a number from -70 to 0 (LKFS), got 3');
  bad.tests[0].target_lufs = -23;
  bad.tests[0].conditions = Array.from({ length: 11 }, (_, i) => ({ id: i ? `c${i}` : 'reference', role: i ? 'test' : 'reference' }));
  await page.reload();
  await step(page, 'error');
  assert.match(await page.textContent('#listen-error'), /13 stimuli per trial \(anchors included\) is over the 12 of ITU-R BS\.1534-3/);
  await page.close();
});

test('the demo page links to the listening page the builder wrote', async () => {
  const { page, problems } = await openPage(browser.context, `${server.url}index.html`);
  const link = page.locator('#listening-link');
  await link.waitFor({ timeout: 30000 });
  assert.equal(await link.getAttribute('href'), 'listen.html');
  assert.equal(await link.textContent(), 'Listening tests');
  // Let the demo page finish loading first: leaving it earlier aborts its
  // module requests, which is not a fault of either page.
  await page.waitForLoadState('networkidle');
  assert.deepEqual(problems, []);
  // The sets above finished the first test in this browser profile, and the
  // listening page resumes saved progress (at its end screen); a newcomer
  // following the link has none, so it is cleared here.
  await page.evaluate(() => localStorage.clear());
  await link.click();
  await page.waitForURL(/listen\.html$/);
  // Any screen past the loading one (so a wrong screen fails at once, with the page's text).
  await page.waitForSelector('body:not([data-step="start"]):not([data-step="loading"])', { timeout: 90000 });
  assert.equal(await page.getAttribute('body', 'data-step'), 'intro', await page.textContent('body'));
  await page.close();
});

// WCAG 2.1 (W3C Recommendation, 2018), "relative luminance" and "contrast
// ratio"; colours as the browser computes them ("rgb(r, g, b)").
function contrastOf(a, b) {
  const lum = (css) => {
    const [r, g, bl] = css.match(/\d+(\.\d+)?/g).slice(0, 3).map((v) => Number(v) / 255)
      .map((c) => (c <= 0.03928 ? c / 12.92 : ((c + 0.055) / 1.055) ** 2.4));
    return 0.2126 * r + 0.7152 * g + 0.0722 * bl;
  };
  const [hi, lo] = [lum(a), lum(b)].sort((x, y) => y - x);
  return (hi + 0.05) / (lo + 0.05);
}

test('the listening page follows the dark theme and keeps its contrast, the playing sound included', async () => {
  const { page, problems } = await openPage(browser.context, 'about:blank');
  await page.emulateMedia({ colorScheme: 'dark' });
  await page.goto(`${server.url}listen.html`);
  await page.waitForSelector('body:not([data-step="start"]):not([data-step="loading"])', { timeout: 90000 });
  const c = await page.evaluate(() => {
    const cs = (e) => getComputedStyle(e);
    const panel = document.querySelector('main .panel:not([hidden])');
    // The look of the sound that is playing (listen.css), on a probe button.
    const cue = document.createElement('button');
    cue.className = 'cue';
    cue.setAttribute('aria-pressed', 'true');
    cue.textContent = 'Sound 1';
    panel.appendChild(cue);
    const out = { body: cs(document.body).backgroundColor, ink: cs(document.body).color, panel: cs(panel).backgroundColor,
      cueBg: cs(cue).backgroundColor, cueInk: cs(cue).color };
    cue.remove();
    return out;
  });
  assert.ok(contrastOf(c.body, 'rgb(0, 0, 0)') < 1.5, `the page is not dark: ${c.body}`);
  assert.ok(contrastOf(c.ink, c.panel) >= 7, `body text ${c.ink} on ${c.panel}: ${contrastOf(c.ink, c.panel).toFixed(2)}:1`);
  assert.ok(contrastOf(c.cueInk, c.cueBg) >= 4.5, `the playing sound's label ${c.cueInk} on ${c.cueBg}: ${contrastOf(c.cueInk, c.cueBg).toFixed(2)}:1`);
  mkdirSync(ARTIFACTS, { recursive: true });
  await page.screenshot({ path: join(ARTIFACTS, 'listen-dark.png'), fullPage: true });
  await page.close();
  assert.deepEqual(problems, []);
});

// A real https endpoint on this machine (self-signed certificate made with
// openssl, accepted by this Chromium through --ignore-certificate-errors): the
// cross-origin POST goes through the CORS preflight as it would to a
// collaborator's server; the first POST is answered 503, so the page must say
// so and send the same bytes again when asked.
test('the results reach a real https endpoint: preflight, a refused POST, and a retry that lands', async () => {
  const dir = join(WORK, 'https-endpoint');
  mkdirSync(dir, { recursive: true });
  mustRun('openssl', ['req', '-x509', '-newkey', 'rsa:2048', '-nodes', '-keyout', join(dir, 'key.pem'), '-out', join(dir, 'cert.pem'),
    '-days', '1', '-subj', '/CN=localhost', '-addext', 'subjectAltName=DNS:localhost,IP:127.0.0.1']);
  const seen = [];
  let posts = 0;
  const endpoint = https.createServer({ key: readFileSync(join(dir, 'key.pem')), cert: readFileSync(join(dir, 'cert.pem')) }, (req, res) => {
    let body = '';
    req.on('data', (d) => { body += d; });
    req.on('end', () => {
      seen.push({ method: req.method, url: req.url, headers: req.headers, body });
      const cors = { 'Access-Control-Allow-Origin': req.headers.origin || '*', 'Access-Control-Allow-Headers': 'content-type', 'Access-Control-Allow-Methods': 'POST' };
      if (req.method === 'OPTIONS') { res.writeHead(204, cors); res.end(); return; }
      posts++;
      res.writeHead(posts === 1 ? 503 : 200, cors);
      res.end(posts === 1 ? 'busy' : 'stored');
    });
  });
  await new Promise((r) => endpoint.listen(0, '127.0.0.1', r));
  const url = `https://localhost:${endpoint.address().port}/results`;
  const b = await launch({ extraArgs: ['--autoplay-policy=no-user-gesture-required', '--ignore-certificate-errors'] });
  let site;
  try {
    const page = await b.context.newPage();
    const problems = [];
    page.on('pageerror', (e) => problems.push(`page error: ${e.message}`));
    // A copy of the site whose definition names this endpoint (no request
    // interception here: with it, Playwright answers CORS preflights itself).
    const copy = join(dir, 'site');
    rmSync(copy, { recursive: true, force: true });
    cpSync(built.out, copy, { recursive: true });
    const def = JSON.parse(readFileSync(join(copy, 'listening.json'), 'utf8'));
    def.tests.find((t) => t.id === 'p-test').post = url;
    writeFileSync(join(copy, 'listening.json'), JSON.stringify(def));
    site = await serve(copy);
    await page.goto(`${site.url}listen.html?test=p-test`);
    await step(page, 'intro');
    await page.click('#start');
    for (let k = 0; k < 3; k++) {
      await page.waitForSelector(`body[data-step="trial"][data-trial="${k}"]`);
      await page.check('#answer-a');
      await page.click('#trial-next');
    }
    await step(page, 'done');
    const file = await download(page, '#download', 'listen-ab-https.json');
    await page.waitForSelector('#post-status[data-kind=error]', { timeout: 30000 });
    assert.match(await page.textContent('#post-status'), /could not be sent \(HTTP 503/);
    assert.equal(await page.isVisible('#post-retry'), true);
    await page.click('#post-retry');
    await page.waitForSelector('#post-status[data-kind=ok]', { timeout: 30000 });
    const preflight = seen.find((s) => s.method === 'OPTIONS');
    assert.ok(preflight, 'a cross-origin JSON POST is preceded by a CORS preflight');
    assert.equal(preflight.headers['access-control-request-method'], 'POST');
    assert.equal(preflight.headers.origin, new URL(site.url).origin);
    const sent = seen.filter((s) => s.method === 'POST');
    assert.equal(sent.length, 2, 'one refused POST and one retry');
    for (const s of sent) {
      assert.equal(s.url, '/results');
      assert.equal(s.headers['content-type'], 'application/json');
      assert.equal(s.headers.cookie, undefined, 'no credentials');
      assert.equal(s.body, readFileSync(file, 'utf8'), 'the POST carries exactly the downloaded file');
    }
    assert.deepEqual(problems, []);
    await page.close();
  } finally {
    await b.close();
    endpoint.close();
    if (site) site.stop();
  }
});

// ---- titles, the familiarisation order and the keyboard --------------------------------------------

const HIDDEN = ['itm-tone-x7', 'itm-other-q3', 'cond-ref-k2', 'cond-net-m5', 'cond-plain-q7', 'Circuit K2', 'Network M5'];
const LABELS = { 'itm-tone-x7': 'Plucked tone', 'itm-other-q3': 'Item 2' };

// Nothing on the page (text or markup, attributes included) names an item id or a condition.
async function assertNoIds(page, where) {
  const html = await page.content();
  for (const id of HIDDEN) assert.ok(!html.includes(id), `${where}: the page shows '${id}'`);
}

// Opens f-test as a new participant with `seed` (the saved state the page resumes from).
async function openWithSeed(seed, participant) {
  // The page once (it saves a participant of its own once prepared), then the
  // saved state replaced by this participant's, and the page again.
  const { page, problems } = await openPage(browser.context, `${server.url}listen.html?test=f-test`);
  // Any screen past the preparation (an earlier participant of this browser may be resumed).
  await page.waitForSelector('body:not([data-step="start"]):not([data-step="loading"])', { timeout: 90000 });
  // Every text the preparation progress line shows, from the first one on.
  await page.addInitScript(() => {
    window.__prepareTexts = [];
    new MutationObserver(() => {
      const p = document.getElementById('prepare-text');
      if (p && p.textContent) window.__prepareTexts.push(p.textContent);
    }).observe(document, { subtree: true, childList: true, characterData: true });
  });
  await page.evaluate(([s, p]) => {
    localStorage.setItem('earshot-listen:f-test', JSON.stringify({ version: 1, participant: p, seed: s, started: null, familiarised: false, answers: [] }));
  }, [seed, participant]);
  await page.reload();
  await step(page, 'intro');
  assert.equal(await page.getAttribute('body', 'data-seed'), String(seed));
  return { page, problems };
}


// Runs f-test from the intro to the download; `keys` drives the first trial by keyboard.
async function runFamiliarisationSet(page, tag, keys) {
  await assertNoIds(page, 'intro');
  const prep = await page.evaluate(() => window.__prepareTexts);
  assert.ok(prep.length > 0 && prep.some((t) => t.includes('Plucked tone')) && prep.some((t) => t.includes('Item 2')), prep.join(' | '));
  for (const t of prep) for (const id of HIDDEN) assert.ok(!t.includes(id), `the progress line shows '${id}': ${t}`);
  await page.click('#start');
  await step(page, 'familiar');
  await assertNoIds(page, 'familiarisation');
  const shownItems = await page.locator('#familiar-list .cue-item').allTextContents();
  if (keys) await keys.familiar(page);
  await page.click('#familiar-done');
  await step(page, 'trial');
  await assertNoIds(page, 'first trial');
  if (keys) await keys.trial(page);
  for (let k = 0; k < 2; k++) {
    await page.waitForSelector(`body[data-step="trial"][data-trial="${k}"]`);
    if (k > 0 || !keys) await rateAll(page, (i) => [100, 40, 70][i]);
    await page.click('#trial-next');
  }
  await step(page, 'done');
  const file = await download(page, '#download', `listen-f-${tag}.json`);
  return { shownItems, file, res: JSON.parse(readFileSync(file, 'utf8')) };
}

test('participants see titles, never ids; the familiarisation order is recorded; keyboard shortcuts work', async () => {
  const test0 = config.tests.find((t) => t.id === 'f-test');
  const seed = 3141592653;
  const { page, problems } = await openWithSeed(seed, 'p-keys');
  const keys = {
    async familiar(p) {
      // The list of keys is on the page, visible.
      assert.equal(await p.isVisible('#familiar-keys'), true);
      assert.match(await p.textContent('#familiar-keys'), /Space\s*play \/ stop/);
      await p.keyboard.press('2');
      assert.deepEqual(await pressed(p), ['f0-1']);
      await p.keyboard.press('ArrowRight');
      assert.deepEqual(await pressed(p), ['f0-2']);
      await p.keyboard.press('ArrowRight'); // on to the second item's first sound
      assert.deepEqual(await pressed(p), ['f1-0']);
      await p.keyboard.press('Space');
      assert.deepEqual(await pressed(p), []);
      await p.keyboard.press('Space');
      assert.deepEqual(await pressed(p), ['f1-0']);
    },
    async trial(p) {
      assert.equal(await p.isVisible('#trial-keys'), true);
      const help = await p.textContent('#trial-keys');
      for (const w of ['play / stop', 'reference', 'sample 1 to 3', 'score of the chosen sample', 'Page Up']) assert.ok(help.includes(w), help);
      await p.keyboard.press('r');
      assert.deepEqual(await pressed(p), ['open-reference']);
      await p.keyboard.press('2');
      assert.deepEqual(await pressed(p), ['s1']);
      assert.equal(await p.evaluate(() => document.activeElement.id), 'score-1');
      // Keyboard focus is visible: the ring style.css draws for :focus-visible.
      const ring = await p.evaluate(() => {
        const e = document.activeElement;
        const cs = getComputedStyle(e);
        return { visible: e.matches(':focus-visible'), style: cs.outlineStyle, width: parseFloat(cs.outlineWidth) };
      });
      assert.deepEqual([ring.visible, ring.style], [true, 'solid']);
      assert.ok(ring.width >= 2, JSON.stringify(ring));
      for (let k = 0; k < 3; k++) await p.keyboard.press('ArrowUp');
      assert.equal(await p.inputValue('#score-1'), '53');
      await p.keyboard.press('PageDown');
      assert.equal(await p.inputValue('#score-1'), '43');
      assert.match(await p.textContent('output[for=score-1]'), /^43 Fair$/);
      await p.keyboard.press('ArrowRight');
      assert.deepEqual(await pressed(p), ['s2']);
      assert.equal(await p.evaluate(() => document.activeElement.id), 'score-2');
      await p.keyboard.press('Space');
      assert.deepEqual(await pressed(p), []);
      await p.keyboard.press('Space');
      assert.deepEqual(await pressed(p), ['s2']);
      // Typing in a text field is left alone: neither the digit nor the space is taken.
      await p.evaluate(() => {
        const i = document.createElement('input');
        i.type = 'text';
        i.id = 'probe';
        i.setAttribute('aria-label', 'probe');
        document.body.appendChild(i);
      });
      await p.focus('#probe');
      await p.keyboard.type('1 r');
      assert.equal(await p.inputValue('#probe'), '1 r');
      assert.deepEqual(await pressed(p), ['s2']);
      await p.evaluate(() => document.getElementById('probe').remove());
      // Score every sample by keys: digit, then Page Up/Down; Next opens once all are moved.
      await p.keyboard.press('1');
      await p.keyboard.press('PageUp');
      await p.keyboard.press('3');
      await p.keyboard.press('PageUp');
      await p.keyboard.press('PageUp');
      assert.equal(await p.isDisabled('#trial-next'), false);
    },
  };
  const { shownItems, res, file } = await runFamiliarisationSet(page, 'a', keys);
  // The record: the seed the page derived, and the order it showed (items by title in that order).
  assert.deepEqual(res.familiarisation, { seed: familiarisationSeed(seed), order: familiarisationPlan(test0, seed) });
  assert.deepEqual(shownItems, res.familiarisation.order.map((o) => LABELS[o.item]));
  // The trial's scores as set by keys (first trial; the sliders follow the seed's order).
  const first = plan(test0, seed)[0];
  assert.deepEqual(res.trials[0].order, first.order);
  assert.deepEqual(first.order.map((c) => res.trials[0].ratings[c]), [60, 43, 70]);
  // The names reach the results and the tally, not the page.
  assert.deepEqual(res.conditions, [{ id: 'cond-ref-k2', role: 'reference', name: 'Circuit K2' }, { id: 'cond-net-m5', role: 'test', name: 'Network M5' }, { id: 'cond-plain-q7', role: 'test' }]);
  // (--no-screening: this participant rated the hidden reference below 90, on purpose of the keys above.)
  const csv = join(WORK, 'listen-test', 'f-names.csv');
  const t = run(bin, ['tally', file, '--no-screening', '--csv', csv, '--force']);
  assert.equal(t.status, 0, t.stderr);
  const [head, ...lines] = readFileSync(csv, 'utf8').trim().split('\n').map((l) => l.split(','));
  const rows = lines.map((l) => Object.fromEntries(head.map((h, i) => [h, l[i]])));
  assert.deepEqual(rows.filter((r) => r.scope === 'all').map((r) => r.name), ['Circuit K2', 'Network M5', 'cond-plain-q7']);
  assert.match(t.stdout, /Network M5/);
  await page.close();
  assert.deepEqual(problems, []);
});

test('the familiarisation order differs between two seeds and is the same again for the same seed', async () => {
  const test0 = config.tests.find((t) => t.id === 'f-test');
  const [s1, s2] = [3141592653, 2718281828];
  // The two seeds give different orders (checked on the plan first, so the test can tell).
  assert.notDeepEqual(familiarisationPlan(test0, s1), familiarisationPlan(test0, s2));
  const runs = [];
  for (const [seed, tag] of [[s2, 'b'], [s1, 'c']]) {
    const { page, problems } = await openWithSeed(seed, `p-${tag}`);
    runs.push(await runFamiliarisationSet(page, tag, null));
    await page.close();
    assert.deepEqual(problems, []);
  }
  const [b, c] = runs;
  assert.equal(b.res.familiarisation.seed, familiarisationSeed(s2));
  assert.notDeepEqual(b.res.familiarisation.order, c.res.familiarisation.order);
  // Same seed, a new participant in a fresh page: the order recorded in the first test.
  assert.deepEqual(c.res.familiarisation, { seed: familiarisationSeed(s1), order: familiarisationPlan(test0, s1) });
  for (const r of runs) assert.deepEqual(r.shownItems, r.res.familiarisation.order.map((o) => LABELS[o.item]));
  // Both files tally together (the record is checked, and files without it still read).
  const both = run(bin, ['tally', b.file, c.file]);
  assert.equal(both.status, 0, both.stderr);
  assert.match(both.stdout, /familiarisation order recorded in 2/);
});
