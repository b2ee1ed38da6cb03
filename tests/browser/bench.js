#!/usr/bin/env node
// Browser benchmark of a built site in headless Chromium (figures printed,
// nothing asserted):
//   1. the AudioWorklet's share of the real-time budget at 48 kHz, per effect
//      and build: worklet/processor.js (effect, level, limiter, meters) in an
//      OfflineAudioContext at 48 000 Hz, wall time to render over the audio's
//      duration; the same graph with a plain GainNode in its place is shown
//      as the floor the browser itself costs;
//   2. the offline Worker's render speed, per effect and build: a 60 s mono
//      48 kHz file through the page's own upload-and-render path;
//   3. a 10-minute stereo 48 kHz file through the page with the first effect:
//      total time and the longest stall of the page's main thread meanwhile,
//      then the time to draw both spectrograms and the difference view
//      (web/js/spectrogram.js) and the longest stall while they are drawn.
//
//   node tests/browser/bench.js [--config demos/site.json] [--seconds 20] [--no-long | --long-only]
//   node tests/browser/bench.js --bench-models     (the synthetic set of tools/make_bench_models.py)
import { existsSync, mkdirSync, writeFileSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { REPO, WORK, earshotBin, launch, mustRun, serve, waitForCheck, PYTHON } from './helpers.js';

const args = process.argv.slice(2);
const opt = (name, fallback) => {
  const i = args.indexOf(name);
  return i >= 0 ? args[i + 1] : fallback;
};
const seconds = Number(opt('--seconds', '20'));
const long = !args.includes('--no-long');
const longOnly = args.includes('--long-only');
const BENCH = join(REPO, 'build', 'browser-bench');
mkdirSync(BENCH, { recursive: true });

let config = resolve(opt('--config', join(REPO, 'demos', 'site.json')));
if (args.includes('--bench-models')) {
  const models = join(BENCH, 'models');
  mustRun(PYTHON, [join(REPO, 'tools', 'make_bench_models.py'), models]);
  const names = ['lstm-16', 'lstm-32', 'lstm-64', 'gru-32', 'wavenet-10x16', 'tcn-film'];
  config = join(BENCH, 'bench-models-site.json');
  writeFileSync(config, JSON.stringify({ title: 'earshot benchmark models', effects: names.map((n) => ({ file: `models/${n}.nfx`, name: n })) }));
}
if (!existsSync(config)) {
  console.error(`bench: no site config at ${config}; pass --config FILE or --bench-models`);
  process.exit(2);
}
const out = join(BENCH, 'site');
mustRun(earshotBin(), ['site', config, '--out', out, '--force', '--quiet']);

function wav48(path, secs, channels, kind) {
  mustRun(PYTHON, ['-c', `
import sys, numpy as np, scipy.io.wavfile as w
rate, n, c = 48000, int(48000 * float(sys.argv[2])), int(sys.argv[3])
rng = np.random.default_rng(1)
t = np.arange(n) / rate
x = np.stack([0.3 * np.sin(2 * np.pi * (110 + 55 * k) * t) * (1 + 0.5 * np.sin(2 * np.pi * 0.5 * t)) + 0.05 * rng.standard_normal(n) for k in range(c)], 1)
w.write(sys.argv[1], rate, (np.round(x * 32767).astype(np.int16) if sys.argv[4] == "i16" else x.astype(np.float32)))
`, path, String(secs), String(channels), kind]);
  return path;
}

const server = await serve(out);
const browser = await launch();
const page = await browser.context.newPage();
await page.goto(server.url);
await waitForCheck(page);
const site = await page.evaluate(() => fetch('site.json').then((r) => r.json()));
const lines = [];
const say = (s) => {
  console.log(s);
  lines.push(s);
};

say(`# earshot browser benchmark: ${site.title}`);
say(`Chromium ${browser.context.browser() ? browser.context.browser().version() : ''}, headless, ${new Date().toISOString().slice(0, 10)}; ${seconds} s of audio at 48 000 Hz per worklet figure.`);
say('');

// 1. worklet share of the real-time budget.
async function workletShare(effectFile, variant, secs, plain) {
  return page.evaluate(async ({ effectFile, variant, secs, plain, wasmPath }) => {
    const [wasm, effect] = plain ? [null, null]
      : await Promise.all([wasmPath, effectFile].map((u) => fetch(u).then((r) => r.arrayBuffer())));
    const rate = 48000;
    const ctx = new OfflineAudioContext(2, Math.round(rate * secs), rate);
    await ctx.audioWorklet.addModule('worklet/processor.js');
    // Input: a 1 s noise-and-tone loop (the cost does not depend on the signal).
    const buf = ctx.createBuffer(1, rate, rate);
    const d = buf.getChannelData(0);
    let s = 1;
    for (let i = 0; i < d.length; i++) {
      s = (s * 1103515245 + 12345) >>> 0;
      d[i] = 0.3 * Math.sin((2 * Math.PI * 220 * i) / rate) + 0.1 * ((s / 4294967296) * 2 - 1);
    }
    const src = new AudioBufferSourceNode(ctx, { buffer: buf, loop: true });
    let node;
    if (plain) node = new GainNode(ctx, { gain: 0.5 });
    else {
      node = new AudioWorkletNode(ctx, 'earshot-live', {
        numberOfInputs: 1, numberOfOutputs: 1, outputChannelCount: [2], channelCount: 1, channelCountMode: 'explicit',
        processorOptions: { wasm, variant, effect, settings: null, levelDb: -12 },
      });
      await new Promise((res, rej) => {
        node.port.onmessage = (e) => (e.data.type === 'ready' ? res() : e.data.type === 'error' ? rej(new Error(e.data.message)) : 0);
      });
    }
    src.connect(node).connect(ctx.destination);
    src.start();
    const t0 = performance.now();
    await ctx.startRendering();
    return (performance.now() - t0) / 1000 / secs;
  }, { effectFile, variant, secs, plain, wasmPath: site.wasm[variant] });
}

const floor = longOnly ? NaN : await workletShare(null, 'simd', seconds, true).catch(() => NaN);
say('## AudioWorklet share of the real-time budget at 48 kHz (OfflineAudioContext, wall time / audio time)');
say('');
say('| effect | multiply-adds/sample | simd | scalar | simd under 25 %? |');
say('|---|---:|---:|---:|---|');
const rows = [];
for (const fx of site.effects) {
  if (longOnly) {
    rows.push({ fx });
    continue;
  }
  const shares = {};
  for (const v of ['simd', 'scalar']) shares[v] = await workletShare(fx.file, v, seconds, false);
  const macs = await page.evaluate((id) => {
    const sel = document.getElementById('effect-select');
    sel.value = `site:${id}`;
    sel.dispatchEvent(new Event('change'));
    return id;
  }, fx.id).then(() => waitForCheck(page, `site:${fx.id}`)).then(() => page.textContent('#card-facts'));
  const m = /Multiply-adds per sample([\d\u202f]+)/.exec(macs);
  rows.push({ fx, shares });
  say(`| ${fx.name} | ${m ? m[1].replace(/\u202f/g, ' ') : '?'} | ${(100 * shares.simd).toFixed(1)} % | ${(100 * shares.scalar).toFixed(1)} % | ${shares.simd < 0.25 ? 'yes' : 'NO'} |`);
}
say(`| (GainNode instead of the worklet: the browser's own cost) | — | ${(100 * floor).toFixed(1)} % | | |`);
say('');

// 2. Worker render speed through the page's upload path.
const oneMinute = wav48(join(BENCH, 'mono-60s.wav'), 60, 1, 'f32');
async function renderThroughPage(url, file, effectId) {
  await page.goto(url);
  await waitForCheck(page);
  await page.selectOption('#effect-select', `site:${effectId}`);
  await waitForCheck(page, `site:${effectId}`);
  await page.evaluate(() => {
    // Longest gap between timer ticks on the page's main thread.
    window.__stall = { last: performance.now(), max: 0 };
    window.__stallTimer = setInterval(() => {
      const now = performance.now();
      window.__stall.max = Math.max(window.__stall.max, now - window.__stall.last);
      window.__stall.last = now;
    }, 20);
  });
  const t0 = Date.now();
  await page.setInputFiles('#offline-file', file);
  await page.click('#render');
  await page.waitForSelector('#offline-status[data-kind=ok], #offline-status[data-kind=error]', { timeout: 3600000 });
  const total = (Date.now() - t0) / 1000;
  const status = await page.textContent('#offline-status');
  if (!/^Rendered/.test(status)) throw new Error(status);
  const facts = await page.textContent('#result-facts');
  const stall = await page.evaluate(() => {
    clearInterval(window.__stallTimer);
    return window.__stall.max;
  });
  const speed = /([\d.]+)× real time per channel/.exec(facts);
  // The spectrograms (drawn after the result) and then the difference view.
  await page.evaluate(() => { window.__stall = { last: performance.now(), max: 0 }; window.__stallTimer = setInterval(() => {
    const now = performance.now();
    window.__stall.max = Math.max(window.__stall.max, now - window.__stall.last);
    window.__stall.last = now;
  }, 20); });
  const s0 = Date.now();
  await page.waitForSelector('#spec-in[data-state=drawn]', { timeout: 600000 });
  await page.waitForSelector('#spec-out[data-state=drawn]', { timeout: 600000 });
  const spectra = (Date.now() - s0) / 1000;
  const d0 = Date.now();
  await page.check('#view-difference');
  await page.waitForSelector('#spec-diff[data-state=drawn]', { timeout: 600000 });
  const difference = (Date.now() - d0) / 1000;
  const specStall = await page.evaluate(() => {
    clearInterval(window.__stallTimer);
    return window.__stall.max;
  });
  return { total, speed: speed ? Number(speed[1]) : NaN, stall, spectra, difference, specStall };
}
say('## Offline Worker render speed (60 s mono 48 kHz float WAV, through the page)');
say('');
say('| effect | simd | scalar |');
say('|---|---:|---:|');
for (const { fx } of longOnly ? [] : rows) {
  const r = {};
  for (const v of ['simd', 'scalar']) r[v] = await renderThroughPage(`${server.url}?variant=${v}`, oneMinute, fx.id);
  say(`| ${fx.name} | ${r.simd.speed.toFixed(1)}× real time | ${r.scalar.speed.toFixed(1)}× real time |`);
}
say('');

if (long) {
  const tenMinutes = wav48(join(BENCH, 'stereo-10min.wav'), 600, 2, 'i16');
  const fx = rows[0].fx;
  const r = await renderThroughPage(`${server.url}?variant=simd`, tenMinutes, fx.id);
  say(`## A 10-minute stereo 48 kHz file (16-bit WAV, 110 MB) through ${fx.name}, simd`);
  say('');
  say(`upload to result on screen ${r.total.toFixed(1)} s; processing ${r.speed.toFixed(1)}× real time per channel; longest main-thread stall ${r.stall.toFixed(0)} ms (timer every 20 ms)`);
  say(`then both spectrograms drawn in ${r.spectra.toFixed(2)} s and the difference view in ${r.difference.toFixed(2)} s; longest main-thread stall meanwhile ${r.specStall.toFixed(0)} ms`);
  say('');
}

writeFileSync(join(BENCH, 'results.md'), lines.join('\n') + '\n');
console.log(`(also written to ${join(BENCH, 'results.md')})`);
await browser.close();
server.stop();
