// "Live input": microphone or line input through the AudioWorklet at the
// device rate (worklet/processor.js; the core resamples to the model rate),
// with echo cancellation, noise suppression and auto gain asked off and the
// settings the browser actually applied shown; meters, latency, the
// worklet's share of its time budget, late renders, and recordings of what
// the effect received and produced.
import { $, el, clear, setText, status } from './dom.js';
import { encodeFloatWav } from './wav.js';
import { count, hz, db, fixed, dbfs, seconds as fmtSeconds } from './format.js';

const ASK = { echoCancellation: false, noiseSuppression: false, autoGainControl: false };

export class LivePanel {
  constructor(engine, controls, caps) {
    this.engine = engine;
    this.controls = controls;
    this.caps = caps;
    this.effect = null;
    this.ctx = null;
    this.stream = null;
    this.source = null;
    this.node = null;
    this.ready = null;
    this.trackSettings = null;
    this.levelDb = Number($('level').value);
    this.status = $('live-status');
    this.lastMeters = null;
    this.recordings = 0;

    if (!caps.live) {
      const why = caps.reasons.filter((r) => /live|microphone|AudioWorklet|secure/.test(r));
      status($('live-unavailable'), 'error', `Live input is not available here: ${why.join('; ') || 'this browser lacks what it needs'}.`);
      $('live-start').disabled = true;
    }
    $('live-start').addEventListener('click', () => this.start());
    $('live-stop').addEventListener('click', () => this.stop('Stopped.'));
    $('level').addEventListener('input', (e) => {
      this.levelDb = Number(e.target.value);
      setText($('level-out'), db(this.levelDb, 0));
      if (this.node) this.node.port.postMessage({ type: 'level', db: this.levelDb });
    });
    $('record').addEventListener('click', () => this.record());
    $('device-select').addEventListener('change', () => {
      if (this.ctx) this.start();
    });
    controls.onChange((s) => {
      if (this.node) this.node.port.postMessage({ type: 'settings', settings: s });
    });
  }

  setEffect(fx) {
    this.effect = fx;
    if (this.ctx) this.connectNode().catch((e) => this.fail(e));
  }

  async start() {
    if (!this.effect) return;
    await this.stop(null);
    $('live-start').disabled = true;
    status(this.status, 'busy', 'Asking for the input…');
    try {
      const deviceId = $('device-select').value;
      const audio = { ...ASK };
      if (deviceId) audio.deviceId = { exact: deviceId };
      this.stream = await navigator.mediaDevices.getUserMedia({ audio, video: false });
      const track = this.stream.getAudioTracks()[0];
      this.trackSettings = track.getSettings ? track.getSettings() : {};
      this.ctx = new AudioContext({ latencyHint: 'interactive' });
      await this.ctx.audioWorklet.addModule(new URL('../worklet/processor.js', import.meta.url));
      this.source = this.ctx.createMediaStreamSource(this.stream);
      await this.connectNode();
      await this.ctx.resume();
      this.listDevices();
      $('live-stop').disabled = false;
      $('live-readout').hidden = false;
      track.addEventListener('ended', () => this.stop('The input went away (device unplugged or permission withdrawn).'));
    } catch (e) {
      this.fail(e);
    }
  }

  // A fresh processor for the current effect (on start and on every effect change).
  async connectNode() {
    const fx = this.effect;
    if (this.node) {
      this.node.port.onmessage = null;
      this.node.port.postMessage({ type: 'stop' });
      this.source.disconnect();
      this.node.disconnect();
      this.node = null;
    }
    // A stereo input (as the browser reports the track) runs through one
    // 2-channel stream, anything else through a mono one: the node mixes its
    // input to exactly that many channels.
    const channels = this.trackSettings && this.trackSettings.channelCount >= 2 ? 2 : 1;
    const node = new AudioWorkletNode(this.ctx, 'earshot-live', {
      numberOfInputs: 1,
      numberOfOutputs: 1,
      outputChannelCount: [2],
      channelCount: channels,
      channelCountMode: 'explicit',
      channelInterpretation: 'speakers',
      processorOptions: {
        wasm: this.engine.wasmBytes,
        variant: this.engine.variantName,
        effect: fx.bytes,
        settings: this.controls.settings(),
        levelDb: this.levelDb,
        channels,
      },
    });
    this.node = node;
    this.ready = null;
    const readyOrError = new Promise((resolve, reject) => {
      node.port.onmessage = (e) => {
        const m = e.data;
        if (m.type === 'ready') {
          this.ready = m;
          resolve(m);
        } else if (m.type === 'error') {
          if (m.fatal) reject(new Error(m.message));
          else status(this.status, 'error', `A setting was refused (the stream goes on): ${m.message}`);
        } else if (m.type === 'meters') {
          this.meters(m);
        } else if (m.type === 'recorded') {
          this.recorded(m);
        }
      };
    });
    node.addEventListener('processorerror', () => this.fail(new Error('the audio processor stopped with an error')));
    this.source.connect(node);
    node.connect(this.ctx.destination);
    const r = await readyOrError;
    status(this.status, 'ok', `Live: ${fx.name} at ${hz(this.ctx.sampleRate)}${this.ctx.sampleRate !== r.modelRate ? ` (the core resamples to ${hz(r.modelRate)} and back)` : ''}.`);
    this.showFacts();
  }

  async listDevices() {
    try {
      const sel = $('device-select');
      const keep = sel.value;
      const devices = (await navigator.mediaDevices.enumerateDevices()).filter((d) => d.kind === 'audioinput');
      clear(sel);
      sel.appendChild(el('option', { value: '' }, 'Default input'));
      devices.forEach((d, i) => sel.appendChild(el('option', { value: d.deviceId }, d.label || `Input ${i + 1}`)));
      sel.value = keep;
    } catch {
      /* the list is a convenience; the default input still works */
    }
  }

  fail(e) {
    const msg = e && e.name === 'NotAllowedError'
      ? 'the browser or you refused access to the input'
      : e && e.name === 'NotFoundError' ? 'no audio input was found' : e && e.message ? e.message : String(e);
    this.stop(null);
    status(this.status, 'error', `Live input failed: ${msg}`);
  }

  async stop(message) {
    if (this.node) {
      this.node.port.onmessage = null;
      this.node.port.postMessage({ type: 'stop' });
      this.node.disconnect();
      this.node = null;
    }
    if (this.stream) for (const t of this.stream.getTracks()) t.stop();
    this.stream = null;
    this.source = null;
    if (this.ctx) {
      const ctx = this.ctx;
      this.ctx = null;
      try { await ctx.close(); } catch { /* already closed */ }
    }
    $('live-start').disabled = !this.caps.live;
    $('live-stop').disabled = true;
    if (message) status(this.status, 'info', message);
  }

  meters(m) {
    this.lastMeters = m;
    const show = (id, peak) => {
      const v = dbfs(peak);
      $(id).value = Math.max(-60, Math.min(0, v));
      setText($(`${id}-out`), Number.isFinite(v) ? `${v.toFixed(1)} dB` : '−∞');
    };
    show('meter-in', m.inPeak);
    show('meter-out', m.outPeak);
    this.showFacts();
  }

  showFacts() {
    if (!this.ctx || !this.ready) return;
    const ctx = this.ctx;
    const r = this.ready;
    const m = this.lastMeters;
    const facts = clear($('live-facts'));
    const add = (k, v) => facts.append(el('dt', {}, k), el('dd', {}, v));
    const s = this.trackSettings || {};
    const onOff = (v) => (v === undefined ? 'not reported' : v ? 'on' : 'off');
    add('Input processing', `echo cancellation ${onOff(s.echoCancellation)}, noise suppression ${onOff(s.noiseSuppression)}, auto gain ${onOff(s.autoGainControl)} (all asked off)`);
    add('Input', `${s.sampleRate ? hz(s.sampleRate) : 'rate not reported'}, ${s.channelCount || '?'} channel(s)${s.sampleSize ? `, ${s.sampleSize}-bit` : ''}; processed as ${r.channels === 2 ? 'stereo (one stream, left and right in lockstep)' : 'mono'}`);
    add('Device rate', `${hz(ctx.sampleRate)}; model ${hz(r.modelRate)}`);
    const base = ctx.baseLatency || 0;
    const out = ctx.outputLatency || 0;
    const model = r.latency / ctx.sampleRate;
    const inLat = typeof s.latency === 'number' ? s.latency : 0;
    add('Latency', `${fixed(1000 * (base + out + model + inLat), 1)} ms = input ${typeof s.latency === 'number' ? fixed(1000 * inLat, 1) : 'not reported'} + context ${fixed(1000 * base, 1)} + output ${fixed(1000 * out, 1)} + effect ${fixed(1000 * model, 2)} ms (${r.latency} samples, resampler)`);
    add('Build', r.variant);
    if (m) {
      add('Time budget used', `${fixed(100 * m.load, 1)} % (highest ${fixed(100 * m.loadPeak, 1)} %) of each render quantum's real time`);
      add('Late renders', `${count(m.late)} (the audio clock fell behind: a likely dropout)`);
      add('Limiter', m.limiterDb < -0.05 ? `reducing by ${fixed(-m.limiterDb, 1)} dB` : 'idle (ceiling −1 dBFS)');
      if (m.nonfinite) add('Non-finite blocks', `${m.nonfinite} (silenced, state reset)`);
      add('Running', fmtSeconds(m.seconds) + (m.recording !== null ? ` · recording ${Math.round(100 * m.recording)} %` : ''));
    }
  }

  record() {
    if (!this.node) return;
    const secs = Number($('record-seconds').value);
    this.node.port.postMessage({ type: 'record', seconds: secs });
    status(this.status, 'busy', `Recording ${secs} s…`);
  }

  recorded(m) {
    const n = ++this.recordings;
    const fx = this.effect;
    const list = $('recordings');
    const rate = m.rate;
    // One Float32Array per channel (the stream's: mono or stereo).
    const add = (channels, what, file) => {
      const url = URL.createObjectURL(encodeFloatWav(channels, rate));
      const shape = channels.length === 2 ? ', stereo' : '';
      list.appendChild(el('li', {}, el('a', { href: url, download: file, 'data-recording': what }, `${what} ${n} (${hz(rate)}${shape}, ${fmtSeconds(channels[0].length / rate)})`)));
    };
    add(m.input, 'Received input', `live-${n}-input.wav`);
    add(m.output, 'Effect output', `live-${n}-${fx.id}.wav`);
    status(this.status, 'ok', `Recording ${n} ready: reproduce it with 'earshot render EFFECT live-${n}-input.wav OUT.wav --keep-latency' and the same controls.`);
  }
}
