// Reads site.json, written by `earshot site` (docs/site.md), and fetches the
// files it names. Only the fields the page uses are checked; every text in it
// is later shown as text, never as HTML.

export async function fetchBytes(url, what) {
  let res;
  try {
    res = await fetch(url);
  } catch (e) {
    // The browser does not say why (a network failure and a refused
    // cross-origin read look the same); another origin gets the likely reason.
    const foreign = new URL(url, document.baseURI).origin !== location.origin;
    const hint = foreign ? '; a file on another origin can be read only when its server sends Access-Control-Allow-Origin' : '';
    throw new Error(`cannot load ${what} (${url}): ${e.message}${hint}`);
  }
  if (!res.ok) throw new Error(`cannot load ${what} (${url}): HTTP ${res.status}${res.statusText ? ' ' + res.statusText : ''}`);
  return res.arrayBuffer();
}

export async function loadSite(url = 'site.json') {
  let res;
  try {
    res = await fetch(url, { cache: 'no-cache' });
  } catch (e) {
    throw new Error(`cannot load the site description ${url}: ${e.message}`);
  }
  if (!res.ok) throw new Error(`cannot load the site description ${url}: HTTP ${res.status}. Build the site with 'earshot site CONFIG --out DIR' and open DIR/index.html through a web server.`);
  let site;
  try {
    site = await res.json();
  } catch (e) {
    throw new Error(`the site description ${url} is not valid JSON: ${e.message}`);
  }
  if (!site || site.format !== 'earshot-site') throw new Error(`${url} is not an earshot site description (format field)`);
  if (site.version !== 1) throw new Error(`${url} has site version ${site.version}; this page reads version 1`);
  if (!Array.isArray(site.effects) || site.effects.length === 0) throw new Error(`${url} lists no effects`);
  if (!site.wasm || typeof site.wasm.simd !== 'string' || typeof site.wasm.scalar !== 'string')
    throw new Error(`${url} does not name the two WebAssembly builds (wasm.simd, wasm.scalar)`);
  site.clips = Array.isArray(site.clips) ? site.clips : [];
  site.credits = Array.isArray(site.credits) ? site.credits : [];
  site.base = new URL(url, document.baseURI).href;
  return site;
}

export function siteUrl(site, path) {
  return new URL(path, site.base).href;
}
