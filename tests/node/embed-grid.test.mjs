// Proves the rules of <earshot-effect columns="..."> (web/js/embed-grid.js)
// that need no browser: the attribute's syntax, accepted and refused with the
// token named; each column's controls (the element's values under the
// column's own); and which kept cells the bounded cache lets go.
import assert from 'node:assert/strict';
import { test } from 'node:test';

import { cellsToLetGo, MAX_COLUMNS, parseColumns, resolveColumns } from '../../web/js/embed-grid.js';

// The controls of the browser tests' TCN fixture (tests/browser/make_fixtures.py).
const CONTROLS = [{ name: 'drive', min: 0, max: 1, default: 0.5 }, { name: 'tone', min: -12, max: 12, default: 0 }];

test('columns: labels, settings, empty parts and names', () => {
  const cols = parseColumns(' Soft: drive=0.2 , tone=-3 ;drive=.8;; As given: ;tone=1e-1; ');
  assert.deepEqual(cols.map((c) => [c.label, c.name, c.given]), [
    ['Soft', 'Soft', { drive: 0.2, tone: -3 }],
    [null, 'drive=0.8', { drive: 0.8 }],
    ['As given', 'As given', {}],
    [null, 'tone=0.1', { tone: 0.1 }],
  ]);
  const full = resolveColumns(cols, CONTROLS, { drive: 0.5, tone: 4.5 }, 'fx.nfx');
  assert.deepEqual(full.map((c) => [c.name, c.controls]), [
    ['Dry', null],
    ['Soft', { drive: 0.2, tone: -3 }],
    ['drive=0.8', { drive: 0.8, tone: 4.5 }],
    ['As given', { drive: 0.5, tone: 4.5 }],
    ['tone=0.1', { drive: 0.5, tone: 0.1 }],
  ]);
  // The range ends themselves are inside.
  assert.equal(resolveColumns(parseColumns('drive=0; drive=1; tone=-12; tone=12'), CONTROLS, {}, 'fx.nfx').length, 5);
});

test('columns: every refusal names the attribute and the token', () => {
  const refused = {
    '': 'it is empty',
    ' ; ;': 'it names no column',
    'Soft drive=0.2': "'Soft drive=0.2' in column 1 is not NAME=NUMBER",
    'drive=': "'drive=' in column 1 is not NAME=NUMBER",
    '=0.2': "'=0.2' in column 1 is not NAME=NUMBER",
    'drive=0x1': "'drive=0x1' in column 1 is not NAME=NUMBER",
    'drive=Infinity': "'drive=Infinity' in column 1 is not NAME=NUMBER",
    'drive=1.2.3': "'drive=1.2.3' in column 1 is not NAME=NUMBER",
    'drive=0.1; tone': "'tone' in column 2 is not NAME=NUMBER",
    ': drive=0.2': "column 1 ': drive=0.2' has nothing before ':'",
    'a=b: drive=0.2': "'a=b' in column 1 is not a label",
    'A: drive=0.2: B': "column 1 'A: drive=0.2: B' has more than one ':'",
    'drive=0.1, drive=0.2': "'drive' is set twice in column 1",
    'A: drive=0.1; a: drive=0.2': "column 2 is named 'a' as column 1 is",
    'drive=0.1; drive=0.10': "column 2 is named 'drive=0.1' as column 1 is",
    'DRY: drive=0.1': "column 1 is named 'DRY' as the first column is",
    [`${'x'.repeat(61)}: drive=0.1`]: "the label 'xxxxxxxxxxxxxxxxxxxx…' of column 1 is longer than 60 characters",
    [Array.from({ length: MAX_COLUMNS + 1 }, (_, i) => `drive=0.0${i}`).join(';')]: `${MAX_COLUMNS + 1} columns; at most ${MAX_COLUMNS}`,
  };
  for (const [text, want] of Object.entries(refused)) {
    assert.throws(() => parseColumns(text), (e) => e.message.startsWith(`attribute columns: ${want}`) || assert.fail(`${JSON.stringify(text)}: ${e.message}`));
  }
  const resolve = (text) => resolveColumns(parseColumns(text), CONTROLS, { drive: 0.5, tone: 0 }, 'fx.nfx');
  assert.throws(() => resolve('drive=0.5; Hot: fuzz=1'),
    { message: "attribute columns: 'fuzz' in column 2 'Hot: fuzz=1': fx.nfx has no control named 'fuzz' (its controls: drive, tone)" });
  assert.throws(() => resolve('Hot: drive=1.01'), { message: "attribute columns: 'drive=1.01' in column 1 'Hot: drive=1.01' is outside 0 … 1" });
  assert.throws(() => resolve('tone=-12.5'), { message: "attribute columns: 'tone=-12.5' in column 1 'tone=-12.5' is outside -12 … 12" });
});

test('the cache lets go of the least recently used cells it may, until the rest fit', () => {
  const cell = (name, frames, channels, used, row = 0) => ({ name, row, used, buffer: { length: frames, numberOfChannels: channels } });
  const cells = [cell('a', 100, 2, 5), cell('b', 100, 1, 1), cell('c', 300, 1, 3, 1), cell('d', 50, 1, 2, 1), { name: 'e', used: 0, buffer: null }];
  const names = (list) => list.map((c) => c.name);
  // 200 + 100 + 300 + 50 = 650 samples kept.
  assert.deepEqual(names(cellsToLetGo(cells, 650, () => false)), []);
  assert.deepEqual(names(cellsToLetGo(cells, 649, () => false)), ['b']);
  assert.deepEqual(names(cellsToLetGo(cells, 500, () => false)), ['b', 'd']);
  assert.deepEqual(names(cellsToLetGo(cells, 300, () => false)), ['b', 'd', 'c']);
  // Row 1 plays: its cells stay, even over the budget.
  assert.deepEqual(names(cellsToLetGo(cells, 0, (c) => c.row === 1)), ['b', 'a']);
});
