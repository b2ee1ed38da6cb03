// What the site's comparison grid (grid-panel.js) and the embed's
// (embed-grid.js) share: the keys of the ARIA grid pattern (WAI-ARIA
// Authoring Practices, "Grid": one tab stop, the focus moves inside) and the
// order in which cells wait for the Worker, how a cell's state is shown.

// Where `key` takes the focus from `at` ({ row, column }) in a rows × columns
// grid: { row, column }, 'activate' (Space, Enter) or null (not a grid key).
export function gridKey(key, at, rows, columns) {
  let { row, column } = at;
  switch (key) {
    case 'ArrowRight': column = Math.min(columns - 1, column + 1); break;
    case 'ArrowLeft': column = Math.max(0, column - 1); break;
    case 'ArrowDown': row = Math.min(rows - 1, row + 1); break;
    case 'ArrowUp': row = Math.max(0, row - 1); break;
    case 'Home': column = 0; break;
    case 'End': column = columns - 1; break;
    case ' ':
    case 'Enter': return 'activate';
    default: return null;
  }
  return { row, column };
}

// Makes `target` (a cell of `cells`, rows of { button }) the grid's one tab
// stop; focuses it unless told not to.
export function rovingFocus(cells, target, focus = true) {
  for (const line of cells) for (const c of line) c.button.tabIndex = c === target ? 0 : -1;
  if (focus) target.button.focus();
}

// Puts `cell` into `queue` (first when `front`, else last), moving it if it
// waits already, and marks it 'queued'.
export function enqueue(queue, cell, front) {
  const i = queue.indexOf(cell);
  if (i >= 0) queue.splice(i, 1);
  if (front) queue.unshift(cell);
  else queue.push(cell);
  cell.state = 'queued';
}

// A cell's state in a word or two (shown in the cell) and in words (its
// accessible name): [short, long].
export function cellWords(cell, playing) {
  switch (cell.state) {
    case 'none': return ['—', 'no reference file for this clip'];
    case 'idle': return ['play', cell.hash ? 'not kept in memory; play to compute it again' : 'not computed yet; play to compute it'];
    case 'queued': return ['waiting', 'waiting to be computed'];
    case 'working': return [`${Math.round(100 * (cell.progress || 0))} %`, 'being computed'];
    case 'failed': return ['failed', `failed: ${cell.message}`];
    default: return playing ? ['playing', 'playing'] : ['play', 'ready'];
  }
}

// A cell's accessible name and tooltip (`label`), whether it plays, and its
// state, hash and choice as data attributes of its table cell (for styles and tests).
export function showCell(cell, label, playing, chosen) {
  cell.button.setAttribute('aria-label', label);
  cell.button.title = label;
  cell.button.setAttribute('aria-pressed', playing ? 'true' : 'false');
  const d = cell.td.dataset;
  d.state = cell.state;
  if (cell.hash) d.hash = cell.hash;
  else delete d.hash;
  d.playing = playing ? 'true' : 'false';
  d.chosen = chosen ? 'true' : 'false';
}
