// DOM helpers. Every string from an effect file, the site config or the user
// goes in as text (text nodes, textContent, attribute values), never as HTML.

// el('p', { class: 'note', id: 'x' }, 'text', child, ...). Attribute values
// are set with setAttribute; `on*` handlers are refused (wire events in code).
export function el(tag, attrs = {}, ...children) {
  const node = document.createElement(tag);
  for (const [k, v] of Object.entries(attrs || {})) {
    if (v === undefined || v === null || v === false) continue;
    if (k.startsWith('on')) throw new Error(`el: event attribute ${k} refused; use addEventListener`);
    node.setAttribute(k, v === true ? '' : String(v));
  }
  append(node, children);
  return node;
}

function append(node, children) {
  for (const c of children) {
    if (c === undefined || c === null || c === false) continue;
    if (Array.isArray(c)) append(node, c);
    else if (c instanceof Node) node.appendChild(c);
    else node.appendChild(document.createTextNode(String(c)));
  }
}

export function clear(node) {
  while (node.firstChild) node.removeChild(node.firstChild);
  return node;
}

export function setText(node, text) {
  node.textContent = text === undefined || text === null ? '' : String(text);
  return node;
}

export function $(id) {
  const node = document.getElementById(id);
  if (!node) throw new Error(`page element #${id} is missing`);
  return node;
}

// True for an absolute http(s) address; anything else (javascript:, data:,
// relative paths) is never made a link.
export function isWebAddress(url) {
  if (typeof url !== 'string' || url.length > 2000) return false;
  try {
    const u = new URL(url);
    return u.protocol === 'https:' || u.protocol === 'http:';
  } catch {
    return false;
  }
}

// A link when the address is http(s), else the text alone.
export function link(url, text) {
  if (!isWebAddress(url)) return el('span', {}, text || String(url || ''));
  return el('a', { href: url, rel: 'noopener noreferrer', target: '_blank' }, text || url);
}

// Shows a message in a status element; kind: 'info', 'ok', 'error', 'busy'.
export function status(node, kind, text) {
  node.dataset.kind = kind;
  setText(node, text);
  node.hidden = !text;
}
