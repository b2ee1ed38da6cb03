// Soak of the AudioWorklet path (worklet/processor.js with worklet/loader.js)
// in Debian's Chromium, driven by playwright-core with the browser tests'
// launcher. Not part of CI: an hour of audio takes a while (docs/site.md, "Soak").
//
//   node tools/soak.mjs [--minutes N] [--variant simd|scalar] [--json FILE]
//
// One OfflineAudioContext at 48 kHz renders N minutes (default 60) faster
// than real time; headless Chromium hosts the AudioWorklet in it. Our own
// signal (tools/soak-worklet.js: sweeps, noise bursts, silences) feeds an
// 'earshot-live' node; every audio-minute the page switches to the next
// bundled effect (demos/effects/*.nfx, in name order) the way the live panel
// does (web/js/live-panel.js, connectNode), and every 100 ms of audio it
// sends new settings (every control, dry/wet, input and output gain moving
// on slow sines; bypass for 2 s of every 45 s), the live panel's 'settings'
// message.
//
// Reports: audio seconds, non-finite output samples (must be 0), JS heap of
// the page and of the worklet scope (CDP HeapProfiler.collectGarbage, then
// Runtime.getHeapUsage) and the WebAssembly memory of the running
// processors, at start and end; process() calls over the render quantum's
// real-time budget (128 frames / 48000 Hz = 2.67 ms) and the longest; wall time.
// Exit status 1 when any output sample was non-finite, a processor failed or
// reported an error, or the page logged an error.
//
// Environment as tests/browser: EARSHOT_CHROMIUM (default /usr/bin/chromium).
// Needs the WebAssembly builds (build/wasm-simd, build/wasm-scalar) and
// node_modules (npm ci).
import { existsSync, readdirSync, writeFileSync } from 'node:fs';
import os, { loadavg } from 'node:os';
import { join } from 'node:path';
import { REPO, launch, serve } from '../tests/browser/helpers.js';

const RATE = 48000;
const STEP_S = 0.1; // settings message interval, audio seconds
const SWITCH_S = 60; // effect switch interval, audio seconds

function usage(message) {
  if (message) console.error(`soak: ${message}`);
  console.error('usage: node tools/soak.mjs [--minutes N] [--variant simd|scalar] [--json FILE]');
  process.exit(2);
}

function options(argv) {
  const o = { minutes: 60, variant: 'simd', json: null };
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i];
    const value = () => {
      if (i + 1 >= argv.length) usage(`${a} needs a value`);
      return argv[++i];
    };
    if (a === '--minutes') {
      const m = Number(value());
      if (!(m > 0 && m <= 240)) usage(`--minutes must be a number in (0, 240], got '${argv[i]}'`);
      o.minutes = m;
    } else if (a === '--variant') {
      o.variant = value();
      if (!['simd', 'scalar'].includes(o.variant)) usage(`--variant must be simd or scalar, got '${o.variant}'`);
    } else if (a === '--json') {
      o.json = value();
    } else if (a === '-h' || a === '--help') {
      usage(null);
    } else {
      usage(`unknown option '${a}'`);
    }
  }
  return o;
}

// ---------------------------------------------------------------- CDP

// JS heap of the page and of the AudioWorklet scope. The worklet is a CDP
// target of type 'worklet' under the page; Playwright's sessions do not route
// flattened child sessions, so its commands go through Target.sendMessageToTarget.
async function heapProbe(context, page) {
  const cdp = await context.newCDPSession(page);
  const worklets = [];
  const pending = new Map();
  let next = 1;
  cdp.on('Target.attachedToTarget', (e) => {
    if (e.targetInfo.type === 'worklet') worklets.push(e.sessionId);
  });
  cdp.on('Target.receivedMessageFromTarget', (e) => {
    const m = JSON.parse(e.message);
    const p = pending.get(m.id);
    if (!p) return;
    pending.delete(m.id);
    if (m.error) p.reject(new Error(`${p.method}: ${m.error.message}`));
    else p.resolve(m.result);
  });
  await cdp.send('Target.setAutoAttach', { autoAttach: true, waitForDebuggerOnStart: false, flatten: false });
  const child = (sessionId, method, params = {}) => new Promise((resolve, reject) => {
    const id = next++;
    pending.set(id, { resolve, reject, method });
    cdp.send('Target.sendMessageToTarget', { sessionId, message: JSON.stringify({ id, method, params }) }).catch(reject);
  });
  const usage = async (send) => {
    await send('HeapProfiler.collectGarbage');
    const u = await send('Runtime.getHeapUsage');
    return { usedBytes: u.usedSize, totalBytes: u.totalSize };
  };
  return {
    async measure() {
      const out = { page: await usage((m, p) => cdp.send(m, p)), worklet: null };
      const s = worklets[worklets.length - 1];
      if (s) {
        try {
          out.worklet = await usage((m, p) => child(s, m, p));
        } catch (e) {
          out.worklet = { error: e.message };
        }
      }
      return out;
    },
  };
}

// ---------------------------------------------------------------- page side

// Runs in the page: builds the graph and leaves it on window.__soak.
async function setUp({ minutes, variant, effectNames, rate, stepS, switchS }) {
  const bytesOf = async (url) => {
    const r = await fetch(url);
    if (!r.ok) throw new Error(`${url}: HTTP ${r.status}`);
    return r.arrayBuffer();
  };
  const wasm = await bytesOf(`/build/wasm-${variant}/earshot-${variant}.wasm`);
  // The controls of each effect, as the core reads them.
  const { loadVariant } = await import('/worklet/loader.js');
  const reader = loadVariant(new WebAssembly.Module(wasm), { name: variant });
  const effects = [];
  for (const name of effectNames) {
    const bytes = await bytesOf(`/demos/effects/${name}`);
    const fx = reader.createEffect(new Uint8Array(bytes), rate);
    effects.push({ name, bytes, controls: fx.controls.map((c) => ({ name: c.name, min: c.min, max: c.max })) });
    fx.destroy();
  }

  const length = Math.round(minutes * 60 * rate);
  const ctx = new OfflineAudioContext(1, length, rate);
  await ctx.audioWorklet.addModule('/tools/soak-worklet.js');
  await ctx.audioWorklet.addModule('/worklet/processor.js');
  const signal = new AudioWorkletNode(ctx, 'earshot-soak-signal', { numberOfInputs: 0, outputChannelCount: [1] });

  const TAU = 2 * Math.PI;
  const settingsAt = (t, fx) => {
    const controls = {};
    fx.controls.forEach((c, i) => {
      const period = 7.3 + 4.1 * i;
      controls[c.name] = c.min + (c.max - c.min) * (0.5 + 0.5 * Math.sin((TAU * t) / period));
    });
    return {
      controls,
      mix: 0.7 + 0.3 * Math.sin((TAU * t) / 5.1),
      inputDb: -6 + 9 * Math.sin((TAU * t) / 13.7),
      outputDb: -3 + 3 * Math.sin((TAU * t) / 17.3),
      bypass: t % 45 >= 43,
    };
  };

  const s = {
    ctx, signal, effects, node: null, current: null, length, minutes,
    switches: 0, messages: 0, errors: [], coreNonfinite: 0, nodes: [], progress: [],
  };
  const asked = new Map();
  let asks = 0;
  signal.port.onmessage = (e) => {
    const f = asked.get(e.data.id);
    if (f) {
      asked.delete(e.data.id);
      f(e.data.stats);
    }
  };
  s.stats = () => new Promise((resolve) => {
    const id = ++asks;
    asked.set(id, resolve);
    signal.port.postMessage({ type: 'stats', id });
  });

  // As web/js/live-panel.js connectNode: a fresh processor per effect.
  s.connectNode = (t) => {
    const k = Math.round(t / switchS);
    const fx = effects[k % effects.length];
    if (s.node) {
      s.node.port.onmessage = null;
      s.node.port.postMessage({ type: 'stop' });
      signal.disconnect();
      s.node.disconnect();
      s.node = null;
    }
    const node = new AudioWorkletNode(ctx, 'earshot-live', {
      numberOfInputs: 1,
      numberOfOutputs: 1,
      outputChannelCount: [2],
      channelCount: 1,
      channelCountMode: 'explicit',
      channelInterpretation: 'speakers',
      processorOptions: { wasm, variant, effect: fx.bytes, settings: settingsAt(t, fx), levelDb: 0 },
    });
    const record = { effect: fx.name, from: t, ready: null, nonfinite: 0 };
    s.nodes.push(record);
    node.port.onmessage = (e) => {
      const m = e.data;
      if (m.type === 'ready') record.ready = { variant: m.variant, latency: m.latency };
      else if (m.type === 'error') s.errors.push(`${fx.name} at ${t} s: ${m.message}`);
      else if (m.type === 'meters') record.nonfinite = m.nonfinite;
    };
    signal.connect(node);
    node.connect(ctx.destination);
    s.node = node;
    s.current = fx;
    s.switches++;
  };

  // Settings every stepS of audio and a new effect every switchS, each at a
  // suspension of the render (Chromium's OfflineAudioContext supports suspend).
  let step = 0;
  const schedule = () => {
    step++;
    const t = Math.round(step * stepS * 1000) / 1000;
    if (t * rate >= length) return;
    ctx.suspend(t).then(() => {
      const k = Math.round(t / switchS);
      if (Math.abs(t - k * switchS) < 1e-9) {
        s.connectNode(t);
        s.stats().then((st) => {
          s.progress.push(st);
          console.log(`soak: ${Math.round(st.seconds)} s of audio, ${st.calls} process() calls, ` +
            `${st.overBudget} over budget (max ${st.maxMs} ms), ${st.nonfinite} non-finite, ` +
            `${st.running} processor(s) running, ${st.wasmBytes} bytes of WebAssembly memory; now ${s.current.name}`);
        });
      } else {
        s.node.port.postMessage({ type: 'settings', settings: settingsAt(t, s.current) });
        s.messages++;
      }
      schedule();
      ctx.resume();
    });
  };
  s.connectNode(0);
  schedule();
  // Wait until the first processor reports (its constructor ran in the worklet).
  for (let i = 0; i < 500 && !s.nodes[0].ready && !s.errors.length; i++) await new Promise((r) => setTimeout(r, 10));
  window.__soak = s;
  return { length, effects: effects.map((e) => ({ name: e.name, controls: e.controls.map((c) => c.name) })), errors: s.errors, start: await s.stats() };
}

// Runs in the page: renders, then scans the output.
async function render() {
  const s = window.__soak;
  const t0 = Date.now();
  const buffer = await s.ctx.startRendering();
  const renderMs = Date.now() - t0;
  let nonfinite = 0;
  let peak = 0;
  for (let c = 0; c < buffer.numberOfChannels; c++) {
    const x = buffer.getChannelData(c);
    for (let i = 0; i < x.length; i++) {
      const v = x[i];
      if (!Number.isFinite(v)) nonfinite++;
      else if (Math.abs(v) > peak) peak = Math.abs(v);
    }
  }
  return {
    renderMs,
    frames: buffer.length,
    seconds: buffer.length / buffer.sampleRate,
    outputNonfinite: nonfinite,
    outputPeak: peak,
    switches: s.switches,
    messages: s.messages,
    errors: s.errors,
    nodes: s.nodes,
    progress: s.progress,
  };
}

// ---------------------------------------------------------------- main

function mib(b) {
  return `${(b / 1048576).toFixed(2)} MiB`;
}

function heapLine(h) {
  const w = !h.worklet ? 'not reachable' : h.worklet.error ? h.worklet.error : mib(h.worklet.usedBytes);
  return `page ${mib(h.page.usedBytes)}, worklet scope ${w}`;
}

async function main() {
  const o = options(process.argv.slice(2));
  const wasm = join(REPO, 'build', `wasm-${o.variant}`, `earshot-${o.variant}.wasm`);
  if (!existsSync(wasm)) usage(`${wasm} is missing: cmake --preset wasm-${o.variant} && cmake --build --preset wasm-${o.variant}`);
  const effectNames = readdirSync(join(REPO, 'demos', 'effects')).filter((f) => f.endsWith('.nfx')).sort();
  if (!effectNames.length) usage('no effects in demos/effects');

  const wall0 = Date.now();
  const load0 = loadavg();
  const server = await serve(REPO);
  const browser = await launch();
  let failed = false;
  try {
    const page = await browser.context.newPage();
    const problems = [];
    page.on('console', (m) => {
      if (m.text().startsWith('soak: ')) console.log(m.text());
      else if (m.type() === 'error' || m.type() === 'warning') problems.push(`console ${m.type()}: ${m.text()}`);
    });
    page.on('pageerror', (e) => problems.push(`page error: ${e.message}`));
    await page.route('**/__soak.html', (r) => r.fulfill({ status: 200, contentType: 'text/html', body: '<!doctype html><meta charset="utf-8"><title>earshot soak</title>' }));
    await page.goto(`${server.url}__soak.html`);
    const heap = await heapProbe(browser.context, page);
    page.setDefaultTimeout(0);
    const setup = await page.evaluate(setUp, { minutes: o.minutes, variant: o.variant, effectNames, rate: RATE, stepS: STEP_S, switchS: SWITCH_S });
    const heapStart = await heap.measure();
    console.log(`soak: ${o.minutes} min of audio at ${RATE} Hz, ${o.variant} build, effects ${effectNames.join(', ')}, switching every ${SWITCH_S} s, settings every ${STEP_S * 1000} ms`);
    const r = await page.evaluate(render);
    const heapEnd = await heap.measure(); // after a garbage collection in the page and the worklet
    const st = await page.evaluate(() => window.__soak.stats());
    const wallMs = Date.now() - wall0;
    const budgetMs = (1000 * 128) / RATE;
    const report = {
      command: `node tools/soak.mjs --minutes ${o.minutes} --variant ${o.variant}`,
      variant: o.variant,
      sampleRate: RATE,
      audioSeconds: r.seconds,
      effects: effectNames,
      switches: r.switches,
      settingsMessages: r.messages,
      outputNonfiniteSamples: r.outputNonfinite,
      processorNonfiniteSamples: st.nonfinite,
      coreNonfiniteBlocks: r.nodes.reduce((a, n) => a + n.nonfinite, 0),
      outputPeak: r.outputPeak,
      processCalls: st.calls,
      budgetMs,
      overBudgetCalls: st.overBudget,
      maxCallMs: st.maxMs,
      maxCallAtSecond: st.maxAtSecond,
      callHistogramMs: Object.fromEntries(['0', '1', '2', '3', '4-7', '8-15', '16-63', '64+'].map((k, i) => [k, st.histogram[i]])),
      meanCallMs: st.busyMs / Math.max(1, st.calls),
      clock: st.clock,
      processorsCreated: st.created,
      processorsFailed: st.failed,
      processorsRunningAtEnd: st.running,
      processorsNotCollectedAtEnd: st.alive,
      instancesNotCollectedAtEnd: st.instances,
      wasmBytesHeldAtEnd: st.heldBytes,
      busyShare: st.busyMs / (1000 * r.seconds),
      wasmBytesStart: setup.start.wasmBytes,
      wasmBytesEnd: st.wasmBytes,
      heapStart,
      heapEnd,
      renderSeconds: r.renderMs / 1000,
      wallSeconds: wallMs / 1000,
      loadAverage: { start: load0.map((x) => +x.toFixed(2)), end: loadavg().map((x) => +x.toFixed(2)) },
      errors: [...setup.errors, ...r.errors],
      problems,
      progress: r.progress.map((p) => ({ seconds: p.seconds, calls: p.calls, overBudget: p.overBudget, maxMs: p.maxMs, running: p.running, wasmBytes: p.wasmBytes })),
    };
    const lines = [
      `audio            ${report.audioSeconds.toFixed(1)} s through ${report.switches} processors (${effectNames.length} effects, one per audio-minute), ${report.settingsMessages} settings messages`,
      `non-finite       ${report.outputNonfiniteSamples} output samples (processor outputs: ${report.processorNonfiniteSamples}; blocks the core silenced: ${report.coreNonfiniteBlocks}); output peak ${report.outputPeak.toFixed(4)}`,
      `process() calls  ${report.processCalls}, ${report.overBudgetCalls} over the ${budgetMs.toFixed(3)} ms budget, longest ${report.maxCallMs} ms (at ${report.maxCallAtSecond.toFixed(1)} s), mean ${report.meanCallMs.toFixed(4)} ms (${report.clock}, 1 ms steps)`,
      `call durations   ${Object.entries(report.callHistogramMs).map(([k, v]) => `${k} ms: ${v}`).join(', ')}`,
      `processors       ${report.processorsCreated} created, ${report.processorsFailed} failed, ${report.processorsRunningAtEnd} running at the end (after a garbage collection ${report.processorsNotCollectedAtEnd} processor objects and ${report.instancesNotCollectedAtEnd} WebAssembly instances remain, the instances holding ${mib(report.wasmBytesHeldAtEnd)}); busy ${(100 * report.busyShare).toFixed(2)} % of the audio time`,
      `JS heap start    ${heapLine(heapStart)}`,
      `JS heap end      ${heapLine(heapEnd)}`,
      `wasm memory      start ${mib(report.wasmBytesStart)}, end ${mib(report.wasmBytesEnd)} (running processors' instances)`,
      `time             render ${report.renderSeconds.toFixed(1)} s (${(report.audioSeconds / report.renderSeconds).toFixed(1)}x real time), wall ${report.wallSeconds.toFixed(1)} s; load average ${report.loadAverage.start[0]} at the start, ${report.loadAverage.end[0]} at the end (${os.cpus().length} cores)`,
    ];
    for (const e of report.errors) lines.push(`error            ${e}`);
    for (const p of problems) lines.push(`page             ${p}`);
    console.log(lines.join('\n'));
    if (o.json) writeFileSync(o.json, JSON.stringify(report, null, 1) + '\n');
    failed = report.outputNonfiniteSamples > 0 || report.processorNonfiniteSamples > 0 || report.processorsFailed > 0
      || report.errors.length > 0 || problems.length > 0;
  } finally {
    await browser.close();
    server.stop();
  }
  process.exit(failed ? 1 : 0);
}

main().catch((e) => {
  console.error(`soak: ${e && e.stack ? e.stack : e}`);
  process.exit(1);
});
