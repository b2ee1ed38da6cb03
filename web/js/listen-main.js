// The listening page: loads the site (for the WebAssembly builds and the
// effects) and listening.json, prepares every stimulus in this browser
// (rendered, anchors, loudness-matched, hashed), then runs the participant
// through instructions, familiarisation and the trials, keeping progress in
// localStorage so a reload resumes. Results: a JSON download and, only when
// the test names an https address, a POST of the same JSON.
import { detectCapabilities } from '../worklet/capabilities.js';
import { $, el, clear, setText, status } from './dom.js';
import { loadSite, fetchBytes, siteUrl } from './site.js';
import { Engine } from './engine.js';
import { parseWav } from './wav.js';
import { parseConfig } from './listen-config.js';
import { CoreAudio, interleave } from './listen-audio.js';
import { fnv1a64 } from './test-signal.js';
import { plan, familiarisationPlan, familiarisationSeed, newSeed, newParticipantId } from './listen-order.js';
import { SyncPlayer } from './listen-player.js';
import { installKeys, setKeys, showKeys } from './listen-keys.js';

const BANDS = ['Bad', 'Poor', 'Fair', 'Good', 'Excellent']; // ITU-R BS.1534-3 scale words, 20 points each
const player = new SyncPlayer();

function setStep(step) {
  setKeys([]); // each screen sets its own keys after this
  document.body.dataset.step = step;
  for (const s of document.querySelectorAll('[data-screen]')) s.hidden = s.dataset.screen !== step;
}

function pageError(text) {
  player.stop();
  status($('listen-error'), 'error', text);
  document.body.dataset.step = 'error';
}

async function fetchJson(url, what) {
  const bytes = await fetchBytes(url, what);
  try {
    return JSON.parse(new TextDecoder().decode(bytes));
  } catch (e) {
    throw new Error(`${what} (${url}) is not valid JSON: ${e.message}`);
  }
}

// ---------------------------------------------------------------- stimuli

// Runs the standard test signal through an effect in the offline Worker and
// compares it with the native hash in site.json; rendering waits on a pass.
function selfCheck(engine, entry, bytes) {
  return new Promise((resolve, reject) => {
    const w = engine.worker();
    w.onmessage = (e) => {
      w.terminate();
      const m = e.data;
      if (m.type === 'failed') reject(new Error(`the self-check of effect '${entry.id}' could not run: ${m.message}`));
      else if (m.result.pass !== true) reject(new Error(`effect '${entry.id}' failed the self-check in this browser (its output differs from the native build), so it is not rendered here`));
      else resolve();
    };
    w.onerror = (e) => { w.terminate(); reject(new Error(`the self-check worker failed: ${e.message || 'no reason given'}`)); };
    w.postMessage(engine.job({ type: 'check', id: 1, effect: bytes.slice(0), reference: entry.reference || null }));
  });
}

async function prepare(test, site, engine, core, progress) {
  const clips = new Map();
  const effects = new Map();
  const clip = async (path) => {
    const url = new URL(path, document.baseURI).href;
    if (!clips.has(url)) {
      const buf = await fetchBytes(url, `the clip ${path}`);
      const w = await parseWav(buf, path);
      clips.set(url, { data: interleave(w.channels), channels: w.channels.length, rate: w.rate, frames: w.channels[0].length });
    }
    return clips.get(url);
  };
  const effect = async (id) => {
    if (!effects.has(id)) {
      const entry = site.effects.find((e) => e.id === id);
      if (!entry) throw new Error(`listening.json names effect '${id}', which the site does not have (${site.effects.map((e) => e.id).join(', ')})`);
      const bytes = new Uint8Array(await fetchBytes(siteUrl(site, entry.file), `the effect ${entry.file}`));
      if (!entry.reference) throw new Error(`effect '${id}' has no native reference in site.json, so it cannot be self-checked`);
      await selfCheck(engine, entry, bytes);
      effects.set(id, bytes);
    }
    return effects.get(id);
  };
  const out = new Map(); // item -> Map(condition -> stimulus)
  const records = [];
  const total = test.items.length * test.conditions.length;
  for (const item of test.items) {
    const raw = new Map();
    for (const c of test.conditions) {
      if (c.passband) continue;
      const s = item.stimuli[c.id];
      // The item's title (or "Item N"), never an id or a condition: participants read this.
      progress(records.length + raw.size, total, item.label);
      const audio = await clip(s.source === 'file' ? s.file : s.clip);
      raw.set(c.id, { audio: s.source === 'file' ? audio : core.render(await effect(s.effect), s.controls, audio), source: s.source });
    }
    const ref = test.conditions.find((c) => c.role === 'reference');
    for (const c of test.conditions) {
      if (!c.passband) continue;
      raw.set(c.id, { audio: core.anchor(raw.get(ref.id).audio, c.passband), source: 'rendered' });
    }
    const first = raw.values().next().value.audio;
    const stimuli = new Map();
    for (const c of test.conditions) {
      const { audio, source } = raw.get(c.id);
      for (const k of ['rate', 'channels', 'frames'])
        if (audio[k] !== first[k]) throw new Error(`item '${item.id}': condition '${c.id}' has ${k} ${audio[k]} but the item's first stimulus has ${first[k]}; all stimuli of an item must match so they can be switched sample-aligned`);
      const lufs = core.loudness(audio);
      if (!Number.isFinite(lufs)) throw new Error(`item '${item.id}', condition '${c.id}' is silent (or shorter than 0.4 s) and cannot be loudness-matched`);
      const m = core.match(audio, test.targetLufs);
      stimuli.set(c.id, m.audio);
      records.push({ item: item.id, condition: c.id, hash: `fnv1a64-float32le:${fnv1a64(m.audio.data)}`, source, loudness_lufs: lufs });
    }
    out.set(item.id, stimuli);
  }
  progress(total, total, 'done');
  return { stimuli: out, records };
}

// ---------------------------------------------------------------- state

function storageKey(test) {
  return `earshot-listen:${test.id}`;
}

function loadState(test) {
  try {
    const s = JSON.parse(localStorage.getItem(storageKey(test)) || 'null');
    if (s && s.version === 1 && Array.isArray(s.answers) && Number.isInteger(s.seed)) return s;
  } catch { /* unreadable: start afresh */ }
  return null;
}

function saveState(test, state) {
  localStorage.setItem(storageKey(test), JSON.stringify(state));
}

function results(test, state, records, variant) {
  const out = {
    format: 'earshot-listening-results',
    version: 1,
    test: { id: test.id, type: test.type, title: test.title },
    participant: { id: state.participant, seed: state.seed },
    started: state.started,
    finished: state.finished,
    page: { variant, target_lufs: test.targetLufs },
    conditions: test.conditions.map((c) => (c.name ? { id: c.id, role: c.role, name: c.name } : { id: c.id, role: c.role })),
    stimuli: records,
    trials: state.answers,
  };
  // The familiarisation order this participant saw, and the seed that made it
  // (docs/listening.md, "Results file").
  if (test.familiarisation) out.familiarisation = { seed: familiarisationSeed(state.seed), order: familiarisationPlan(test, state.seed) };
  return out;
}

// ---------------------------------------------------------------- screens

// The sound chosen last on the screen on show (Space plays it again after a stop).
let lastCue = null;

function playButton(label, key, group) {
  const b = el('button', { type: 'button', class: 'cue', 'data-key': key }, label);
  b.addEventListener('click', async () => {
    lastCue = b;
    await player.select(key);
    for (const o of group.querySelectorAll('.cue')) o.setAttribute('aria-pressed', String(o === b));
  });
  b.setAttribute('aria-pressed', 'false');
  return b;
}

function stopAll() {
  player.stop();
  for (const o of document.querySelectorAll('.cue')) o.setAttribute('aria-pressed', 'false');
}

function stopButton() {
  const b = el('button', { type: 'button', class: 'stop' }, 'Stop');
  b.addEventListener('click', stopAll);
  return b;
}

// Key actions shared by the screens; `cues` are the screen's sound buttons in order.
function togglePlay(cues) {
  if (player.playing) stopAll();
  else (cues.includes(lastCue) ? lastCue : cues[0]).click();
}

function stepCue(cues, delta) {
  const i = cues.indexOf(lastCue);
  const next = i < 0 ? (delta > 0 ? 0 : cues.length - 1) : (i + delta + cues.length) % cues.length;
  cues[next].click();
  cues[next].focus();
}

// The digit keys of n choices as listed: 1 … n, and 0 for a tenth.
function digitKeys(n) {
  if (n <= 1) return ['1'];
  if (n <= 9) return ['1', '…', String(n)];
  return ['1', '…', '9', '0'];
}

const PLAY_KEYS = { keys: ['Space'], label: [['Space'], 'play / stop'] };
const STEP_KEYS = { keys: ['ArrowLeft', 'ArrowRight'], label: [['←', '→'], 'previous / next sound'] };

function familiarise(test, state, prepared, onDone) {
  const box = clear($('familiar-list'));
  const all = new Map();
  const groups = []; // per item shown: its sound buttons
  // The participant's own order (listen-order.js): items and sounds shuffled
  // from the seed. Items by title, sounds numbered, and the keys neutral
  // ("f<item>-<sound>"): nothing on the page names a condition.
  familiarisationPlan(test, state.seed).forEach((shown, gi) => {
    const item = test.items.find((it) => it.id === shown.item);
    const group = el('div', { class: 'cue-row' }, el('span', { class: 'cue-item' }, item.label));
    const buttons = shown.conditions.map((c, i) => {
      const key = `f${gi}-${i}`;
      all.set(key, prepared.stimuli.get(item.id).get(c));
      return playButton(`Sound ${i + 1}`, key, box);
    });
    group.append(...buttons, stopButton());
    box.appendChild(group);
    groups.push(buttons);
  });
  player.load(all);
  const cues = groups.flat();
  const current = () => groups.find((g) => g.includes(lastCue)) || groups[0];
  lastCue = null;
  setKeys([
    { keys: PLAY_KEYS.keys, run: () => togglePlay(cues) },
    { keys: ['1', '2', '3', '4', '5', '6', '7', '8', '9'], run: (e, k) => {
      const b = current()[Number(k) - 1];
      if (!b) return false;
      b.click();
      b.focus();
    } },
    { keys: STEP_KEYS.keys, run: (e, k) => stepCue(cues, k === 'ArrowRight' ? 1 : -1) },
  ]);
  const k = Math.min(9, test.conditions.length);
  showKeys($('familiar-keys'), [PLAY_KEYS.label, [digitKeys(k), `sound 1 to ${k} of the item playing (or of the first item)`], STEP_KEYS.label]);
  $('familiar-done').onclick = () => { stopAll(); onDone(); };
}

function mushraTrial(test, trial, stimuli, onAnswer) {
  const box = clear($('trial-body'));
  const m = new Map();
  m.set('open-reference', stimuli.get(test.conditions.find((c) => c.role === 'reference').id));
  trial.order.forEach((c, i) => m.set(`s${i}`, stimuli.get(c)));
  player.load(m);
  const cues = el('div', { class: 'cue-row' });
  const refCue = playButton('Reference', 'open-reference', box);
  cues.append(refCue, stopButton());
  box.appendChild(cues);
  const sampleCues = [];
  const scale = el('div', { class: 'bands', 'aria-hidden': 'true' }, BANDS.map((b) => el('span', {}, b)));
  const grid = el('div', { class: 'ratings' }, el('span', {}), el('div', { class: 'slider' }, scale, el('span', {})));
  const sliders = [];
  trial.order.forEach((c, i) => {
    const row = el('div', { class: 'cue-row' });
    const cue = playButton(`Sample ${i + 1}`, `s${i}`, box);
    sampleCues.push(cue);
    const id = `score-${i}`;
    const s = el('input', { type: 'range', id, min: 0, max: 100, step: 'any', value: 50, 'aria-label': `Score for sample ${i + 1}`, 'data-condition-index': i });
    const o = el('output', { for: id, class: 'score' }, '—');
    s.addEventListener('input', () => {
      s.dataset.touched = 'true';
      const v = Number(s.value);
      setText(o, `${v.toFixed(0)} ${BANDS[Math.min(4, Math.floor(v / 20))]}`);
      $('trial-next').disabled = sliders.some((x) => x.dataset.touched !== 'true');
    });
    sliders.push(s);
    row.append(cue);
    grid.append(row, el('div', { class: 'slider' }, s, o));
  });
  box.appendChild(grid);
  box.appendChild(el('p', { class: 'note' }, 'Rate every sample against the reference; one of them is the reference itself. Move every slider at least once.'));
  // Keys: R the reference, digits a sample (its slider takes the focus), arrows
  // up/down and Page Up/Down move the score of the focused slider, or else of
  // the sample chosen last, by whole points.
  const all = [refCue, ...sampleCues];
  lastCue = null;
  const pick = (b, focus) => { b.click(); focus.focus(); };
  const rated = () => {
    const f = sliders.indexOf(document.activeElement);
    if (f >= 0) return sliders[f];
    const c = sampleCues.indexOf(lastCue);
    return c >= 0 ? sliders[c] : null;
  };
  const nudge = (delta) => {
    const s = rated();
    if (!s) return false;
    s.value = String(Math.min(100, Math.max(0, Math.round(Number(s.value)) + delta)));
    s.dispatchEvent(new Event('input', { bubbles: true }));
  };
  const DELTA = { ArrowUp: 1, ArrowDown: -1, PageUp: 10, PageDown: -10 };
  setKeys([
    { keys: PLAY_KEYS.keys, run: () => togglePlay(all) },
    { keys: ['r'], run: () => pick(refCue, refCue) },
    { keys: ['1', '2', '3', '4', '5', '6', '7', '8', '9', '0'], run: (e, k) => {
      const i = k === '0' ? 9 : Number(k) - 1;
      if (!sampleCues[i]) return false;
      pick(sampleCues[i], sliders[i]);
    } },
    { keys: STEP_KEYS.keys, run: (e, k) => {
      stepCue(all, k === 'ArrowRight' ? 1 : -1);
      const i = sampleCues.indexOf(lastCue);
      if (i >= 0) sliders[i].focus();
    } },
    { keys: Object.keys(DELTA), run: (e, k) => nudge(DELTA[k]) },
  ]);
  showKeys($('trial-keys'), [PLAY_KEYS.label, [['R'], 'reference'],
    [digitKeys(sampleCues.length), `sample 1 to ${Math.min(10, sampleCues.length)}`], [['←', '→'], `previous / next sound${sampleCues.length > 10 ? ' (the samples after 10 too)' : ''}`],
    [['↑', '↓'], 'score of the chosen sample +1 / −1'], [['Page Up', 'Page Down'], 'score +10 / −10']]);
  $('trial-next').disabled = true;
  $('trial-next').onclick = () => {
    const ratings = {};
    trial.order.forEach((c, i) => { ratings[c] = Math.round(Number(sliders[i].value) * 100) / 100; });
    onAnswer({ item: trial.item, ratings, order: trial.order });
  };
}

function choiceTrial(test, trial, stimuli, onAnswer) {
  const box = clear($('trial-body'));
  const m = new Map([['a', stimuli.get(trial.a)], ['b', stimuli.get(trial.b)]]);
  if (test.type === 'abx') m.set('x', stimuli.get(trial[trial.x]));
  player.load(m);
  const cues = el('div', { class: 'cue-row' });
  const list = [playButton('A', 'a', box), playButton('B', 'b', box)];
  if (test.type === 'abx') list.push(playButton('X', 'x', box));
  cues.append(...list, stopButton());
  box.appendChild(cues);
  const choices = test.type === 'abx'
    ? [['a', 'X is A'], ['b', 'X is B']]
    : [['a', 'I prefer A'], ['b', 'I prefer B'], ...(test.noPreference ? [['none', 'No preference']] : [])];
  const fs = el('fieldset', { class: 'answer' }, el('legend', {}, test.type === 'abx' ? 'Which one is X?' : 'Which do you prefer?'));
  const radios = [];
  for (const [v, label] of choices) {
    const id = `answer-${v}`;
    const r = el('input', { type: 'radio', name: 'answer', id, value: v });
    r.addEventListener('change', () => { $('trial-next').disabled = false; });
    fs.append(r, el('label', { for: id }, label));
    radios.push(r);
  }
  box.appendChild(fs);
  // Keys: the letters play A, B (and X); digits give the answers in the order shown.
  lastCue = null;
  const letters = test.type === 'abx' ? ['a', 'b', 'x'] : ['a', 'b'];
  setKeys([
    { keys: PLAY_KEYS.keys, run: () => togglePlay(list) },
    { keys: letters, run: (e, k) => { const b = list[letters.indexOf(k)]; b.click(); b.focus(); } },
    { keys: STEP_KEYS.keys, run: (e, k) => stepCue(list, k === 'ArrowRight' ? 1 : -1) },
    { keys: radios.map((r, i) => String(i + 1)), run: (e, k) => {
      const r = radios[Number(k) - 1];
      r.checked = true;
      r.dispatchEvent(new Event('change', { bubbles: true }));
      r.focus();
    } },
  ]);
  showKeys($('trial-keys'), [PLAY_KEYS.label, [letters.map((l) => l.toUpperCase()), `play ${letters.map((l) => l.toUpperCase()).join(', ')}`], STEP_KEYS.label,
    ...choices.map(([, label], i) => [[String(i + 1)], `answer “${label}”`])]);
  $('trial-next').disabled = true;
  $('trial-next').onclick = () => {
    const answer = box.querySelector('input[name=answer]:checked').value;
    const t = { item: trial.item, a: trial.a, b: trial.b, answer };
    if (test.type === 'abx') t.x = trial.x;
    onAnswer(t);
  };
}

async function send(url, json) {
  const line = $('post-status');
  status(line, 'busy', `Sending the results to ${url}…`);
  try {
    const res = await fetch(url, { method: 'POST', headers: { 'Content-Type': 'application/json' }, body: json, credentials: 'omit', mode: 'cors' });
    if (!res.ok) throw new Error(`HTTP ${res.status} ${res.statusText}`);
    status(line, 'ok', 'The results were sent. You may also keep the downloaded copy.');
  } catch (e) {
    status(line, 'error', `The results could not be sent (${e.message}). Please download the file and send it to the organisers.`);
    $('post-retry').hidden = false;
  }
}

function finish(test, state, prepared, variant) {
  player.stop();
  setStep('done');
  const json = JSON.stringify(results(test, state, prepared.records, variant), null, 1);
  $('download').onclick = () => {
    const url = URL.createObjectURL(new Blob([json], { type: 'application/json' }));
    const a = el('a', { href: url, download: `${test.id}-${state.participant}.json` });
    document.body.appendChild(a);
    a.click();
    a.remove();
    setTimeout(() => URL.revokeObjectURL(url), 10000);
  };
  $('restart').onclick = () => {
    localStorage.removeItem(storageKey(test));
    location.reload();
  };
  if (test.post) {
    $('post-retry').onclick = () => { $('post-retry').hidden = true; send(test.post, json); };
    if (!state.sent) {
      state.sent = true;
      saveState(test, state);
      send(test.post, json);
    }
  }
}

function runTrials(test, state, prepared, variant) {
  const trials = plan(test, state.seed);
  const next = () => {
    const k = state.answers.length;
    if (k >= trials.length) {
      state.finished = state.finished || new Date().toISOString();
      saveState(test, state);
      finish(test, state, prepared, variant);
      return;
    }
    setStep('trial');
    const p = $('trial-progress');
    p.max = trials.length;
    p.value = k;
    setText($('trial-count'), `Trial ${k + 1} of ${trials.length}`);
    document.body.dataset.trial = String(k);
    const t = trials[k];
    setText($('trial-item'), test.items.find((it) => it.id === t.item).label);
    const stimuli = prepared.stimuli.get(t.item);
    const answer = (a) => {
      player.stop();
      state.answers.push(a);
      saveState(test, state);
      next();
    };
    if (test.type === 'mushra') mushraTrial(test, t, stimuli, answer);
    else choiceTrial(test, t, stimuli, answer);
  };
  next();
}

// ---------------------------------------------------------------- start

async function main() {
  const caps = detectCapabilities();
  if (!caps.variant) throw new Error('this browser cannot run the WebAssembly core (see the main page for the reasons)');
  const site = await loadSite('site.json');
  const config = parseConfig(await fetchJson('listening.json', 'the listening test definition'));
  const wanted = new URLSearchParams(location.search).get('test');
  const test = wanted ? config.tests.find((t) => t.id === wanted) : config.tests[0];
  if (!test) throw new Error(`listening.json has no test '${wanted}' (tests: ${config.tests.map((t) => t.id).join(', ')})`);
  document.title = test.title;
  setText($('listen-title'), test.title);
  const others = clear($('test-list'));
  if (config.tests.length > 1) {
    for (const t of config.tests) {
      const u = new URL(location.href);
      u.search = `?test=${encodeURIComponent(t.id)}`;
      others.appendChild(el('li', {}, t.id === test.id ? el('strong', {}, t.title) : el('a', { href: u.href }, t.title)));
    }
  }
  others.hidden = config.tests.length < 2;
  setText($('instructions-text'), test.instructions || defaultInstructions(test));

  setStep('loading');
  const engine = await new Engine(site, caps.variant).load();
  const core = new CoreAudio(engine.variant);
  const bar = $('prepare-progress');
  const prepared = await prepare(test, site, engine, core, (k, n, what) => {
    bar.max = n;
    bar.value = k;
    setText($('prepare-text'), `Preparing the sounds: ${k} of ${n} (${what})`);
  });
  document.body.dataset.stimuli = String(prepared.records.length);

  let state = loadState(test);
  const resumed = !!state;
  if (!state) {
    state = { version: 1, participant: newParticipantId(), seed: newSeed(), started: null, familiarised: false, answers: [] };
    saveState(test, state);
  }
  setText($('participant-line'), `Participant ${state.participant}, order seed ${state.seed}${resumed ? ' (resumed from this browser\'s saved progress)' : ''}.`);
  document.body.dataset.seed = String(state.seed);
  const trials = () => runTrials(test, state, prepared, caps.variant);
  const afterIntro = () => {
    state.started = state.started || new Date().toISOString();
    saveState(test, state);
    if (test.familiarisation && !state.familiarised) {
      setStep('familiar');
      familiarise(test, state, prepared, () => { state.familiarised = true; saveState(test, state); trials(); });
    } else {
      trials();
    }
  };
  if (state.started) afterIntro();
  else {
    setStep('intro');
    $('start').onclick = afterIntro;
  }
}

function defaultInstructions(test) {
  if (test.type === 'mushra') return 'For each trial, listen to the reference and to every sample, switching as often as you like while the sound plays. Give each sample a score from 0 to 100 for how close it is to the reference. One sample is the reference itself: give it 100.';
  if (test.type === 'abx') return 'In each trial, X is either A or B. Listen to all three as often as you like and say which one X is. If you cannot tell, make your best guess.';
  return 'In each trial, listen to A and B as often as you like and say which you prefer.';
}

installKeys();
window.addEventListener('unhandledrejection', (e) => pageError(`Something went wrong: ${e.reason && e.reason.message ? e.reason.message : e.reason}`));
main().catch((e) => pageError(e.message));
