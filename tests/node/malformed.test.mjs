// Proves that every malformed effect file of the core's rejection list
// (dsp/FORMAT.md, "Rules the loader enforces") is refused in WebAssembly with
// the very text the native core gives (libearshot.so through
// tests/node/native_run), names the fault, and never traps: the instance
// stays usable and still loads and runs a good effect afterwards.
import assert from 'node:assert/strict';
import { readFileSync, rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { test } from 'node:test';

import { createEffect } from '../../worklet/loader.js';
import { effectFiles, runNative, variant, WASM_VARIANTS, WORK } from './env.mjs';
import { appendTensor, build, parse, tensorNames } from './nfx.mjs';

const files = effectFiles({ include: ['generated'] });
const good = readFileSync(files.find((f) => f.name === 'generated/lstm16').path);
const goodF16 = readFileSync(files.find((f) => f.name === 'generated/lstm16_f16').path);
const base = () => parse(good);

function withTensor(f, name, change) {
  const g = { header: structuredClone(f.header), data: Buffer.from(f.data), effect: structuredClone(f.effect) };
  change(g.header[name], g);
  return g;
}

// [label, bytes, pattern the message must match (it names the fault)]
function cases() {
  const f = base();
  const names = tensorNames(f.header);
  const first = names[0];
  const byOffset = [...names].sort((a, b) => f.header[a].data_offsets[0] - f.header[b].data_offsets[0]);
  const [t0, t1] = byOffset;
  const list = [];
  const add = (label, bytes, pattern) => list.push({ label, bytes, pattern });

  add('file shorter than 8 bytes', good.subarray(0, 5), /truncated \(5 bytes/);
  add('truncated inside the tensor data', good.subarray(0, good.length - 64), /offset|data|end|size/i);
  add('truncated inside the header', good.subarray(0, 40), /header length|past the end/i);
  add('header length beyond the file', build(f, { headerLength: good.length }), /past the end/);
  add('header length over 16 MiB', build(f, { headerLength: 1 << 25 }), /16 MiB/);
  add('header length 0', build(f, { headerLength: 0 }), /too small/);
  add('offsets outside the data', build(withTensor(f, t1, (t, g) => {
    const len = t.data_offsets[1] - t.data_offsets[0];
    t.data_offsets = [g.data.length - len + 8, g.data.length + 8];
  })), new RegExp(`${t1.replace(/\./g, '\\.')}.*(offset|data|outside|beyond|past)`, 'i'));
  add('overlapping offsets', build(withTensor(f, t1, (t) => {
    const len = t.data_offsets[1] - t.data_offsets[0];
    const b = f.header[t0].data_offsets[0];
    t.data_offsets = [b, b + len];
  })), /overlap/i);
  add('begin after end', build(withTensor(f, first, (t) => {
    t.data_offsets = [t.data_offsets[1], t.data_offsets[0]];
  })), /offset|begin|end/i);
  add('unknown dtype', build(withTensor(f, first, (t) => { t.dtype = 'Q4'; })), /dtype/);
  add('shape does not match its byte count', build(withTensor(f, first, (t) => { t.shape = [...t.shape, 2]; })),
    /shape|bytes|size/i);
  add('shape does not match the graph', build(withTensor(f, 'head.weight', (t) => { t.shape = [t.shape[1], t.shape[0]]; })),
    /head\.weight.*shape/);
  add('five dimensions', build(withTensor(f, 'head.weight', (t) => { t.shape = [1, 1, 1, 1, 16]; })), /dimension/i);
  add('dimension over 65536', build(appendTensor(f, 'huge', [70000], new Float32Array(70000))), /65536|65 536|dimension/);
  const missing = base();
  delete missing.header['head.bias'];
  add('missing tensor', build(missing), /head\.bias.*missing/);
  add('extra tensor', build(appendTensor(f, 'stray.weight', [2], [1, 2])), /stray\.weight.*not used/);
  add('non-finite F32 weight', build(withTensor(f, 'head.weight', (t, g) => {
    g.data.writeFloatLE(NaN, t.data_offsets[0] + 4);
  })), /head\.weight.*not finite/);
  const h = parse(goodF16);
  const f16name = tensorNames(h.header).find((k) => h.header[k].dtype === 'F16');
  add('infinite F16 weight', build(withTensor(h, f16name, (t, g) => {
    g.data.writeUInt16LE(0x7c00, t.data_offsets[0]);
  })), /not finite/);
  const unknownType = base();
  unknownType.effect.graph.layers[0].type = 'attention';
  add('unknown layer type', build(unknownType), /unknown layer type 'attention'/);
  const tooNew = base();
  tooNew.effect.version = 2;
  add('version too new', build(tooNew), /too new/);
  add('invalid JSON header', build(f, { rawHeaderText: '{"__metadata__": {' }), /effect file header: line 1, column \d+: /);
  add('invalid JSON description', build(f, { rawEffectText: '{"format": "earshot-effect", ' }),
    /effect description: line 1, column \d+: /);
  add('header not an object', build(f, { rawHeaderText: '[1, 2, 3]' }), /object/);
  add('no metadata', build({ header: { 'g.weight': f.header[first] }, data: f.data }, {}), /__metadata__/);
  const wrongFormat = base();
  wrongFormat.effect.format = 'something-else';
  add('wrong format name', build(wrongFormat), /format/);
  const badDefault = base();
  badDefault.effect.controls[0].default = 5;
  add('control default outside its range', build(badDefault), /default/);
  const badRate = base();
  badRate.effect.sample_rate = 1000;
  add('sample rate out of range', build(badRate), /sample_rate/);
  const badWidth = base();
  badWidth.effect.graph.layers[1].in = 3;
  add('layer width mismatch', build(badWidth), /previous stage/);
  const deep = base();
  add('deeply nested JSON (2 million levels)',
    build(deep, { rawEffectText: '['.repeat(2e6) + ']'.repeat(2e6) }), /nesting deeper than 128 levels/);
  return list;
}

test('every malformed file gives the native error text in WASM, names the fault, and never traps', () => {
  const list = cases();
  const paths = list.map((c, i) => {
    const p = join(WORK, `malformed-${process.pid}-${i}.nfx`);
    writeFileSync(p, c.bytes);
    return p;
  });
  const native = runNative(['errors', ...paths]).split('\n').filter(Boolean);
  for (const p of paths) rmSync(p, { force: true });
  assert.equal(native.length, list.length);
  const variants = Object.fromEntries(WASM_VARIANTS.map((v) => [v, variant(v)]));
  const problems = [];
  list.forEach((c, i) => {
    const line = native[i];
    if (!line.startsWith('error ')) {
      problems.push(`${c.label}: native accepted it`);
      return;
    }
    const expected = line.slice(6);
    if (!c.pattern.test(expected)) problems.push(`${c.label}: native message does not name the fault: ${expected}`);
    for (const [name, v] of Object.entries(variants)) {
      let got = null;
      try {
        createEffect(c.bytes, 48000, v).destroy();
      } catch (e) {
        got = e.message;
      }
      if (v.broken) problems.push(`${c.label}: wasm ${name} trapped: ${v.broken.message}`);
      else if (got !== expected) problems.push(`${c.label}: wasm ${name} says ${JSON.stringify(got)}, native ${JSON.stringify(expected)}`);
    }
  });
  assert.deepEqual(problems, [], problems.join('\n'));
  // The same instances still load and run a good effect.
  for (const v of Object.values(variants)) {
    const fx = createEffect(good, 48000, v);
    const y = fx.process(new Float32Array(256).fill(0.25), new Float32Array(256));
    assert.ok(y.every(Number.isFinite) && y.some((s) => s !== 0));
    fx.destroy();
  }
});

test('bad host rates and variant names are refused with the native text', () => {
  const p = join(WORK, `good-${process.pid}.nfx`);
  writeFileSync(p, good);
  for (const [rate, pattern] of [[1000, /host sample rate/], [44100.5, /whole number/], [NaN, /host sample rate/]]) {
    const script = join(WORK, `rate-${process.pid}.txt`);
    writeFileSync(script, `create ${p} ${rate} -\n`);
    const native = runNative(['script', script]).trim();
    assert.ok(native.startsWith('error '), `native accepts rate ${rate}`);
    for (const v of WASM_VARIANTS) {
      assert.throws(() => createEffect(good, rate, variant(v)), (e) => e.message === native.slice(6) && pattern.test(e.message));
    }
  }
  rmSync(p, { force: true });
  rmSync(join(WORK, `rate-${process.pid}.txt`), { force: true });
  // A build asked to run under the other build's name says which build it is.
  const v = variant('scalar');
  v.name = 'simd';
  assert.throws(() => createEffect(good, 48000, v), /variant 'simd' is not in this build \(it is the 'scalar' build\)/);
});
