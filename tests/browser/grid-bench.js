#!/usr/bin/env node
// Responsiveness of the comparison grid in headless Chromium (figures printed,
// nothing asserted): a 6 × 6 grid of 10 s mono 48 kHz clips (the dry input
// and the four bundled effects, one of them at two settings), every cell
// clicked in turn, row by row, as a reader would:
//   - time to first sound: from the click to the scheduled start of the cell's
//     audio (grid-panel.js records it; it includes the 30 ms scheduling lead),
//     for a cell not yet computed (cold) and for one its row already computed (warm);
//   - main-thread stalls: Long Tasks (≥ 50 ms, the Long Tasks API) while the
//     grid computes and plays;
//   - memory: the page's JavaScript heap (CDP Performance.getMetrics) and the
//     resident memory of Chromium's renderer processes (/proc), before and
//     after all 36 cells are computed.
//
//   node tests/browser/grid-bench.js [--variant simd|scalar]
import { mkdirSync, readFileSync, readdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { REPO, WORK, earshotBin, launch, mustRun, serve, waitForCheck, PYTHON } from './helpers.js';

const args = process.argv.slice(2);
const variant = args.includes('--variant') ? args[args.indexOf('--variant') + 1] : 'simd';
const DIR = join(WORK, 'grid-bench');
mkdirSync(join(DIR, 'clips'), { recursive: true });

// Six 10 s clips: the demo sources of demos/circuit/clips.py, and two more seeds.
mustRun(PYTHON, ['-c', `
import sys, numpy as np
sys.path.insert(0, sys.argv[1])
from demos.circuit import clips
from scipy.io import wavfile
n = 480000
names = list(clips.CLIPS) + ["melody", "strum"]
for i, name in enumerate(names):
    x = clips.make_dry(name, n) if i < 4 else np.roll(clips.make_dry(name, n), 12345 * i)
    wavfile.write(f"{sys.argv[2]}/clip{i}.wav", 48000, np.round(x * 32767).astype(np.int16))
`, REPO, join(DIR, 'clips')]);
const fx = (id) => ({ file: `${join(REPO, 'demos', 'effects', id)}.nfx`, id });
const config = {
  title: 'grid benchmark',
  effects: ['lstm', 'gru', 'wavenet', 'tcn'].map((id) => ({ file: `effects/${id}.nfx`, id })),
  clips: Array.from({ length: 6 }, (_, i) => ({ file: `clips/clip${i}.wav`, id: `clip${i}` })),
  grid: {
    columns: [
      { name: 'Dry', input: true },
      { name: 'LSTM', effect: 'lstm' },
      { name: 'GRU', effect: 'gru' },
      { name: 'WaveNet', effect: 'wavenet' },
      { name: 'TCN', effect: 'tcn' },
      { name: 'TCN hot', effect: 'tcn', controls: { drive: 0.9 } },
    ],
  },
};
mkdirSync(join(DIR, 'effects'), { recursive: true });
for (const id of ['lstm', 'gru', 'wavenet', 'tcn']) writeFileSync(join(DIR, 'effects', `${id}.nfx`), readFileSync(fx(id).file));
writeFileSync(join(DIR, 'site-config.json'), JSON.stringify(config));
const t0 = Date.now();
mustRun(earshotBin(), ['site', join(DIR, 'site-config.json'), '--out', join(DIR, 'site'), '--force', '--quiet']);
const buildS = (Date.now() - t0) / 1000;

function rendererRssMiB() {
  let kb = 0;
  for (const pid of readdirSync('/proc').filter((d) => /^\d+$/.test(d))) {
    try {
      const cmd = readFileSync(`/proc/${pid}/cmdline`, 'utf8');
      if (!cmd.includes('chromium') || !cmd.includes('--type=renderer')) continue;
      const m = /VmRSS:\s+(\d+) kB/.exec(readFileSync(`/proc/${pid}/status`, 'utf8'));
      if (m) kb += Number(m[1]);
    } catch { /* gone */ }
  }
  return kb / 1024;
}

const server = await serve(join(DIR, 'site'));
const browser = await launch();
const page = await browser.context.newPage();
const cdp = await browser.context.newCDPSession(page);
await cdp.send('Performance.enable');
const heapMiB = async () => (await cdp.send('Performance.getMetrics')).metrics.find((m) => m.name === 'JSHeapUsedSize').value / 1048576;
await page.goto(`${server.url}?variant=${variant}`);
await waitForCheck(page);
await page.waitForFunction(() => document.body.dataset.ready === 'true');
await page.evaluate(() => {
  window.__long = [];
  new PerformanceObserver((l) => { for (const e of l.getEntries()) window.__long.push(e.duration); }).observe({ type: 'longtask' });
});
const before = { heap: await heapMiB(), rss: rendererRssMiB() };
const cell = (r, k) => `#grid tbody tr:nth-child(${r + 1}) td:nth-of-type(${k + 1})`;
const cold = [];
const warm = [];
const started = Date.now();
for (let r = 0; r < 6; r++) {
  for (let k = 0; k < 6; k++) {
    const state = await page.getAttribute(cell(r, k), 'data-state');
    await page.evaluate(() => { delete document.getElementById('grid').dataset.firstSoundMs; });
    await page.click(cell(r, k));
    await page.waitForFunction(() => document.getElementById('grid').dataset.firstSoundMs, null, { timeout: 120000 });
    const ms = Number(await page.evaluate(() => document.getElementById('grid').dataset.firstSoundMs));
    (state === 'ready' ? warm : cold).push(ms);
    await page.waitForTimeout(150);
  }
  // Let the row's last cells finish before the next row (a reader listens first).
  await page.waitForFunction((row) => [...document.querySelectorAll(`#grid tbody tr:nth-child(${row + 1}) td`)].every((td) => td.dataset.state === 'ready'), r, { timeout: 120000 });
}
const totalS = (Date.now() - started) / 1000;
// Again, every cell now computed: switching within a row and moving between rows.
for (let r = 0; r < 6; r++) {
  for (let k = 0; k < 6; k++) {
    await page.evaluate(() => { delete document.getElementById('grid').dataset.firstSoundMs; });
    await page.click(cell(r, k));
    await page.waitForFunction(() => document.getElementById('grid').dataset.firstSoundMs, null, { timeout: 120000 });
    warm.push(Number(await page.evaluate(() => document.getElementById('grid').dataset.firstSoundMs)));
    await page.waitForTimeout(100);
  }
}
const verdicts = await page.$$eval('#grid td', (l) => l.map((td) => td.dataset.verdict));
const longTasks = await page.evaluate(() => window.__long);
const after = { heap: await heapMiB(), rss: rendererRssMiB() };
await browser.close();
server.stop();

const stats = (v) => {
  if (!v.length) return 'none';
  const s = [...v].sort((a, b) => a - b);
  return `median ${s[Math.floor(s.length / 2)].toFixed(0)} ms, max ${s[s.length - 1].toFixed(0)} ms (${v.length} clicks)`;
};
console.log(`grid 6 × 6, 10 s mono 48 kHz clips, ${variant} build; site built in ${buildS.toFixed(1)} s (36 cell hashes); load average ${readFileSync('/proc/loadavg', 'utf8').split(' ').slice(0, 3).join(' ')}`);
console.log(`cells matching native: ${verdicts.filter((v) => v === 'pass').length} / ${verdicts.length}`);
console.log(`time to first sound, cell not yet computed: ${stats(cold)}`);
console.log(`time to first sound, cell already computed: ${stats(warm)}`);
console.log(`all 36 cells clicked and computed in ${totalS.toFixed(1)} s`);
console.log(`main-thread long tasks (≥ 50 ms): ${longTasks.length}${longTasks.length ? `, longest ${Math.max(...longTasks).toFixed(0)} ms, total ${longTasks.reduce((a, b) => a + b, 0).toFixed(0)} ms` : ''}`);
console.log(`JS heap ${before.heap.toFixed(1)} → ${after.heap.toFixed(1)} MiB; renderer processes' RSS ${before.rss.toFixed(0)} → ${after.rss.toFixed(0)} MiB (36 cells of 10 s hold ${(36 * 480000 * 4 / 1048576).toFixed(0)} MiB of samples)`);
