// Reads listening.json, the definition of the listening tests on the page
// (docs/listening.md, "The listening page"), and checks every field the page
// uses; each refusal names the field.

const TYPES = ['mushra', 'abx', 'ab'];
const ROLES = ['reference', 'anchor-low', 'anchor-mid', 'test'];
export const ANCHORS = [
  { id: 'lp3500', role: 'anchor-low', passband: 3500 },
  { id: 'lp7000', role: 'anchor-mid', passband: 7000 },
];
export const MUSHRA_MAX = 12; // stimuli per trial, ITU-R BS.1534-3 (hidden reference and anchors included)

function fail(field, text) {
  throw new Error(`listening.json: ${field}: ${text}`);
}

function str(v, field, { optional = false, max = 200 } = {}) {
  if (v === undefined && optional) return undefined;
  if (typeof v !== 'string' || v.length === 0) fail(field, `must be a non-empty string, got ${JSON.stringify(v)}`);
  if (v.length > max) fail(field, `is longer than ${max} characters`);
  return v;
}

function ident(v, field) {
  str(v, field, { max: 64 });
  if (!/^[A-Za-z0-9][A-Za-z0-9._-]*$/.test(v)) fail(field, `'${v}' may hold only letters, digits, '.', '_' and '-'`);
  return v;
}

function stimulus(s, field) {
  if (!s || typeof s !== 'object' || Array.isArray(s)) fail(field, 'must be an object: {"file": ...} or {"effect": ..., "clip": ...}');
  if (s.file !== undefined) {
    if (s.effect !== undefined || s.clip !== undefined) fail(field, 'has "file" and also "effect"/"clip"; give one or the other');
    return { source: 'file', file: str(s.file, `${field}.file`, { max: 500 }) };
  }
  if (s.effect === undefined && s.clip !== undefined) return { source: 'file', file: str(s.clip, `${field}.clip`, { max: 500 }) };
  const effect = ident(s.effect, `${field}.effect`);
  const clip = str(s.clip, `${field}.clip`, { max: 500 });
  const controls = s.controls === undefined ? {} : s.controls;
  if (!controls || typeof controls !== 'object' || Array.isArray(controls)) fail(`${field}.controls`, 'must be an object of control name: value');
  for (const [k, v] of Object.entries(controls))
    if (typeof v !== 'number' || !Number.isFinite(v)) fail(`${field}.controls.${k}`, `must be a number, got ${JSON.stringify(v)}`);
  return { source: 'rendered', effect, clip, controls };
}

function pairs(v, field, ids) {
  if (!Array.isArray(v) || v.length === 0) fail(field, 'must be a non-empty array of [condition, condition]');
  return v.map((p, i) => {
    if (!Array.isArray(p) || p.length !== 2) fail(`${field}[${i}]`, 'must be a pair [condition, condition]');
    for (const c of p) if (!ids.includes(c)) fail(`${field}[${i}]`, `'${c}' is not a declared condition (${ids.join(', ')})`);
    if (p[0] === p[1]) fail(`${field}[${i}]`, 'pairs a condition with itself');
    return [p[0], p[1]];
  });
}

export function parseTest(t, field) {
  if (!t || typeof t !== 'object' || Array.isArray(t)) fail(field, 'must be an object');
  const test = {
    id: ident(t.id, `${field}.id`),
    type: str(t.type, `${field}.type`),
    title: str(t.title, `${field}.title`, { optional: true }),
    instructions: str(t.instructions, `${field}.instructions`, { optional: true, max: 4000 }),
  };
  if (!TYPES.includes(test.type)) fail(`${field}.type`, `'${test.type}' is not one of ${TYPES.join(', ')}`);
  test.title = test.title || test.id;
  const target = t.target_lufs;
  if (typeof target !== 'number' || !(target >= -70 && target <= 0)) fail(`${field}.target_lufs`, `must be a number from -70 to 0 (LKFS), got ${JSON.stringify(target)}`);
  test.targetLufs = target;
  if (t.post !== undefined) {
    let u;
    try { u = new URL(str(t.post, `${field}.post`, { max: 2000 })); } catch { fail(`${field}.post`, `'${t.post}' is not an address`); }
    if (u.protocol !== 'https:') fail(`${field}.post`, `results are only sent to an https address, not '${u.protocol}'`);
    test.post = u.href;
  }
  test.familiarisation = t.familiarisation === undefined ? true : t.familiarisation === true;
  if (!Array.isArray(t.conditions) || t.conditions.length === 0) fail(`${field}.conditions`, 'must be a non-empty array');
  test.conditions = t.conditions.map((c, i) => {
    const f = `${field}.conditions[${i}]`;
    if (!c || typeof c !== 'object') fail(f, 'must be {"id": ..., "role": ...}');
    const role = c.role === undefined ? 'test' : c.role;
    if (!ROLES.includes(role) || role.startsWith('anchor')) fail(`${f}.role`, `must be 'reference' or 'test' (the page makes the anchors), got ${JSON.stringify(c.role)}`);
    return { id: ident(c.id, `${f}.id`), role, name: str(c.name, `${f}.name`, { optional: true }) };
  });
  const ids = test.conditions.map((c) => c.id);
  const dup = ids.find((x, i) => ids.indexOf(x) !== i);
  if (dup) fail(`${field}.conditions`, `condition '${dup}' is declared twice`);
  if (test.conditions.filter((c) => c.role === 'reference').length > 1) fail(`${field}.conditions`, 'has more than one reference');
  if (test.type === 'mushra') {
    if (!test.conditions.some((c) => c.role === 'reference')) fail(`${field}.conditions`, 'a MUSHRA test needs a condition with role "reference"');
    test.anchors = t.anchors === undefined ? true : t.anchors === true;
    if (test.anchors) {
      for (const a of ANCHORS) {
        if (ids.includes(a.id)) fail(`${field}.conditions`, `'${a.id}' is the name of a generated anchor; choose another id`);
        test.conditions.push({ id: a.id, role: a.role, passband: a.passband });
      }
    }
    if (test.conditions.length > MUSHRA_MAX) fail(`${field}.conditions`, `${test.conditions.length} stimuli per trial (anchors included) is over the ${MUSHRA_MAX} of ITU-R BS.1534-3`);
  } else if (test.type === 'abx') {
    test.pairs = pairs(t.pairs, `${field}.pairs`, ids);
    const n = t.trials === undefined ? 8 : t.trials;
    if (!Number.isInteger(n) || n < 1 || n > 100) fail(`${field}.trials`, `must be a whole number of ABX trials per pair and item, 1 .. 100, got ${JSON.stringify(n)}`);
    test.trialsPerPair = n;
  } else {
    test.pairs = pairs(t.pairs, `${field}.pairs`, ids);
    const n = t.repeats === undefined ? 1 : t.repeats;
    if (!Number.isInteger(n) || n < 1 || n > 20) fail(`${field}.repeats`, `must be 1 .. 20, got ${JSON.stringify(n)}`);
    test.trialsPerPair = n;
    test.noPreference = t.no_preference === true;
  }
  if (!Array.isArray(t.items) || t.items.length === 0) fail(`${field}.items`, 'must be a non-empty array');
  test.items = t.items.map((it, i) => {
    const f = `${field}.items[${i}]`;
    if (!it || typeof it !== 'object') fail(f, 'must be {"id": ..., "title"?: ..., "stimuli": {...}}');
    // title: what participants see for the item (never the id; without one, "Item N").
    const item = { id: ident(it.id, `${f}.id`), title: str(it.title, `${f}.title`, { optional: true }), stimuli: {} };
    item.label = item.title || `Item ${i + 1}`;
    if (!it.stimuli || typeof it.stimuli !== 'object') fail(`${f}.stimuli`, 'must be an object of condition id: stimulus');
    for (const k of Object.keys(it.stimuli)) if (!ids.includes(k)) fail(`${f}.stimuli.${k}`, `'${k}' is not a declared condition`);
    for (const c of test.conditions) {
      if (c.passband) continue;
      if (it.stimuli[c.id] === undefined) fail(`${f}.stimuli`, `has no stimulus for condition '${c.id}'`);
      item.stimuli[c.id] = stimulus(it.stimuli[c.id], `${f}.stimuli.${c.id}`);
    }
    return item;
  });
  const items = test.items.map((x) => x.id);
  const dupItem = items.find((x, i) => items.indexOf(x) !== i);
  if (dupItem) fail(`${field}.items`, `item '${dupItem}' is declared twice`);
  return test;
}

export function parseConfig(json) {
  if (!json || json.format !== 'earshot-listening-tests') fail('format', 'must be "earshot-listening-tests"');
  if (json.version !== 1) fail('version', `is ${JSON.stringify(json.version)}; this page reads version 1`);
  if (!Array.isArray(json.tests) || json.tests.length === 0) fail('tests', 'must be a non-empty array');
  const tests = json.tests.map((t, i) => parseTest(t, `tests[${i}]`));
  const ids = tests.map((t) => t.id);
  const dup = ids.find((x, i) => ids.indexOf(x) !== i);
  if (dup) fail('tests', `test id '${dup}' is used twice`);
  return { title: typeof json.title === 'string' ? json.title : 'Listening test', tests };
}
