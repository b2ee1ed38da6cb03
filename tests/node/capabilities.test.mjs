// Proves worklet/capabilities.js: its SIMD probe validates in Node's V8
// (which has fixed-width SIMD) and is otherwise an ordinary module, the
// variant choice and its reasons for each combination of features, and the
// ?variant= / explicit overrides. Runs without a window.
import assert from 'node:assert/strict';
import { test } from 'node:test';

import { detectCapabilities, SIMD_PROBE, variantFromQuery } from '../../worklet/capabilities.js';

test('the SIMD probe validates in V8 (which has SIMD); the same module without SIMD ops is the control', () => {
  assert.equal(SIMD_PROBE.length, 31);
  assert.ok(WebAssembly.validate(new Uint8Array(SIMD_PROBE)));
  // Same module with result type i32 and body `i32.const 0`: valid everywhere.
  // Its validity shows that only the SIMD part can make the probe fail.
  const plain = [0, 97, 115, 109, 1, 0, 0, 0, 1, 5, 1, 96, 0, 1, 127, 3, 2, 1, 0, 10, 6, 1, 4, 0, 65, 0, 11];
  assert.ok(WebAssembly.validate(new Uint8Array(plain)));
});

test('in Node: WebAssembly with SIMD, no audio, no secure context', () => {
  const c = detectCapabilities();
  assert.equal(c.variant, 'simd');
  assert.equal(c.features.webassembly, true);
  assert.equal(c.features.simd, true);
  assert.equal(c.features.audioWorklet, false);
  assert.equal(c.live, false);
  assert.equal(c.offline, true);
  assert.ok(c.reasons.some((r) => /AudioWorklet/.test(r)));
});

// A stand-in global scope with the features a browser page would have.
function page({ simd = true, wasm = true, worklet = true, secure = true, gum = true, search = '' } = {}) {
  class Ctx {}
  if (worklet) Ctx.prototype.audioWorklet = {};
  const scope = {
    AudioContext: Ctx,
    AudioWorkletNode: worklet ? function AudioWorkletNode() {} : undefined,
    OfflineAudioContext: function OfflineAudioContext() {},
    Worker: function Worker() {},
    isSecureContext: secure,
    navigator: { mediaDevices: gum ? { getUserMedia() {} } : undefined },
    location: { search },
  };
  if (wasm) {
    scope.WebAssembly = {
      Module: WebAssembly.Module,
      Instance: WebAssembly.Instance,
      validate: (b) => (simd ? WebAssembly.validate(b) : !b.includes(253) && WebAssembly.validate(b)),
    };
  }
  return scope;
}

test('a full browser page picks simd and can run live and offline', () => {
  const c = detectCapabilities({ scope: page() });
  assert.equal(c.variant, 'simd');
  assert.equal(c.live, true);
  assert.deepEqual(c.reasons, ['WebAssembly SIMD is available: using the simd build']);
});

test('missing features are each explained', () => {
  let c = detectCapabilities({ scope: page({ simd: false }) });
  assert.equal(c.variant, 'scalar');
  assert.match(c.reasons[0], /SIMD is missing/);
  c = detectCapabilities({ scope: page({ wasm: false }) });
  assert.equal(c.variant, null);
  assert.equal(c.offline, false);
  assert.match(c.reasons.join(' '), /no WebAssembly/);
  c = detectCapabilities({ scope: page({ secure: false }) });
  assert.equal(c.live, false);
  assert.match(c.reasons.join(' '), /secure context/);
  c = detectCapabilities({ scope: page({ gum: false }) });
  assert.equal(c.live, false);
  assert.match(c.reasons.join(' '), /getUserMedia/);
  c = detectCapabilities({ scope: page({ worklet: false }) });
  assert.equal(c.features.audioWorklet, false);
  assert.equal(c.live, false);
});

test('overrides: ?variant= in the page address, the explicit argument wins, simd never forced where missing', () => {
  assert.equal(detectCapabilities({ scope: page({ search: '?variant=scalar' }) }).variant, 'scalar');
  assert.equal(detectCapabilities({ scope: page({ search: '?x=1&variant=scalar#top' }) }).variant, 'scalar');
  assert.equal(detectCapabilities({ scope: page({ search: '?variant=scalar' }), variant: 'simd' }).variant, 'simd');
  assert.equal(detectCapabilities({ scope: page(), url: 'https://host/demo/?variant=scalar' }).variant, 'scalar');
  const forced = detectCapabilities({ scope: page({ simd: false }), variant: 'simd' });
  assert.equal(forced.variant, 'scalar');
  assert.match(forced.reasons[0], /lacks WebAssembly SIMD/);
  const odd = detectCapabilities({ scope: page({ search: '?variant=avx2' }) });
  assert.equal(odd.variant, 'simd');
  assert.match(odd.reasons[0], /ignored variant 'avx2'/);
  assert.equal(variantFromQuery('?a=b'), '');
  assert.equal(variantFromQuery('variant=%73calar'), 'scalar');
});
