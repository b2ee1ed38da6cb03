// "Controls": one slider and number box per control of the effect (label,
// unit, range and default from its metadata; page defaults from the site
// config), then input and output gain, dry/wet and bypass. The exact value
// typed or chosen is kept; the slider only shows it.
import { $, el, clear, setText } from './dom.js';
import { db } from './format.js';

// A step of 1, 2 or 5 × 10^k giving about 200 positions over the range.
export function niceStep(span) {
  const raw = span / 200;
  const p = Math.pow(10, Math.floor(Math.log10(raw)));
  const m = raw / p;
  return (m <= 1 ? 1 : m <= 2 ? 2 : m <= 5 ? 5 : 10) * p;
}

export function show(v) {
  return Number.isInteger(v) ? String(v) : String(Number(v.toPrecision(6)));
}

export class ControlsPanel {
  constructor() {
    this.listeners = [];
    this.effect = null;
    this.values = {};
    this.inputDb = 0;
    this.outputDb = 0;
    this.mix = 1;
    this.bypass = false;
    this.wire('input-gain', 'input-gain-out', (v) => { this.inputDb = v; }, (v) => db(v));
    this.wire('output-gain', 'output-gain-out', (v) => { this.outputDb = v; }, (v) => db(v));
    this.wire('mix', 'mix-out', (v) => { this.mix = v / 100; }, (v) => `${v} % wet`);
    $('bypass').addEventListener('change', (e) => {
      this.bypass = e.target.checked;
      this.changed();
    });
    $('controls-reset').addEventListener('click', () => this.resetAll());
  }

  wire(id, outId, set, text) {
    const input = $(id);
    input.addEventListener('input', () => {
      const v = Number(input.value);
      set(v);
      setText($(outId), text(v));
      this.changed();
    });
  }

  onChange(f) {
    this.listeners.push(f);
  }

  changed() {
    const s = this.settings();
    for (const f of this.listeners) f(s);
  }

  settings() {
    return { controls: { ...this.values }, mix: this.mix, inputDb: this.inputDb, outputDb: this.outputDb, bypass: this.bypass };
  }

  setEffect(fx) {
    this.effect = fx;
    this.values = {};
    const box = clear($('effect-controls'));
    if (!fx.controls.length) box.appendChild(el('p', { class: 'note' }, 'This effect has no controls.'));
    fx.controls.forEach((c, i) => box.appendChild(this.controlRow(c, i, fx.defaults[c.name])));
    this.changed();
  }

  // Settings from a shared address (share.js): each value goes through the
  // same checks as a typed one; one out of range is left at its default.
  restore(s) {
    if (!this.effect) return;
    this.effect.controls.forEach((c, i) => {
      const v = s.controls[c.name];
      if (v === undefined) return;
      const number = $(`control-${i}-value`);
      number.value = String(v);
      number.dispatchEvent(new Event('change'));
    });
    const slider = (id, v, lo, hi) => {
      if (v === undefined || v < lo || v > hi) return;
      $(id).value = String(v);
      $(id).dispatchEvent(new Event('input'));
    };
    slider('input-gain', s.inputDb, Number($('input-gain').min), Number($('input-gain').max));
    slider('output-gain', s.outputDb, Number($('output-gain').min), Number($('output-gain').max));
    if (s.mix !== undefined) slider('mix', 100 * s.mix, 0, 100);
    if (s.bypass !== undefined && s.bypass !== this.bypass) $('bypass').click();
  }

  controlRow(c, i, value) {
    const id = `control-${i}`;
    this.values[c.name] = value;
    const step = niceStep(c.max - c.min);
    const range = el('input', { id, type: 'range', min: c.min, max: c.max, step, 'data-control': c.name });
    range.value = String(value);
    const number = el('input', {
      id: `${id}-value`, type: 'number', min: c.min, max: c.max, step: 'any', class: 'value',
      'aria-label': `${c.name} value${c.unit ? ` in ${c.unit}` : ''}`, 'data-control': c.name,
    });
    number.value = show(value);
    const unit = el('span', { class: 'unit' }, c.unit || '');
    const err = el('span', { class: 'field-error', role: 'alert' });
    const set = (v, from) => {
      if (!Number.isFinite(v) || v < c.min || v > c.max) {
        setText(err, `${c.name} takes ${c.min} … ${c.max}`);
        return;
      }
      setText(err, '');
      this.values[c.name] = v;
      if (from !== range) range.value = String(v);
      if (from !== number) number.value = show(v);
      this.changed();
    };
    range.addEventListener('input', () => set(Number(range.value), range));
    number.addEventListener('change', () => set(number.value === '' ? NaN : Number(number.value), number));
    const label = el('label', { for: id }, c.name);
    const cell = el('span', { class: 'value-cell' }, number, unit);
    return el('div', { class: 'control' }, label, range, cell, err);
  }

  resetAll() {
    if (this.effect) this.setEffect(this.effect);
    for (const [id, outId, v, text] of [['input-gain', 'input-gain-out', 0, db(0)], ['output-gain', 'output-gain-out', 0, db(0)], ['mix', 'mix-out', 100, '100 % wet']]) {
      $(id).value = String(v);
      setText($(outId), text);
    }
    $('bypass').checked = false;
    this.inputDb = 0;
    this.outputDb = 0;
    this.mix = 1;
    this.bypass = false;
    this.changed();
  }
}
