// Keyboard shortcuts of the listening page: one keydown listener for the
// document and the key map of the screen on show (each screen sets its own
// with setKeys). Keys are left alone while the focus is in a text field, and
// with Ctrl, Alt or Meta held (the browser's own shortcuts); a focused radio
// button keeps Space and the arrows. The same map
// renders the visible list of keys (showKeys), so the page documents exactly
// the keys that work.
import { el, clear } from './dom.js';

let active = new Map();

// Where typing goes: a text-like input, a text area, a select or editable content.
export function isTextEntry(node) {
  if (!node || node.nodeType !== 1) return false;
  if (node.isContentEditable) return true;
  const tag = node.tagName;
  if (tag === 'TEXTAREA' || tag === 'SELECT') return true;
  if (tag !== 'INPUT') return false;
  const nonText = ['button', 'checkbox', 'color', 'file', 'hidden', 'image', 'radio', 'range', 'reset', 'submit'];
  return !nonText.includes((node.getAttribute('type') || 'text').toLowerCase());
}

// The name a binding uses: 'Space', a lower-case character, or KeyboardEvent.key ('ArrowUp', 'PageDown', ...).
export function keyName(e) {
  if (e.key === ' ' || e.key === 'Spacebar') return 'Space';
  return e.key.length === 1 ? e.key.toLowerCase() : e.key;
}

// bindings: [{ keys: ['1', ...], run(event, key) -> false when it did not apply }].
export function setKeys(bindings) {
  active = new Map();
  for (const b of bindings) for (const k of b.keys) active.set(k, b.run);
}

export function installKeys() {
  document.addEventListener('keydown', (e) => {
    if (e.defaultPrevented || e.ctrlKey || e.altKey || e.metaKey || e.isComposing) return;
    if (isTextEntry(e.target) || isTextEntry(document.activeElement)) return;
    const k = keyName(e);
    // A focused answer choice keeps its own keys (Space checks it, arrows move between choices).
    if (e.target.type === 'radio' && (k === 'Space' || k.startsWith('Arrow'))) return;
    const run = active.get(k);
    if (!run) return;
    if (e.repeat && !k.startsWith('Arrow') && !k.startsWith('Page')) { e.preventDefault(); return; }
    if (run(e, k) !== false) e.preventDefault();
  });
}

// The visible list of keys: rows of [[key labels], what it does].
export function showKeys(node, rows) {
  clear(node);
  node.appendChild(el('h3', { class: 'keys-h' }, 'Keyboard'));
  const list = el('ul', { class: 'keys' });
  for (const [keys, what] of rows) {
    const li = el('li', {});
    keys.forEach((k, i) => {
      if (i) li.append(' ');
      li.append(el('kbd', {}, k));
    });
    li.append(` ${what}`);
    list.appendChild(li);
  }
  node.append(list, el('p', { class: 'note' }, 'The keys do nothing while you type in a text field.'));
  node.hidden = false;
}
