// The per-stream memory limit and trap recovery (dsp/FORMAT.md, "Stream
// memory"; worklet/loader.js, Variant.renew) in the built page, on the page's
// own WebAssembly instance (web/js/engine.js) and in its offline Worker
// (web/js/offline-worker.js), each fed jobs one after another:
//  - an 85 KB effect file whose stream needs 2.5 GiB is refused with the
//    native CLI's very text, naming the figure and the limit, without a trap,
//    and the next effect renders bit-identical to the native reference;
//  - after effects just under the limit exhaust the instance's memory and
//    the core traps, the next effect gets a renewed instance and renders
//    bit-identical to the native reference.
// The native reference: the output hash `earshot site` stored for the
// effect (native scalar build; builder.test.js holds it to `earshot verify`)
// and `earshot render`.
//
// The page keeps its Variant private; these tests reach it through the
// page's own module instance of worklet/loader.js (same URL, same realm),
// whose Variant.prototype.createEffect they wrap to note each Variant used.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import {
  buildSite, serve, launch, openPage, waitForCheck, download, compareWavBits, earshotBin, fixture, mustRun, run, tmpFile,
} from './helpers.js';

let built;
let server;
let browser;
let tcn; // the bundled 'tcn' effect: { path, bytes, reference }
let refusedText; // the native CLI's refusal of wide-history.nfx

before(async () => {
  built = buildSite('bounds-test');
  server = await serve(built.out);
  browser = await launch();
  const entry = built.site.effects.find((e) => e.id === 'tcn');
  const path = join(built.out, entry.file);
  tcn = { path, bytes: readFileSync(path), reference: entry.reference };
  const r = run(earshotBin(), ['info', fixture('wide-history.nfx')]);
  assert.notEqual(r.status, 0, 'earshot info accepted wide-history.nfx');
  const prefix = `earshot info: ${fixture('wide-history.nfx')}: `;
  const line = r.stderr.trim();
  assert.ok(line.startsWith(prefix), line);
  refusedText = line.slice(prefix.length);
  assert.match(refusedText, /^a stream of this effect at 48000 Hz needs 2561\.1 MiB \(layers\[1\] \('far0', conv1d\) needs 512\.0 MiB of state, history and scratch\); the limit is 64\.0 MiB per stream$/);
});

after(async () => {
  if (browser) await browser.close();
  if (server) server.stop();
});

const loaderUrl = () => new URL('worklet/loader.js', server.url).href;

// In the page or a Worker (target: a Playwright Page or Worker): from now on
// every Variant whose createEffect runs is kept in globalThis.__variants.
function watchVariants(target) {
  return target.evaluate(async (url) => {
    const L = await import(url);
    if (globalThis.__variants) return;
    globalThis.__variants = [];
    const create = L.Variant.prototype.createEffect;
    L.Variant.prototype.createEffect = function createEffect(...args) {
      if (!globalThis.__variants.includes(this)) globalThis.__variants.push(this);
      return create.apply(this, args);
    };
  }, loaderUrl());
}

function variantState(target) {
  return target.evaluate(() => globalThis.__variants.map((v) => ({
    generation: v.generation, broken: v.broken ? v.broken.message : null, memoryBytes: v.memoryBytes,
  })));
}

// As bounds.test.mjs in Node: effects of 60.1 MiB kept alive until the
// instance (at most 2 GiB) runs out and the core traps.
function exhaust(target) {
  const bytes = Array.from(readFileSync(fixture('wide-history-60mib.nfx')));
  return target.evaluate(async ({ url, bytes }) => {
    const L = await import(url);
    const v = globalThis.__variants[0];
    const file = new Uint8Array(bytes);
    const kept = [];
    let trap = null;
    for (let i = 0; i < 64 && !trap; i++) {
      try {
        kept.push(new L.Effect(v, file, 48000));
      } catch (e) {
        trap = e.message;
      }
    }
    let lost = null;
    try {
      kept[0].process(new Float32Array(8), new Float32Array(8));
    } catch (e) {
      lost = e.message;
    }
    for (const fx of kept) fx.destroy();
    return { trap, kept: kept.length, broken: !!v.broken, generation: v.generation, lost };
  }, { url: loaderUrl(), bytes });
}

function assertTrapped(t) {
  assert.ok(t.trap, `no trap after ${t.kept} effects of 60 MiB`);
  assert.match(t.trap, /earshot core trapped in earshot_create/);
  assert.ok(t.kept >= 8, `only ${t.kept} effects of 60 MiB before the trap`);
  assert.equal(t.broken, true);
  assert.match(t.lost, /trapped/, 'an effect of the trapped instance must say it was lost');
}

// The page's instance renders the standard test signal through 'tcn'; its
// output hash must equal the native one (the self-check's signal and hash,
// web/js/test-signal.js).
function pageInstanceHash(page) {
  return page.evaluate(async ({ ref, bytes }) => {
    const { testSignal, fnv1a64 } = await import(new URL('js/test-signal.js', document.baseURI).href);
    const v = globalThis.__variants[0];
    const fx = v.createEffect(new Uint8Array(bytes), ref.rate);
    const x = testSignal(ref.rate, ref.seconds);
    const y = new Float32Array(x.length);
    fx.process(x, y);
    fx.destroy();
    return { signal: fnv1a64(x), output: fnv1a64(y), generation: v.generation };
  }, { ref: tcn.reference, bytes: Array.from(tcn.bytes) });
}

// Opens a file with the page's "open an effect file" input; resolves the
// effect status ({ kind, text }) once the page has taken or refused it.
async function openEffect(page, path) {
  const before = await page.locator('#effect-select option').count();
  await page.setInputFiles('#effect-file', path);
  await page.waitForFunction((n) => document.getElementById('effect-status').dataset.kind === 'error'
    || document.querySelectorAll('#effect-select option').length > n, before);
  return { kind: await page.getAttribute('#effect-status', 'data-kind'), text: await page.textContent('#effect-status') };
}

// After opening tcn.nfx as the visitor's file: its self-check (no reference
// for a visitor's file) shows the output hash this browser computed.
async function assertOpenedTcnMatches(page) {
  const r = await openEffect(page, tcn.path);
  assert.notEqual(r.kind, 'error', r.text);
  await page.waitForSelector('#check-status[data-effect^="file:"]:is([data-state=none], [data-state=fail])', { timeout: 60000 });
  const check = await page.textContent('#check-status');
  assert.ok(check.includes(`Its output hash here is ${tcn.reference.output_hash}`), check);
}

test('page: a file whose stream would need 2.5 GiB is refused with the native text, without a trap, and the next effect renders as native', async () => {
  const { page, problems } = await openPage(browser.context, server.url);
  await waitForCheck(page);
  await watchVariants(page);
  const r = await openEffect(page, fixture('wide-history.nfx'));
  assert.equal(r.kind, 'error');
  assert.equal(r.text, `'wide-history.nfx' cannot be used as an effect: ${refusedText}`);
  assert.equal(await page.inputValue('#effect-select'), 'site:lstm');
  const [v] = await variantState(page);
  assert.equal(v.broken, null);
  assert.equal(v.generation, 0);
  assert.ok(v.memoryBytes < 16 << 20, `the page's instance grew to ${v.memoryBytes} bytes for a refused file`);

  await assertOpenedTcnMatches(page);
  const h = await pageInstanceHash(page);
  assert.equal(h.signal, tcn.reference.signal_hash);
  assert.equal(h.output, tcn.reference.output_hash);
  assert.equal(h.generation, 0);
  await page.close();
  assert.deepEqual(problems, []);
});

test('page: after the core traps (memory exhausted), the next effect opened works and renders as native', async () => {
  const { page, problems } = await openPage(browser.context, server.url);
  await waitForCheck(page);
  await watchVariants(page);
  // The page's instance reads the chosen effect: that call notes it.
  await page.selectOption('#effect-select', 'site:tcn');
  assert.equal((await waitForCheck(page, 'site:tcn')).state, 'pass');
  assertTrapped(await exhaust(page));

  await assertOpenedTcnMatches(page);
  const [v] = await variantState(page);
  assert.equal(v.broken, null);
  assert.equal(v.generation, 1);
  const h = await pageInstanceHash(page);
  assert.equal(h.output, tcn.reference.output_hash);

  // And a file renders offline with it, bit-identical to `earshot render`.
  await page.setInputFiles('#offline-file', fixture('mono-48k-i16.wav'));
  await page.click('#render');
  await page.waitForSelector('#offline-status[data-kind=ok], #offline-status[data-kind=error]', { timeout: 120000 });
  assert.equal(await page.getAttribute('#offline-status', 'data-kind'), 'ok', await page.textContent('#offline-status'));
  const pagePath = await download(page, '#download', 'bounds-after-trap.wav');
  const cliPath = tmpFile('bounds-after-trap-cli.wav');
  mustRun(earshotBin(), ['render', tcn.path, fixture('mono-48k-i16.wav'), cliPath, '--quiet']);
  const cmp = compareWavBits(pagePath, cliPath);
  assert.equal(cmp.same, true, JSON.stringify(cmp));
  await page.close();
  assert.deepEqual(problems, []);
});

// The page's offline Worker, one Worker given jobs in turn as the page would.
async function openWorker(page) {
  const [worker] = await Promise.all([
    page.waitForEvent('worker'),
    page.evaluate(() => {
      globalThis.__worker = new Worker(new URL('js/offline-worker.js', document.baseURI), { type: 'module', name: 'earshot offline' });
    }),
  ]);
  await watchVariants(worker);
  let id = 0;
  const job = (type, bytes, reference) => page.evaluate(({ type, id, bytes, reference }) => new Promise((resolve) => {
    const w = globalThis.__worker;
    w.onmessage = (e) => {
      if (e.data.id === id && e.data.type !== 'progress') resolve(e.data);
    };
    w.postMessage({
      type, id, effect: new Uint8Array(bytes).buffer, reference,
      wasmUrl: new URL('wasm/earshot-simd.wasm', document.baseURI).href, variant: 'simd',
      siteUrl: new URL('site.json', document.baseURI).href,
    });
  }), { type, id: ++id, bytes: Array.from(bytes), reference });
  const checkTcn = async () => {
    const m = await job('check', tcn.bytes, tcn.reference);
    assert.equal(m.type, 'checked', m.message);
    assert.equal(m.result.pass, true, JSON.stringify(m.result.difference));
    assert.equal(m.result.outputHash, tcn.reference.output_hash);
  };
  return { worker, job, checkTcn };
}

test('offline Worker: the 2.5 GiB file is refused with the native text, without a trap, and the next job renders as native', async () => {
  const { page, problems } = await openPage(browser.context, server.url);
  await waitForCheck(page);
  const { worker, job, checkTcn } = await openWorker(page);
  const m = await job('check', readFileSync(fixture('wide-history.nfx')), null);
  assert.equal(m.type, 'failed');
  assert.equal(m.message, refusedText);
  const [v] = await variantState(worker);
  assert.equal(v.broken, null);
  assert.equal(v.generation, 0);
  assert.ok(v.memoryBytes < 16 << 20, `the Worker's instance grew to ${v.memoryBytes} bytes for a refused file`);
  await checkTcn();
  assert.equal((await variantState(worker)).length, 1, 'the Worker must keep one Variant');
  await page.close();
  assert.deepEqual(problems, []);
});

test('offline Worker: after the core traps (memory exhausted), the next job gets a renewed instance and renders as native', async () => {
  const { page, problems } = await openPage(browser.context, server.url);
  await waitForCheck(page);
  const { worker, checkTcn } = await openWorker(page);
  await checkTcn(); // the Worker's instance now exists and is noted
  assertTrapped(await exhaust(worker));
  await checkTcn();
  const states = await variantState(worker);
  assert.equal(states.length, 1, 'the Worker must keep its Variant (renewed, not replaced)');
  assert.equal(states[0].broken, null);
  assert.equal(states[0].generation, 1);
  await page.close();
  assert.deepEqual(problems, []);
});
