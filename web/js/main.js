// The page's entry point: capability check, site description, then the
// panels, wired together. One job per module; this one only connects them.
import { detectCapabilities } from '../worklet/capabilities.js';
import { $, el, clear, setText, status, link } from './dom.js';
import { loadSite } from './site.js';
import { Engine } from './engine.js';
import { showCapabilities, showLoaded, showLoadFailed } from './capability-panel.js';
import { EffectPanel } from './effect-panel.js';
import { ControlsPanel } from './controls-panel.js';
import { SelfCheck } from './selfcheck.js';
import { OfflinePanel } from './offline-panel.js';
import { LivePanel } from './live-panel.js';
import { GridPanel } from './grid-panel.js';
import { readState, writeState } from './share.js';

function showSite(site) {
  document.title = site.title;
  setText($('site-title'), site.title);
  const d = $('site-description');
  setText(d, site.description || '');
  d.hidden = !site.description;
  const links = clear($('site-links'));
  if (site.paper) links.appendChild(el('li', {}, link(site.paper, 'Paper')));
  if (site.code) links.appendChild(el('li', {}, link(site.code, 'Code')));
  // The site's own listening page (written by `earshot site` with listening.json).
  if (site.listening && site.listening.page === 'listen.html')
    links.appendChild(el('li', {}, el('a', { href: 'listen.html', id: 'listening-link' }, 'Listening tests')));
  links.hidden = !links.firstChild;
  const credits = clear($('site-credits'));
  for (const c of site.credits) credits.appendChild(el('li', {}, c));
}

function pageError(message) {
  status($('page-error'), 'error', message);
}

async function main() {
  const caps = detectCapabilities();
  showCapabilities(caps);
  let site;
  try {
    site = await loadSite('site.json');
  } catch (e) {
    pageError(e.message);
    return;
  }
  showSite(site);
  if (!caps.variant) return;
  let engine;
  try {
    engine = await new Engine(site, caps.variant).load();
  } catch (e) {
    showLoadFailed(`The ${caps.variant} build could not be loaded: ${e.message}`);
    return;
  }
  showLoaded(caps, engine);

  const controls = new ControlsPanel();
  const check = new SelfCheck(engine);
  const offline = new OfflinePanel(engine, controls, site);
  const live = new LivePanel(engine, controls, caps);
  const grid = new GridPanel(engine, site);
  const effects = new EffectPanel(engine, site, (fx) => {
    controls.setEffect(fx);
    check.run(fx);
    offline.setEffect(fx);
    live.setEffect(fx);
  });
  // The address fragment keeps the state, so the address can be shared (share.js).
  const shared = readState(location.hash);
  let restoring = true;
  const save = () => {
    if (restoring) return;
    const fx = effects.current;
    const s = controls.settings();
    const ab = $('ab-original').checked ? 'original' : undefined;
    history.replaceState(null, '', writeState({
      fx: fx && fx.key.startsWith('site:') ? fx.id : undefined, clip: offline.clipId, controls: s.controls,
      mix: s.mix, inputDb: s.inputDb, outputDb: s.outputDb, bypass: s.bypass, ab, cell: grid.selected,
    }));
  };
  controls.onChange(save);
  grid.onChange(save);
  $('clip-use').addEventListener('click', () => setTimeout(save, 0));
  for (const id of ['ab-original', 'ab-processed']) $(id).addEventListener('change', save);
  await effects.choose(effects.initialKey(shared.fx));
  controls.restore(shared);
  if (shared.clip && site.clips.some((c) => c.id === shared.clip)) await offline.useClip(shared.clip);
  if (shared.ab) {
    $(`ab-${shared.ab}`).checked = true;
    $(`ab-${shared.ab}`).dispatchEvent(new Event('change'));
  }
  if (shared.cell) grid.select(shared.cell.clip, shared.cell.column);
  restoring = false;
  save();
  document.body.dataset.ready = 'true';
}

window.addEventListener('unhandledrejection', (e) => {
  pageError(`Something went wrong: ${e.reason && e.reason.message ? e.reason.message : e.reason}`);
});
main().catch((e) => pageError(`The page could not start: ${e.message}`));
