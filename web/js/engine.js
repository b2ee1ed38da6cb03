// The page's side of the core: the chosen WebAssembly build (bytes for the
// AudioWorklet, a compiled module for the page), an instance on the page for
// reading effect files, and Workers for rendering and the self-check.
import { loadVariant } from '../worklet/loader.js';
import { fetchBytes, siteUrl } from './site.js';

export class Engine {
  constructor(site, variantName) {
    this.site = site;
    this.variantName = variantName;
    this.wasmUrl = siteUrl(site, site.wasm[variantName]);
    this.wasmBytes = null;
    this.variant = null;
  }

  async load() {
    this.wasmBytes = await fetchBytes(this.wasmUrl, `the ${this.variantName} WebAssembly build`);
    const module = await WebAssembly.compile(this.wasmBytes);
    this.variant = loadVariant(module, { name: this.variantName });
    return this;
  }

  // Reads an effect file: the core's info JSON plus the latency at two common
  // device rates. Throws the core's message for a file it refuses.
  inspect(bytes) {
    const u8 = new Uint8Array(bytes);
    const fx = this.variant.createEffect(u8, 48000);
    const info = fx.info;
    const modelRate = info.model_rate;
    const latencyAt = {};
    fx.destroy();
    for (const rate of [44100, 48000, modelRate]) {
      const f = this.variant.createEffect(u8, rate);
      latencyAt[rate] = f.latency;
      f.destroy();
    }
    return { info, latencyAt };
  }

  worker() {
    return new Worker(new URL('./offline-worker.js', import.meta.url), { type: 'module', name: 'earshot offline' });
  }

  job(extra) {
    return { wasmUrl: this.wasmUrl, variant: this.variantName, siteUrl: this.site.base, ...extra };
  }
}
