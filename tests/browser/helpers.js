// Shared set-up of the browser tests: fixtures, a test site built by
// `earshot site`, a static server (Python's, as tools/serve.sh uses), and
// Debian's Chromium driven by playwright-core (never a downloaded browser).
//
// Environment: EARSHOT_BIN (default build/native/earshot, else build/site/earshot),
// EARSHOT_CHROMIUM (default /usr/bin/chromium).
import { spawn, spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, rmSync, writeFileSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import net from 'node:net';
import { chromium } from 'playwright-core';

export const REPO = resolve(dirname(fileURLToPath(import.meta.url)), '..', '..');
export const WORK = join(REPO, 'build', 'browser-tests');
export const FIXTURES = join(WORK, 'fixtures');
export const ARTIFACTS = join(WORK, 'artifacts');
export const PYTHON = '/usr/bin/python3';

export function earshotBin() {
  if (process.env.EARSHOT_BIN) return resolve(process.env.EARSHOT_BIN);
  for (const p of ['build/native/earshot', 'build/site/earshot']) if (existsSync(join(REPO, p))) return join(REPO, p);
  throw new Error('no earshot binary: build it (cmake --preset native && cmake --build --preset native) or set EARSHOT_BIN');
}

export function run(cmd, args, opts = {}) {
  const r = spawnSync(cmd, args, { cwd: REPO, encoding: 'utf8', maxBuffer: 1 << 26, ...opts });
  if (r.error) throw r.error;
  return r;
}

export function mustRun(cmd, args, opts) {
  const r = run(cmd, args, opts);
  if (r.status !== 0) throw new Error(`${cmd} ${args.join(' ')} failed (${r.status}):\n${r.stdout}\n${r.stderr}`);
  return r;
}

const FIXTURE_FILES = ['lstm-12.nfx', 'tcn-film.nfx', 'markup.nfx', 'corrupt.nfx', 'stereo-44k-f32.wav',
  'mono-48k-i16.wav', 'live-44k-i16.wav', 'three-channels.wav', 'notes.txt', 'stereo-44k.flac',
  'wide-history.nfx', 'wide-history-60mib.nfx', 'live-stereo-44k-i16.wav'];

export function fixture(name) {
  return join(FIXTURES, name);
}

export function ensureFixtures() {
  if (FIXTURE_FILES.every((f) => existsSync(join(FIXTURES, f)))) return;
  mustRun(PYTHON, [join(REPO, 'tests/browser/make_fixtures.py'), FIXTURES]);
}

// The test site: three effects (one with markup in its title and name), one clip.
export const MARKUP_NAME = 'Markup <script>window.__markup=2</script> name';

// extra: more site config fields (e.g. listening, a definition written into
// build/browser-tests/<tag>/ by the caller).
export function buildSite(tag, extra = {}) {
  ensureFixtures();
  const dir = join(WORK, tag);
  mkdirSync(dir, { recursive: true });
  const config = {
    title: 'earshot browser test <em>site</em>',
    description: 'Fixtures for tests/browser.',
    paper: 'https://example.org/paper',
    credits: ['test credits <u>plain</u>'],
    effects: [
      { file: '../fixtures/lstm-12.nfx', id: 'lstm', name: 'Test LSTM' },
      { file: '../fixtures/tcn-film.nfx', id: 'tcn', name: 'Test TCN', controls: { drive: 0.7, tone: -3 } },
      { file: '../fixtures/markup.nfx', id: 'markup', name: MARKUP_NAME },
    ],
    clips: [{ file: '../fixtures/mono-48k-i16.wav', name: 'Mono clip' }],
    ...extra,
  };
  const configPath = join(dir, 'site-config.json');
  writeFileSync(configPath, JSON.stringify(config, null, 1));
  const out = join(dir, 'site');
  // The fixtures sit beside the config's folder: --allow-root opts them in (docs/site.md);
  // --force replaces the site an earlier run built here.
  mustRun(earshotBin(), ['site', configPath, '--out', out, '--allow-root', FIXTURES, '--force', '--quiet']);
  return { dir, out, config, configPath, site: JSON.parse(readFileSync(join(out, 'site.json'), 'utf8')) };
}

function freePort() {
  return new Promise((res, rej) => {
    const s = net.createServer();
    s.unref();
    s.on('error', rej);
    s.listen(0, '127.0.0.1', () => {
      const { port } = s.address();
      s.close(() => res(port));
    });
  });
}

// python3 -m http.server on a free port; resolves { url, stop }.
export async function serve(dir) {
  const port = await freePort();
  const child = spawn('python3', ['-m', 'http.server', String(port), '--bind', '127.0.0.1', '--directory', dir], {
    stdio: ['ignore', 'ignore', 'pipe'],
  });
  let stderr = '';
  child.stderr.on('data', (d) => { stderr += d; });
  const url = `http://localhost:${port}/`;
  for (let i = 0; i < 100; i++) {
    if (child.exitCode !== null) throw new Error(`the static server stopped: ${stderr}`);
    const ok = await fetch(url).then((r) => r.ok, () => false);
    if (ok) return { url, stop: () => child.kill('SIGTERM') };
    await new Promise((r) => setTimeout(r, 100));
  }
  child.kill('SIGTERM');
  throw new Error(`the static server did not answer on ${url}: ${stderr}`);
}

export const CHROMIUM_FLAGS = ['--no-sandbox', '--disable-gpu', '--disable-background-networking',
  '--disable-component-update', '--disable-sync', '--no-first-run', '--disable-quic'];

// A fresh profile per launch. extraArgs: e.g. the fake capture device flags.
export async function launch({ extraArgs = [], permissions = [], viewport = { width: 1280, height: 900 } } = {}) {
  const executablePath = process.env.EARSHOT_CHROMIUM || '/usr/bin/chromium';
  if (!existsSync(executablePath)) throw new Error(`no Chromium at ${executablePath}: apt-get install chromium`);
  const profile = mkdtempSync(join(tmpdir(), 'earshot-chromium-'));
  const context = await chromium.launchPersistentContext(profile, {
    executablePath,
    headless: true,
    args: [...CHROMIUM_FLAGS, ...extraArgs],
    permissions,
    acceptDownloads: true,
    viewport,
  });
  const close = async () => {
    await context.close();
    rmSync(profile, { recursive: true, force: true });
  };
  return { context, close };
}

// A page that records console errors and uncaught exceptions.
export async function openPage(context, url) {
  const page = await context.newPage();
  const problems = [];
  page.on('console', (m) => {
    if (m.type() === 'error' || m.type() === 'warning') problems.push(`console ${m.type()}: ${m.text()}`);
  });
  page.on('pageerror', (e) => problems.push(`page error: ${e.message}`));
  page.on('requestfailed', (r) => problems.push(`request failed: ${r.url()} ${r.failure() && r.failure().errorText}`));
  await page.goto(url);
  return { page, problems };
}

// Waits for the self-check of the effect with picker key `key` (any effect
// when omitted) to finish.
export async function waitForCheck(page, key = null, timeout = 60000) {
  const sel = key ? `#check-status[data-effect="${key}"]` : '#check-status';
  await page.waitForSelector(['pass', 'fail', 'none'].map((s) => `${sel}[data-state=${s}]`).join(', '), { timeout });
  return { state: await page.getAttribute('#check-status', 'data-state'), text: await page.textContent('#check-status') };
}

// Saves a download to ARTIFACTS/name and returns the path.
export async function download(page, clickSelector, name) {
  mkdirSync(ARTIFACTS, { recursive: true });
  const [dl] = await Promise.all([page.waitForEvent('download'), page.click(clickSelector)]);
  const path = join(ARTIFACTS, name);
  await dl.saveAs(path);
  return path;
}

// Reads WAV files with SciPy (an independent reader) and compares the sample
// bits: { same, shapes, firstDiff, maxAbs }.
export function compareWavBits(a, b, { prefix = false } = {}) {
  const code = `
import json, sys, numpy as np, scipy.io.wavfile as w, warnings
warnings.simplefilter("ignore")
ra, a = w.read(sys.argv[1]); rb, b = w.read(sys.argv[2])
if ${prefix ? 'True' : 'False'}:
    n = min(len(a), len(b)); a = a[:n]; b = b[:n]
res = {"rates": [ra, rb], "shapes": [list(a.shape), list(b.shape)], "dtypes": [str(a.dtype), str(b.dtype)]}
if a.shape == b.shape and a.dtype == b.dtype:
    d = np.flatnonzero(a.reshape(-1).view(np.uint8) != b.reshape(-1).view(np.uint8))
    res["same"] = bool(d.size == 0) and ra == rb
    res["firstDiff"] = int(d[0] // a.itemsize) if d.size else None
    res["maxAbs"] = float(np.max(np.abs(a.astype(np.float64) - b.astype(np.float64)))) if a.size else 0.0
else:
    res["same"] = False
print(json.dumps(res))
`;
  const r = mustRun(PYTHON, ['-c', code, a, b]);
  return JSON.parse(r.stdout);
}

// A scratch path, empty: a file an earlier run left there is removed, so a
// tool that refuses to overwrite (earshot render without --force) still runs.
export function tmpFile(name) {
  mkdirSync(join(WORK, 'tmp'), { recursive: true });
  const path = join(WORK, 'tmp', name);
  rmSync(path, { force: true });
  return path;
}
