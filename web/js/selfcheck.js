// "Self-check": renders the standard test signal through the chosen effect in
// this browser (in a Worker, with the page's build) and compares the output
// hash with the native one the site builder stored. A new choice cancels a
// check still running.
import { $, el, clear, status, setText } from './dom.js';
import { count } from './format.js';

// The compact verdict at the top of the page (a link to the panel): state
// running, pass, fail or none, in words and a mark, never in colour alone.
const BADGE = { running: '…', pass: '✓', fail: '✗', none: '?' };
function badge(state, text) {
  const b = $('check-badge');
  b.hidden = false;
  b.dataset.state = state;
  setText(b.querySelector('.badge-mark'), BADGE[state]);
  setText($('check-badge-text'), text);
}

export class SelfCheck {
  constructor(engine) {
    this.engine = engine;
    this.worker = null;
    this.seq = 0;
    this.last = null;
  }

  run(fx) {
    if (this.worker) this.worker.terminate();
    const id = ++this.seq;
    const line = $('check-status');
    const facts = $('check-facts');
    facts.hidden = true;
    status(line, 'busy', `Checking ${fx.name}: rendering the test signal in this browser…`);
    line.dataset.state = 'running';
    line.dataset.effect = fx.key;
    badge('running', `Self-check of ${fx.name} running`);
    const w = this.engine.worker();
    this.worker = w;
    const ref = fx.entry ? fx.entry.reference : null;
    w.onmessage = (e) => {
      const m = e.data;
      if (m.id !== id) return;
      w.terminate();
      if (this.worker === w) this.worker = null;
      if (m.type === 'failed') {
        line.dataset.state = 'fail';
        status(line, 'error', `Self-check could not run: ${m.message}`);
        badge('fail', `Self-check of ${fx.name} could not run`);
        return;
      }
      this.show(fx, m.result);
    };
    w.onerror = (e) => {
      line.dataset.state = 'fail';
      status(line, 'error', `Self-check could not run: ${e.message || 'the worker failed to start'}`);
      badge('fail', `Self-check of ${fx.name} could not run`);
    };
    // A copy: the page keeps its bytes for the worklet and later renders.
    w.postMessage(this.engine.job({ type: 'check', id, effect: fx.bytes.slice(0), reference: ref }));
  }

  show(fx, r) {
    this.last = r;
    const line = $('check-status');
    const facts = clear($('check-facts'));
    const add = (k, v) => facts.append(el('dt', {}, k), el('dd', {}, v));
    add('Test signal', `${count(r.samples)} samples at ${count(r.rate)} Hz (${r.seconds} s), controls at the file's defaults`);
    add('Build in this browser', r.variant);
    add('Browser output hash', r.outputHash);
    if (r.reference) add(`Native output hash (${r.reference.variant})`, r.reference.outputHash);
    add('Time in this browser', `${r.elapsedMs} ms`);
    if (r.nonfinite) add('Non-finite blocks', String(r.nonfinite));
    facts.hidden = false;
    if (r.pass === null) {
      line.dataset.state = 'none';
      badge('none', `${fx.name}: no native reference to check against`);
      status(line, 'info', `No native reference for this file (it was not part of the site). Its output hash here is ${r.outputHash}; compare it with the scalar hash of 'earshot verify FILE --json'.`);
    } else if (r.pass) {
      line.dataset.state = 'pass';
      badge('pass', `${fx.name}: same samples as native (${r.variant} build)`);
      status(line, 'ok', `Pass: all ${count(r.samples)} output samples are bit-identical to the native build.`);
    } else {
      line.dataset.state = 'fail';
      badge('fail', `${fx.name}: differs from native (${r.variant} build)`);
      const d = r.difference;
      let text;
      if (d.kind === 'sample') {
        text = `Fail: the output differs from the native build, first at sample ${count(d.index)}: this browser gives ${d.browser} (0x${d.browserBits}), native ${d.native} (0x${d.nativeBits}).`;
        add('Compared with', d.source);
      } else {
        text = `Fail: ${d.text}.`;
      }
      status(line, 'error', text);
    }
  }
}
