// `earshot site` with a listening test definition ("listening" in the site
// config): it copies the definition with site paths and every file it names,
// refuses bad definitions with a message naming the definition file and the
// field, and refuses them the same way the listening page does (the page's own
// parser, web/js/listen-config.js, runs here on the same inputs).
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { existsSync, mkdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { FIXTURES, REPO, WORK, earshotBin, ensureFixtures, mustRun, run } from './helpers.js';
import { parseConfig } from '../../web/js/listen-config.js';

const DIR = join(WORK, 'site-listening');

// 16-bit PCM WAV (RIFF layout: Microsoft/IBM multimedia data formats, 1991;
// common practice, no source beyond that).
function writeWav(path, rate, channels, frames, sample) {
  const data = Buffer.alloc(frames * channels * 2);
  for (let i = 0; i < frames; i++)
    for (let c = 0; c < channels; c++)
      data.writeInt16LE(Math.round(Math.max(-1, Math.min(1, sample(i / rate, c))) * 32767), 2 * (i * channels + c));
  const h = Buffer.alloc(44);
  h.write('RIFF', 0); h.writeUInt32LE(36 + data.length, 4); h.write('WAVE', 8);
  h.write('fmt ', 12); h.writeUInt32LE(16, 16); h.writeUInt16LE(1, 20); h.writeUInt16LE(channels, 22);
  h.writeUInt32LE(rate, 24); h.writeUInt32LE(rate * channels * 2, 28); h.writeUInt16LE(channels * 2, 32); h.writeUInt16LE(16, 34);
  h.write('data', 36); h.writeUInt32LE(data.length, 40);
  writeFileSync(path, Buffer.concat([h, data]));
}

const tone = (f) => (t) => 0.3 * Math.sin(2 * Math.PI * f * t) * Math.exp(-t);

function fixtures() {
  ensureFixtures();
  mkdirSync(join(DIR, 'audio'), { recursive: true });
  mkdirSync(join(DIR, 'other'), { recursive: true });
  writeWav(join(DIR, 'audio', 'Ref Take 1.wav'), 48000, 1, 72000, tone(220));
  writeWav(join(DIR, 'audio', 'dry.wav'), 48000, 1, 72000, tone(330));
  writeWav(join(DIR, 'other', 'dry.wav'), 48000, 1, 72000, tone(440)); // same name, other file
  writeWav(join(DIR, 'audio', 'silent.wav'), 48000, 1, 72000, () => 0);
  writeWav(join(DIR, 'audio', 'short.wav'), 48000, 1, 9600, tone(220)); // 0.2 s
  writeWav(join(DIR, 'audio', 'longer.wav'), 48000, 1, 90000, tone(220));
  writeWav(join(DIR, 'audio', 'stereo.wav'), 48000, 2, 72000, tone(220));
  writeWav(join(DIR, 'audio', 'rate44.wav'), 44100, 1, 66150, tone(220));
  writeFileSync(join(DIR, 'audio', 'notes.wav'), 'not audio');
}

function mushra(extra = {}) {
  return {
    id: 'm', type: 'mushra', target_lufs: -23,
    conditions: [{ id: 'ref', role: 'reference' }, { id: 'net' }, { id: 'plain' }],
    items: [{ id: 'one', stimuli: {
      ref: { file: 'audio/Ref Take 1.wav' },
      net: { effect: 'tcn', clip: 'audio/dry.wav', controls: { drive: 0.7, tone: 3 } },
      plain: { clip: '../fixtures/mono-48k-i16.wav' }, // the site's bundled clip
    } }],
    ...extra,
  };
}

function definition(tests) {
  return { format: 'earshot-listening-tests', version: 1, title: 'Builder test', tests };
}

// Writes the site config and the definition into DIR and runs the builder.
function build(name, def) {
  fixtures();
  const defPath = join(DIR, `${name}.listening.json`);
  writeFileSync(defPath, typeof def === 'string' ? def : JSON.stringify(def, null, 1));
  const config = {
    title: 'Listening builder test',
    effects: [{ file: '../fixtures/lstm-12.nfx', id: 'lstm' }, { file: '../fixtures/tcn-film.nfx', id: 'tcn' }],
    clips: [{ file: '../fixtures/mono-48k-i16.wav' }],
    listening: `${name}.listening.json`,
  };
  const configPath = join(DIR, `${name}.site.json`);
  writeFileSync(configPath, JSON.stringify(config));
  const out = join(DIR, `${name}-out`);
  rmSync(out, { recursive: true, force: true });
  return { ...run(earshotBin(), ['site', configPath, '--out', out, '--allow-root', FIXTURES]), out, defPath, configPath };
}

test('the site gets listening.json with site paths, the files it names, and a summary in site.json', () => {
  const def = definition([
    mushra(),
    { id: 'x', type: 'abx', target_lufs: -20, trials: 4, conditions: [{ id: 'a' }, { id: 'b' }], pairs: [['a', 'b']],
      items: [{ id: 'one', stimuli: { a: { effect: 'lstm', clip: 'other/dry.wav' }, b: { file: 'audio/dry.wav' } } }] },
  ]);
  const r = build('good', def);
  assert.equal(r.status, 0, r.stderr);
  assert.match(r.stdout, /listening tests: 2 in listening\.json \(3 file\(s\) copied to listening\/\), page listen\.html/);
  const written = JSON.parse(readFileSync(join(r.out, 'listening.json'), 'utf8'));
  const s = written.tests[0].items[0].stimuli;
  assert.equal(s.ref.file, 'listening/ref-take-1.wav');
  assert.equal(s.net.clip, 'listening/dry.wav');
  assert.deepEqual(s.net.controls, { drive: 0.7, tone: 3 });
  assert.equal(s.plain.clip, 'clips/mono-48k-i16.wav', 'a bundled clip is named by its site path, not copied again');
  const x = written.tests[1].items[0].stimuli;
  assert.equal(x.a.clip, 'listening/dry-2.wav', 'two files of one name get two names');
  assert.equal(x.b.file, 'listening/dry.wav', 'one file named twice is copied once');
  // Byte-for-byte copies of the sources.
  assert.deepEqual(readFileSync(join(r.out, 'listening/ref-take-1.wav')), readFileSync(join(DIR, 'audio/Ref Take 1.wav')));
  assert.deepEqual(readFileSync(join(r.out, 'listening/dry.wav')), readFileSync(join(DIR, 'audio/dry.wav')));
  assert.deepEqual(readFileSync(join(r.out, 'listening/dry-2.wav')), readFileSync(join(DIR, 'other/dry.wav')));
  assert.equal(existsSync(join(r.out, 'listening/mono-48k-i16.wav')), false);
  // Everything else in the definition is unchanged.
  const src = structuredClone(def);
  src.tests[0].items[0].stimuli = s;
  src.tests[1].items[0].stimuli = x;
  assert.deepEqual(written, src);
  // The page's parser accepts what the builder wrote.
  const parsed = parseConfig(written);
  assert.deepEqual(parsed.tests.map((t) => t.id), ['m', 'x']);
  const site = JSON.parse(readFileSync(join(r.out, 'site.json'), 'utf8'));
  assert.deepEqual(site.listening, {
    file: 'listening.json', page: 'listen.html', title: 'Builder test',
    tests: [{ id: 'm', type: 'mushra', title: 'm' }, { id: 'x', type: 'abx', title: 'x' }],
  });
  for (const f of ['listen.html', 'listen.css', 'js/listen-main.js', 'js/listen-config.js'])
    assert.ok(existsSync(join(r.out, f)), `missing ${f}`);
  // A rebuild without listening tests removes what the last build wrote for them.
  const config = JSON.parse(readFileSync(r.configPath, 'utf8'));
  delete config.listening;
  writeFileSync(r.configPath, JSON.stringify(config));
  mustRun(earshotBin(), ['site', r.configPath, '--out', r.out, '--allow-root', FIXTURES, '--force', '--quiet']);
  assert.equal(existsSync(join(r.out, 'listening.json')), false);
  assert.equal(existsSync(join(r.out, 'listening')), false);
  assert.equal(JSON.parse(readFileSync(join(r.out, 'site.json'), 'utf8')).listening, undefined);
});

const stim = (stimuli) => definition([mushra({ items: [{ id: 'one', stimuli: { ref: { file: 'audio/Ref Take 1.wav' }, net: { effect: 'tcn', clip: 'audio/dry.wav' }, plain: { clip: 'audio/dry.wav' }, ...stimuli } }] })]);

// [name, definition, the builder's message, does the page refuse it too (and
// with which field)]. The page cannot see files or effects, so those are the
// builder's alone.
const BAD = [
  ['not-json', '{"format": "earshot-listening-tests",\n "tests": [}', /not-json\.listening\.json: line 2, column 12/, null],
  ['format', { ...definition([mushra()]), format: 'x' }, /format: must be "earshot-listening-tests"/, 'format'],
  ['version', { ...definition([mushra()]), version: 2 }, /version: is 2; the listening page reads version 1/, 'version'],
  ['no-tests', definition([]), /tests: must be a non-empty array/, 'tests'],
  ['top-typo', { ...definition([mushra()]), tittle: 'x' }, /: unknown field 'tittle' \(allowed: format, version, title, tests\)/, null],
  ['type', definition([mushra({ type: 'rank' })]), /tests\[0\]\.type: 'rank' is not one of mushra, abx, ab/, 'tests[0].type'],
  ['id', definition([mushra({ id: 'a b' })]), /tests\[0\]\.id: 'a b' may hold only letters, digits/, 'tests[0].id'],
  ['target', definition([mushra({ target_lufs: 3 })]), /tests\[0\]\.target_lufs: must be a number from -70 to 0 \(LKFS\), got 3/, 'tests[0].target_lufs'],
  ['post-http', definition([mushra({ post: 'http://example.org/r' })]), /tests\[0\]\.post: results are only sent to an https address/, 'tests[0].post'],
  ['field-of-other-type', definition([mushra({ trials: 4 })]), /tests\[0\]: unknown field 'trials'/, null],
  ['no-reference', definition([mushra({ conditions: [{ id: 'ref' }, { id: 'net' }, { id: 'plain' }] })]), /tests\[0\]\.conditions: a MUSHRA test needs a condition with role "reference"/, 'tests[0].conditions'],
  ['two-references', definition([mushra({ conditions: [{ id: 'ref', role: 'reference' }, { id: 'net', role: 'reference' }, { id: 'plain' }] })]), /tests\[0\]\.conditions: has more than one reference/, 'tests[0].conditions'],
  ['anchor-role', definition([mushra({ conditions: [{ id: 'ref', role: 'reference' }, { id: 'net', role: 'anchor-low' }, { id: 'plain' }] })]), /tests\[0\]\.conditions\[1\]\.role: must be 'reference' or 'test'/, 'tests[0].conditions[1].role'],
  ['anchor-name', definition([mushra({ conditions: [{ id: 'ref', role: 'reference' }, { id: 'lp3500' }] })]), /'lp3500' is the name of a generated anchor/, 'tests[0].conditions'],
  ['too-many', definition([mushra({ conditions: [{ id: 'ref', role: 'reference' }, ...Array.from({ length: 10 }, (_, i) => ({ id: `c${i}` }))] })]), /13 stimuli per trial \(anchors included\) is over the 12 of ITU-R BS\.1534-3/, 'tests[0].conditions'],
  ['dup-condition', definition([mushra({ conditions: [{ id: 'ref', role: 'reference' }, { id: 'net' }, { id: 'net' }] })]), /condition 'net' is declared twice/, 'tests[0].conditions'],
  ['missing-stimulus', definition([mushra({ items: [{ id: 'one', stimuli: { ref: { file: 'audio/dry.wav' }, net: { file: 'audio/dry.wav' } } }] })]), /tests\[0\]\.items\[0\]\.stimuli: has no stimulus for condition 'plain'/, 'tests[0].items[0].stimuli'],
  ['undeclared-stimulus', stim({ other: { file: 'audio/dry.wav' } }), /tests\[0\]\.items\[0\]\.stimuli\.other: 'other' is not a declared condition/, 'tests[0].items[0].stimuli.other'],
  ['file-and-effect', stim({ net: { file: 'audio/dry.wav', effect: 'tcn' } }), /stimuli\.net: unknown field 'effect' \(allowed: file\)/, 'tests[0].items[0].stimuli.net'],
  ['control-type', stim({ net: { effect: 'tcn', clip: 'audio/dry.wav', controls: { drive: 'hot' } } }), /stimuli\.net\.controls\.drive: must be a number, got "hot"/, 'tests[0].items[0].stimuli.net.controls.drive'],
  ['abx-pairs', definition([{ id: 'x', type: 'abx', target_lufs: -23, conditions: [{ id: 'a' }, { id: 'b' }], pairs: [['a', 'c']], items: [] }]), /tests\[0\]\.pairs\[0\]: 'c' is not a declared condition \(a, b\)/, 'tests[0].pairs[0]'],
  ['abx-trials', definition([{ id: 'x', type: 'abx', target_lufs: -23, trials: 0, conditions: [{ id: 'a' }, { id: 'b' }], pairs: [['a', 'b']], items: [] }]), /tests\[0\]\.trials: must be a whole number of ABX trials per pair and item, 1 \.\. 100, got 0/, 'tests[0].trials'],
  ['ab-repeats', definition([{ id: 'p', type: 'ab', target_lufs: -23, repeats: 21, conditions: [{ id: 'a' }, { id: 'b' }], pairs: [['a', 'b']], items: [] }]), /tests\[0\]\.repeats: must be a whole number of A\/B trials per pair and item, 1 \.\. 20, got 21/, 'tests[0].repeats'],
  ['item-title', definition([mushra({ items: [{ ...mushra().items[0], title: 7 }] })]), /tests\[0\]\.items\[0\]\.title: must be a non-empty string, got 7/, 'tests[0].items[0].title'],
  ['item-typo', definition([mushra({ items: [{ ...mushra().items[0], titel: 'Tone' }] })]), /tests\[0\]\.items\[0\]: unknown field 'titel' \(allowed: id, title, stimuli\)/, null],
  ['dup-item', definition([mushra({ items: [mushra().items[0], mushra().items[0]] })]), /tests\[0\]\.items: item 'one' is declared twice/, 'tests[0].items'],
  ['dup-test', definition([mushra(), mushra()]), /tests: test id 'm' is used twice/, 'tests'],
  // The builder's own checks: effects, controls and audio files.
  ['no-effect', stim({ net: { effect: 'wavenet', clip: 'audio/dry.wav' } }), /stimuli\.net\.effect: 'wavenet' is not an effect of the site \(lstm, tcn\)/, null],
  ['no-control', stim({ net: { effect: 'tcn', clip: 'audio/dry.wav', controls: { drvie: 1 } } }), /stimuli\.net\.controls\.drvie: the effect 'tcn' has no control named 'drvie' \(its controls: drive, tone\)/, null],
  ['control-range', stim({ net: { effect: 'tcn', clip: 'audio/dry.wav', controls: { tone: 20 } } }), /stimuli\.net\.controls\.tone: 20 is outside -12 \.\. 12/, null],
  ['no-file', stim({ ref: { file: 'audio/nowhere.wav' } }), /stimuli\.ref\.file: 'audio\/nowhere\.wav': no such file/, null],
  ['absolute', stim({ ref: { file: '/etc/passwd' } }), /stimuli\.ref\.file: '\/etc\/passwd' must be a path relative to the definition's folder/, null],
  ['not-audio', stim({ ref: { file: 'audio/notes.wav' } }), /stimuli\.ref\.file: cannot read audio file '.*notes\.wav'/, null],
  ['flac', stim({ ref: { file: '../fixtures/stereo-44k.flac' } }), /stimuli\.ref\.file: '\.\.\/fixtures\/stereo-44k\.flac' is not a WAV file; the listening page reads WAV only/, null],
  ['channels', stim({ ref: { file: '../fixtures/three-channels.wav' } }), /stimuli\.ref\.file: '.*three-channels\.wav' has 3 channels; the listening page plays mono or stereo/, null],
  ['short', stim({ ref: { file: 'audio/short.wav' } }), /stimuli\.ref\.file: 'audio\/short\.wav' lasts 0\.2 s, shorter than one 0\.4 s block of ITU-R BS\.1770-4/, null],
  ['silent', stim({ ref: { file: 'audio/silent.wav' } }), /stimuli\.ref\.file: 'audio\/silent\.wav' is silent \(no 400 ms block above -70 LKFS\)/, null],
  ['length', stim({ plain: { file: 'audio/longer.wav' } }), /stimuli\.plain: has frames 90000 but the stimulus of 'ref' has 72000; all stimuli of an item must match/, null],
  ['rate', stim({ plain: { file: 'audio/rate44.wav' } }), /stimuli\.plain: has sample rate 44100 but the stimulus of 'ref' has 48000/, null],
  ['item-channels', stim({ plain: { file: 'audio/stereo.wav' } }), /stimuli\.plain: has channels 2 but the stimulus of 'ref' has 1/, null],
];

for (const [name, def, message, pageField] of BAD) {
  test(`a bad listening test definition is refused, naming the field: ${name}`, () => {
    const r = build(name, def);
    assert.equal(r.status, 3, `exit ${r.status}: ${r.stderr}`);
    assert.match(r.stderr, new RegExp(`^earshot site: ${r.defPath.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}: `));
    // Every refusal reads like the shared JSON reader's: file, line and column, field.
    assert.match(r.stderr, new RegExp(`^earshot site: ${r.defPath.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}: line \\d+, column \\d+: `));
    assert.match(r.stderr, message);
    assert.equal(existsSync(r.out), false, 'nothing is written for a refused definition');
    if (pageField) {
      // The page refuses it too, at the same field.
      assert.throws(() => parseConfig(def), (e) => e.message.startsWith(`listening.json: ${pageField}: `), `the page accepts ${name}`);
    }
  });
}

test('a listening field that names no file, is not a string, or is misspelt is refused', () => {
  let r = build('missing', definition([mushra()]));
  assert.equal(r.status, 0, r.stderr);
  const config = JSON.parse(readFileSync(r.configPath, 'utf8'));
  config.listening = 'nowhere.json';
  writeFileSync(r.configPath, JSON.stringify(config));
  r = run(earshotBin(), ['site', r.configPath, '--out', join(DIR, 'missing-2'), '--allow-root', FIXTURES]);
  assert.equal(r.status, 3);
  assert.match(r.stderr, /missing\.site\.json: line \d+, column \d+: listening: no listening test definition at '.*nowhere\.json'/);
  config.listening = 3;
  writeFileSync(join(DIR, 'missing.site.json'), JSON.stringify(config));
  r = run(earshotBin(), ['site', join(DIR, 'missing.site.json'), '--out', join(DIR, 'missing-2'), '--allow-root', FIXTURES]);
  assert.equal(r.status, 3);
  assert.match(r.stderr, /listening: must be a string, got a number/);
  delete config.listening;
  config.listening_tests = [];
  writeFileSync(join(DIR, 'missing.site.json'), JSON.stringify(config));
  r = run(earshotBin(), ['site', join(DIR, 'missing.site.json'), '--out', join(DIR, 'missing-2'), '--allow-root', FIXTURES]);
  assert.equal(r.status, 3);
  assert.match(r.stderr, /unknown field 'listening_tests' \(allowed: .*, listening, grid\)/);
  assert.equal(existsSync(join(DIR, 'missing-2')), false);
});

test('the bundled demo definition builds: circuit references copied, dry clips shared with the site', () => {
  const out = join(DIR, 'demo-out');
  rmSync(out, { recursive: true, force: true });
  mustRun(earshotBin(), ['site', 'demos/site.json', '--out', out, '--quiet']);
  const written = JSON.parse(readFileSync(join(out, 'listening.json'), 'utf8'));
  const m = written.tests.find((t) => t.id === 'clipper-mushra');
  assert.equal(m.items[0].stimuli.circuit.file, 'listening/melody-circuit.wav');
  assert.equal(m.items[0].stimuli.lstm.clip, 'clips/melody.wav');
  assert.deepEqual(readFileSync(join(out, 'listening/melody-circuit.wav')), readFileSync(join(REPO, 'demos/clips/melody-circuit.wav')));
  assert.deepEqual(readFileSync(join(out, 'clips/melody.wav')), readFileSync(join(REPO, 'demos/clips/melody.wav')));
  assert.equal(parseConfig(written).tests.length, 3);
});
