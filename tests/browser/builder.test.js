// `earshot site`: what it writes (files, the native reference; listening tests
// in site-listening.test.js) and how it refuses bad configs (exit code 3 and a message
// naming the file and the field; 2 for a bad command line).
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { existsSync, mkdirSync, readFileSync, rmSync, writeFileSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { FIXTURES, WORK, buildSite, earshotBin, ensureFixtures, mustRun, run } from './helpers.js';

test('the site holds the page, both builds, effects, clips and a reference equal to earshot verify', () => {
  const { out, site, config } = buildSite('builder-test');
  for (const f of ['index.html', 'style.css', 'js/main.js', 'js/offline-worker.js', 'embed.js', 'js/embed-style.js', 'worklet/processor.js',
    'worklet/loader.js', 'worklet/capabilities.js', 'wasm/earshot-simd.wasm', 'wasm/earshot-scalar.wasm'])
    assert.ok(existsSync(join(out, f)), `missing ${f}`);
  assert.equal(site.title, config.title);
  assert.equal(site.listening, undefined, 'no listening tests configured, none in site.json');
  assert.equal(site.clips[0].rate, 48000);
  assert.equal(site.clips[0].channels, 1);
  for (const fx of site.effects) {
    // The effect file is copied unchanged.
    const src = config.effects.find((e) => e.id === fx.id).file;
    assert.deepEqual(readFileSync(join(out, fx.file)), readFileSync(join(WORK, 'builder-test', src)));
    // The reference hash is the one `earshot verify` prints for the native scalar variant.
    const v = JSON.parse(mustRun(earshotBin(), ['verify', join(out, fx.file), '--json']).stdout);
    const scalar = v.variants.find((x) => x.variant === 'scalar');
    assert.equal(fx.reference.output_hash, scalar.hash, fx.id);
    assert.equal(fx.reference.signal_hash, v.signal.hash, fx.id);
    assert.equal(fx.reference.samples, v.signal.samples);
    // The stored output is what was hashed, and the excerpt is its start.
    const data = readFileSync(join(out, fx.reference.data));
    assert.equal(data.length, 4 * fx.reference.samples);
    const f = new Float32Array(data.buffer, data.byteOffset, data.length / 4);
    fx.reference.excerpt_bits.forEach((b, i) => assert.equal(new Uint32Array(f.buffer, f.byteOffset + 4 * i, 1)[0].toString(16).padStart(8, '0'), b));
  }
  assert.deepEqual(site.effects.find((e) => e.id === 'tcn').defaults, { drive: 0.7, tone: -3 });
});

test('a rebuild replaces what the last build wrote and keeps files the site owner added', () => {
  const { out, configPath } = buildSite('builder-rebuild');
  writeFileSync(join(out, 'CNAME'), 'example.org\n');
  writeFileSync(join(out, 'effects', 'stale.nfx'), 'left by hand');
  mustRun(earshotBin(), ['site', configPath, '--out', out, '--allow-root', FIXTURES, '--force', '--quiet']);
  assert.ok(existsSync(join(out, 'CNAME')));
  assert.ok(existsSync(join(out, 'effects', 'stale.nfx')), 'a file the builder did not write is left alone');
  assert.ok(existsSync(join(out, 'index.html')));
});

function tryConfig(name, config, extra = []) {
  ensureFixtures();
  const dir = join(WORK, 'builder-errors');
  mkdirSync(dir, { recursive: true });
  const path = join(dir, `${name}.json`);
  writeFileSync(path, typeof config === 'string' ? config : JSON.stringify(config));
  const out = join(dir, `${name}-out`);
  rmSync(out, { recursive: true, force: true });
  const r = run(earshotBin(), ['site', path, '--out', out, '--allow-root', FIXTURES, ...extra]);
  return { ...r, path, out };
}

const FX = '../fixtures/lstm-12.nfx';
const TCN = '../fixtures/tcn-film.nfx';
const MONO = '../fixtures/mono-48k-i16.wav';

const BAD = [
  ['not-json', '{"title": "x",\n "effects": [}', /not-json\.json: line 2, column 14/],
  ['not-object', '[1, 2]', /the config must be a JSON object, got an array/],
  ['no-title', { effects: [{ file: FX }] }, /no-title\.json: line 1, column 1: title: missing/],
  ['empty-title', { title: '', effects: [{ file: FX }] }, /title: is empty/],
  ['unknown-top', { title: 't', effects: [{ file: FX }], efects: [] }, /unknown field 'efects' \(allowed: version, title,/],
  ['version', { version: 2, title: 't', effects: [{ file: FX }] }, /version: must be 1/],
  ['no-effects', { title: 't' }, /effects: missing/],
  ['empty-effects', { title: 't', effects: [] }, /effects: is empty/],
  ['effect-typo', { title: 't', effects: [{ file: FX, nmae: 'x' }] }, /effects\[0\]: unknown field 'nmae'/],
  ['effect-no-file', { title: 't', effects: [{ name: 'x' }] }, /effects\[0\]\.file: missing/],
  ['effect-missing', { title: 't', effects: [{ file: 'nowhere.nfx' }] }, /effects\[0\]\.file: cannot read effect file '.*nowhere\.nfx': No such file/],
  ['effect-corrupt', { title: 't', effects: [{ file: FX }, { file: '../fixtures/corrupt.nfx' }] }, /effects\[1\]\.file: .*corrupt\.nfx: effect file header: line 1, column 2: Missing a name for object member\./],
  ['dup-id', { title: 't', effects: [{ file: FX }, { file: FX }] }, /effects\[1\]\.id: 'lstm-12' is used by an earlier effect/],
  ['bad-id', { title: 't', effects: [{ file: FX, id: 'a b' }] }, /effects\[0\]\.id: 'a b' may hold only/],
  ['no-control', { title: 't', effects: [{ file: TCN, controls: { drvie: 1 } }] }, /effects\[0\]\.controls\.drvie: the effect '.*' has no control named 'drvie' \(its controls: drive, tone\)/],
  ['control-range', { title: 't', effects: [{ file: TCN, controls: { drive: 1.5 } }] }, /effects\[0\]\.controls\.drive: 1\.5 is refused: .*\(drive takes 0 \.\. 1\)/],
  ['control-type', { title: 't', effects: [{ file: TCN, controls: { drive: 'high' } }] }, /effects\[0\]\.controls\.drive: must be a number, got a string/],
  ['link-scheme', { title: 't', paper: 'javascript:alert(1)', effects: [{ file: FX }] }, /paper: 'javascript:alert\(1\)' is not an http:\/\/ or https:\/\/ address/],
  ['credits-type', { title: 't', credits: 3, effects: [{ file: FX }] }, /credits: must be a string or an array of strings, got a number/],
  ['clip-ext', { title: 't', effects: [{ file: FX }], clips: [{ file: '../fixtures/notes.txt' }] }, /clips\[0\]\.file: '.*notes\.txt': a bundled clip must be a \.wav or \.flac file/],
  ['clip-channels', { title: 't', effects: [{ file: FX }], clips: [{ file: '../fixtures/three-channels.wav' }] }, /clips\[0\]\.file: '.*' has 3 channels/],
  ['listening-type', { title: 't', effects: [{ file: FX }], listening: {} }, /listening: must be a string, got an object/],
  ['long-title', { title: 'x'.repeat(201), effects: [{ file: FX }] }, /title: is 201 characters long, over the limit of 200/],
  // The comparison grid (docs/site.md, "The comparison grid").
  ['grid-no-columns', { title: 't', effects: [{ file: FX }], clips: [{ file: MONO }], grid: {} }, /grid\.columns: missing/],
  ['grid-two-kinds', { title: 't', effects: [{ file: FX, id: 'a' }], clips: [{ file: MONO }], grid: { columns: [{ name: 'x', input: true, effect: 'a' }] } },
    /grid\.columns\[0\]: names more than one of "input", "reference" and "effect"/],
  ['grid-no-kind', { title: 't', effects: [{ file: FX }], clips: [{ file: MONO }], grid: { columns: [{ name: 'x' }] } }, /grid\.columns\[0\]: says what the column plays/],
  ['grid-input-false', { title: 't', effects: [{ file: FX }], clips: [{ file: MONO }], grid: { columns: [{ name: 'x', input: false }] } }, /grid\.columns\[0\]\.input: must be true/],
  ['grid-unknown-effect', { title: 't', effects: [{ file: FX, id: 'a' }], clips: [{ file: MONO }], grid: { columns: [{ name: 'x', effect: 'b' }] } },
    /grid\.columns\[0\]\.effect: no effect has the id 'b' \(the effects: a\)/],
  ['grid-unknown-control', { title: 't', effects: [{ file: TCN, id: 't' }], clips: [{ file: MONO }], grid: { columns: [{ name: 'x', effect: 't', controls: { driv: 1 } }] } },
    /grid\.columns\[0\]\.controls\.driv: the effect 't' has no control named 'driv' \(its controls: drive, tone\)/],
  ['grid-control-range', { title: 't', effects: [{ file: TCN, id: 't' }], clips: [{ file: MONO }], grid: { columns: [{ name: 'x', effect: 't', controls: { drive: 7 } }] } },
    /grid\.columns\[0\]\.controls\.drive: 7 is outside the range of drive/],
  ['grid-controls-on-input', { title: 't', effects: [{ file: FX }], clips: [{ file: MONO }], grid: { columns: [{ name: 'x', input: true, controls: {} }] } },
    /grid\.columns\[0\]\.controls: only an "effect" column has controls/],
  ['grid-unknown-row', { title: 't', effects: [{ file: FX }], clips: [{ file: MONO, id: 'm' }], grid: { rows: ['z'], columns: [{ name: 'x', input: true }] } },
    /grid\.rows\[0\]: no clip has the id 'z' \(the clips: m\)/],
  ['grid-no-clips', { title: 't', effects: [{ file: FX }], grid: { columns: [{ name: 'x', input: true }] } }, /grid: the site has no clips/],
  ['grid-reference-none', { title: 't', effects: [{ file: FX }], clips: [{ file: MONO }], grid: { columns: [{ name: 'x', reference: true }] } },
    /grid\.columns: has a "reference" column but no clip of the grid has a "reference" file/],
  ['grid-flac', { title: 't', effects: [{ file: FX }], clips: [{ file: '../fixtures/stereo-44k.flac', id: 'f' }], grid: { columns: [{ name: 'x', input: true }] } },
    /grid: the clip 'f' uses 'stereo-44k\.flac'; a grid plays WAV files only/],
  ['grid-columns-limit', { title: 't', effects: [{ file: FX }], clips: [{ file: MONO }], grid: { columns: Array.from({ length: 17 }, () => ({ name: 'x', input: true })) } },
    /grid\.columns: has 17 entries, over the limit of 16/],
  ['clip-reference-rate', { title: 't', effects: [{ file: FX }], clips: [{ file: MONO, reference: '../fixtures/live-44k-i16.wav' }] },
    /clips\[0\]\.reference: '.*live-44k-i16\.wav' is 1 channel\(s\) at 44100 Hz; the clip '.*' is 1 at 48000 Hz/],
  ['clip-dup-id', { title: 't', effects: [{ file: FX }], clips: [{ file: MONO, id: 'a' }, { file: '../fixtures/live-44k-i16.wav', id: 'a' }] },
    /clips\[1\]\.id: 'a' is used by an earlier clip/],
];

for (const [name, config, message] of BAD) {
  test(`a bad config is refused with a message naming the field: ${name}`, () => {
    const r = tryConfig(name, config);
    assert.equal(r.status, 3, `exit ${r.status}: ${r.stderr}`);
    assert.match(r.stderr, /^earshot site: /);
    assert.match(r.stderr, message);
    assert.equal(existsSync(r.out), false, 'nothing is written for a refused config');
  });
}

test('bad command lines exit 2 and a foreign --out folder is left untouched', () => {
  const good = { title: 't', effects: [{ file: FX }] };
  let r = tryConfig('no-out', good);
  // tryConfig passes --out; call without it directly.
  r = run(earshotBin(), ['site', r.path]);
  assert.equal(r.status, 2);
  assert.match(r.stderr, /missing --out DIR/);
  r = run(earshotBin(), ['site']);
  assert.equal(r.status, 2);
  assert.match(r.stderr, /missing the site CONFIG file/);
  const foreign = join(WORK, 'builder-errors', 'foreign');
  mkdirSync(foreign, { recursive: true });
  writeFileSync(join(foreign, 'precious.txt'), 'mine');
  r = run(earshotBin(), ['site', tryConfig('good', good).path, '--out', foreign, '--allow-root', FIXTURES, '--force']);
  assert.equal(r.status, 2);
  assert.match(r.stderr, /is not empty and was not made by 'earshot site'/);
  assert.equal(readFileSync(join(foreign, 'precious.txt'), 'utf8'), 'mine');
  r = run(earshotBin(), ['site', tryConfig('good2', good).path, '--out', join(WORK, 'x'), '--allow-root', FIXTURES, '--wasm-simd', '/nonexistent.wasm']);
  assert.equal(r.status, 3);
  assert.match(r.stderr, /no WebAssembly build at '\/nonexistent\.wasm'; build it with 'cmake --preset wasm-simd/);
  assert.ok(statSync(join(WORK, 'builder-errors')).isDirectory());
});
