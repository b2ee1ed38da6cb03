// Stimulus preparation with the WebAssembly core on the page: rendering a
// clip through an effect, the BS.1534-3 anchors (earshot_anchor), BS.1770-4
// loudness matching (earshot_loudness_match); the stimulus hash is
// js/test-signal.js's fnv1a64.
// Audio here is interleaved Float32Array { data, channels, rate, frames }.

import { AlignedRender, LISTENING_FUNCTIONS } from '../worklet/loader.js';

export function interleave(planar) {
  const ch = planar.length;
  const n = planar[0].length;
  const out = new Float32Array(n * ch);
  for (let c = 0; c < ch; c++) {
    const x = planar[c];
    for (let t = 0; t < n; t++) out[t * ch + c] = x[t];
  }
  return out;
}

export function planar(audio) {
  const { data, channels, frames } = audio;
  const out = [];
  for (let c = 0; c < channels; c++) {
    const x = new Float32Array(frames);
    for (let t = 0; t < frames; t++) x[t] = data[t * channels + c];
    out.push(x);
  }
  return out;
}

// The core's whole-clip functions (worklet/loader.js, through its guarded
// calls) over one interleaved clip.
export class CoreAudio {
  constructor(variant) {
    this.v = variant;
    if (!variant.hasListening()) {
      const missing = LISTENING_FUNCTIONS.filter((f) => typeof variant.exports[f] !== 'function');
      throw new Error(`this WebAssembly build lacks ${missing.join(', ')}; rebuild it from the current sources`);
    }
  }

  loudness(audio) {
    return this.v.loudness(audio.data, audio.channels, audio.rate);
  }

  // A copy of `audio` matched to target LKFS, and the gain applied.
  match(audio, target) {
    const { data, gainDb } = this.v.loudnessMatch(audio.data, audio.channels, audio.rate, target);
    return { audio: { ...audio, data }, gainDb };
  }

  // The low-pass anchor of `audio` with the pass band ending at `passband` Hz.
  anchor(audio, passband) {
    return { ...audio, data: this.v.anchor(audio.data, audio.channels, audio.rate, passband) };
  }

  // `audio` through an effect file at the clip's rate: one fresh stream of
  // the clip's channels (in lockstep, each channel as a mono stream would
  // give it), sample-aligned with the clip (AlignedRender).
  render(effectBytes, controls, audio) {
    const channels = planar(audio);
    let fx = null;
    try {
      fx = this.v.createEffect(effectBytes, audio.rate, { channels: channels.length });
      for (const [k, val] of Object.entries(controls)) fx.setControl(k, val);
      // Jump to the targets: render from a settled state, not mid-ramp.
      fx.reset();
      const r = new AlignedRender(fx, audio.frames ?? channels[0].length);
      r.push(channels);
      const out = r.finish();
      const bad = fx.nonFiniteCount;
      if (bad) throw new Error(`the effect produced non-finite output in ${bad} blocks`);
      return { ...audio, data: interleave(out) };
    } finally {
      if (fx) fx.destroy();
    }
  }
}
