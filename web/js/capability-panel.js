// "Your browser": the build chosen for this browser and why, and what the
// page cannot offer here.
import { $, el, clear, status } from './dom.js';

export function showCapabilities(caps) {
  const line = $('variant-line');
  if (!caps.variant) status(line, 'error', 'This browser cannot run the effects (no WebAssembly).');
  else status(line, 'busy', `Loading the ${caps.variant} build…`);
  const list = clear($('variant-reasons'));
  for (const r of caps.reasons) list.appendChild(el('li', {}, r));
  if (!caps.offline) list.appendChild(el('li', {}, 'offline rendering is unavailable'));
}

export function showLoaded(caps, engine) {
  const kb = Math.round(engine.wasmBytes.byteLength / 1024);
  const how = caps.variant === 'simd' ? 'WebAssembly with 128-bit SIMD' : 'plain WebAssembly, no SIMD';
  status($('variant-line'), 'ok', `Running the ${caps.variant} build (${how}, ${kb} kB).`);
  if (caps.variant === 'simd') {
    const link = el('a', { href: '?variant=scalar' }, 'try the scalar build');
    $('variant-reasons').appendChild(el('li', {}, 'both builds give the same samples; ', link));
  } else if (caps.features.simd) {
    $('variant-reasons').appendChild(el('li', {}, 'this browser also runs the ', el('a', { href: '?' }, 'simd build')));
  }
}

export function showLoadFailed(message) {
  status($('variant-line'), 'error', message);
}
