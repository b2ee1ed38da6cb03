// Capability check: which WebAssembly build this engine can run and which
// audio paths the page can offer. Runs in a page, a Worker or Node (no
// window needed).
//
//   const caps = detectCapabilities();            // reads ?variant= from the page URL
//   caps.variant   // "simd", "scalar", or null when WebAssembly is missing
//   caps.reasons   // sentences explaining the choice and every missing feature
//   caps.features  // { webassembly, simd, audioWorklet, secureContext, getUserMedia, worker, offlineAudio }
//
// Override: `?variant=scalar` (or simd) in the page URL, or
// detectCapabilities({ variant: 'scalar' }); the explicit argument wins. An
// override naming simd where SIMD is missing is refused (the module would not
// compile) and says so in reasons.

// The smallest module using a SIMD instruction: (func (result v128)
// i32.const 0, i8x16.splat, i8x16.popcnt). WebAssembly.validate accepts it
// only where fixed-width SIMD is supported (docs/wasm.md).
export const SIMD_PROBE = Object.freeze([
  0, 97, 115, 109, 1, 0, 0, 0, 1, 5, 1, 96, 0, 1, 123, 3, 2, 1, 0, 10, 10, 1, 8, 0, 65, 0, 253, 15, 253, 98, 11,
]);

export const VARIANTS = Object.freeze(['simd', 'scalar']);

// The value of ?variant= in a URL or query string, or '' when absent.
export function variantFromQuery(search) {
  if (typeof search !== 'string') return '';
  const q = search.indexOf('?');
  const query = (q >= 0 ? search.slice(q + 1) : search).split('#')[0];
  for (const part of query.split('&')) {
    const eq = part.indexOf('=');
    const key = eq < 0 ? part : part.slice(0, eq);
    if (key === 'variant') {
      try {
        return decodeURIComponent((eq < 0 ? '' : part.slice(eq + 1)).replace(/\+/g, ' ')).trim();
      } catch {
        return part.slice(eq + 1);
      }
    }
  }
  return '';
}

function probeFeatures(g) {
  const wasm = g.WebAssembly;
  const webassembly = typeof wasm === 'object' && wasm !== null && typeof wasm.validate === 'function' &&
    typeof wasm.Module === 'function' && typeof wasm.Instance === 'function';
  let simd = false;
  if (webassembly) {
    try {
      simd = wasm.validate(new Uint8Array(SIMD_PROBE));
    } catch {
      simd = false;
    }
  }
  const Ctx = g.AudioContext || g.webkitAudioContext;
  const audioWorklet = typeof g.AudioWorkletNode === 'function' && typeof Ctx === 'function' &&
    'audioWorklet' in Ctx.prototype;
  const nav = g.navigator;
  const getUserMedia = !!(nav && nav.mediaDevices && typeof nav.mediaDevices.getUserMedia === 'function');
  return {
    webassembly,
    simd,
    audioWorklet,
    secureContext: g.isSecureContext === true,
    getUserMedia,
    worker: typeof g.Worker === 'function',
    offlineAudio: typeof g.OfflineAudioContext === 'function',
  };
}

// options.variant: explicit override; options.url: a URL or query string to
// read ?variant= from (default: the scope's location); options.scope: the
// global object to inspect (default globalThis; tests pass a stand-in).
export function detectCapabilities(options = {}) {
  const g = options.scope || globalThis;
  const features = probeFeatures(g);
  const reasons = [];

  let asked = '';
  let source = '';
  if (options.variant !== undefined && options.variant !== null && options.variant !== '') {
    asked = String(options.variant).trim();
    source = 'the explicit argument';
  } else {
    const url = options.url !== undefined ? options.url : g.location && g.location.search;
    asked = variantFromQuery(url);
    if (asked) source = 'the page address (?variant=)';
  }
  if (asked && !VARIANTS.includes(asked)) {
    reasons.push(`ignored variant '${asked}' from ${source}: it must be simd or scalar`);
    asked = '';
  }

  let variant = null;
  if (!features.webassembly) {
    reasons.push('this browser has no WebAssembly: effects cannot run here');
  } else if (asked === 'scalar') {
    variant = 'scalar';
    reasons.push(`scalar build chosen by ${source}`);
  } else if (asked === 'simd' && !features.simd) {
    variant = 'scalar';
    reasons.push(`simd build asked for by ${source}, but this engine lacks WebAssembly SIMD: using the scalar build`);
  } else if (asked === 'simd') {
    variant = 'simd';
    reasons.push(`simd build chosen by ${source}`);
  } else if (features.simd) {
    variant = 'simd';
    reasons.push('WebAssembly SIMD is available: using the simd build');
  } else {
    variant = 'scalar';
    reasons.push('WebAssembly SIMD is missing: using the scalar build (slower, same output)');
  }

  if (features.webassembly) {
    if (!features.audioWorklet) reasons.push('no AudioWorklet: live processing is unavailable (offline rendering still works)');
    if (!features.secureContext) reasons.push('not a secure context (https or localhost): microphone and line input are unavailable');
    else if (!features.getUserMedia) reasons.push('no getUserMedia: microphone and line input are unavailable');
    if (!features.worker) reasons.push('no Web Worker: offline rendering would block the page');
  }

  return {
    variant,
    reasons,
    features,
    live: !!variant && features.audioWorklet && features.secureContext && features.getUserMedia,
    offline: !!variant,
  };
}
