// The <earshot-effect> element's styles, adopted by its shadow root (so a
// page's CSP without 'unsafe-inline' does not block them). Sizes are in px,
// never em/rem, and every element inside sets its own font and colour: the
// host page's rules reach the element itself only (its box: margins,
// display, width stay the host's to set), never what is inside.
// The colour roles are the site page's (web/style.css), which site.test.js
// holds to WCAG contrast ratios; keep the two in step.
export const EMBED_CSS = `
:host {
  all: initial;
  display: block;
  contain: content;
  max-width: 100%;
  margin: 0 0 12px;
  --paper: #ffffff;
  --ink: #1c2533;
  --muted: #5a6475;
  --line: #d9d4c8;
  --accent: #23395b;
  --accent-ink: #ffffff;
  --focus: #f2c14e;
  --ok: #1e6b34;
  --ok-bg: #e3f3e6;
  --bad: #a4262c;
  --bad-bg: #fbe7e8;
  --busy-bg: #eef2f8;
  color-scheme: light;
}
@media (prefers-color-scheme: dark) {
  :host {
    --paper: #1a2029;
    --ink: #e7e9ee;
    --muted: #a9b2bf;
    --line: #343c49;
    --accent: #2b4470;
    --accent-ink: #ffffff;
    --ok: #86d99c;
    --ok-bg: #15301f;
    --bad: #ffa3a8;
    --bad-bg: #3b1a1e;
    --busy-bg: #1f2837;
    color-scheme: dark;
  }
}
:host([hidden]) { display: none !important; }
.box, .box * {
  box-sizing: border-box;
  font-family: system-ui, -apple-system, "Segoe UI", Roboto, sans-serif;
  font-size: 15px;
  line-height: 1.45;
  letter-spacing: normal;
  text-transform: none;
  text-align: left;
  visibility: inherit;
}
.box {
  display: block;
  color: var(--ink);
  background: var(--paper);
  border: 1px solid var(--line);
  border-radius: 10px;
  padding: 12px 14px;
  margin: 0;
  max-width: 100%;
  overflow-wrap: anywhere;
}
.head { display: flex; flex-wrap: wrap; align-items: baseline; gap: 6px 12px; justify-content: space-between; }
.title { font-weight: 600; margin: 0; min-width: 0; }
.row { display: flex; flex-wrap: wrap; align-items: center; gap: 8px 12px; margin: 10px 0 0; min-width: 0; }
.control { display: grid; grid-template-columns: minmax(64px, max-content) minmax(80px, 1fr) 72px; gap: 4px 10px; align-items: center; margin: 8px 0 0; }
.control label, .level label { color: var(--ink); }
input[type=range] { width: 100%; min-width: 0; margin: 0; accent-color: var(--accent); }
input[type=number], select {
  width: 100%; min-width: 0; padding: 3px 6px; color: var(--ink); background: var(--paper);
  border: 1px solid var(--muted); border-radius: 6px;
}
select { width: auto; max-width: 100%; }
button {
  display: inline-block; padding: 6px 14px; border-radius: 6px; border: 1px solid var(--accent);
  color: var(--accent-ink); background: var(--accent); cursor: pointer; font-weight: 600;
}
button:disabled { opacity: 0.55; cursor: default; }
fieldset { border: 0; margin: 0; padding: 0; display: flex; flex-wrap: wrap; gap: 4px 12px; align-items: center; min-width: 0; }
legend { float: left; padding: 0; margin: 0 4px 0 0; color: var(--muted); }
.ab label { display: inline-flex; align-items: center; gap: 4px; }
.level { display: flex; flex-wrap: wrap; align-items: center; gap: 4px 8px; min-width: 0; }
.level input { width: 120px; }
.muted, .time { color: var(--muted); }
.time { font-variant-numeric: tabular-nums; }
:focus-visible, summary:focus-visible { outline: 3px solid var(--focus); outline-offset: 2px; }
details.check { display: inline-block; max-width: 100%; }
details.check summary { cursor: pointer; list-style: none; display: inline-block; }
details.check summary::-webkit-details-marker { display: none; }
.badge { display: inline-block; padding: 1px 8px; border-radius: 999px; border: 1px solid currentColor; font-size: 13px; white-space: nowrap; }
.badge[data-state=pass] { color: var(--ok); background: var(--ok-bg); }
.badge[data-state=fail] { color: var(--bad); background: var(--bad-bg); }
.badge[data-state=running], .badge[data-state=none] { color: var(--muted); background: var(--busy-bg); }
.facts { margin: 6px 0 0; font-size: 13px; color: var(--muted); }
.facts code { font-family: ui-monospace, monospace; font-size: 13px; }
.status { margin: 10px 0 0; color: var(--muted); }
.status:empty { display: none; }
.error { margin: 10px 0 0; padding: 6px 10px; border-radius: 6px; color: var(--bad); background: var(--bad-bg); }
.error:empty { display: none; }
/* The comparison grid (columns="..."): a table that scrolls inside the
   element on a narrow screen, never the page; the padding keeps a focused
   cell's outline inside the scrolling box. */
.grid-box { margin: 10px 0 0; }
.grid-scroll { overflow-x: auto; max-width: 100%; padding: 6px; margin: 0 -6px; }
.grid { border-collapse: separate; border-spacing: 4px; }
.grid th { font-size: 13px; text-align: left; padding: 0 3px; overflow-wrap: anywhere; color: var(--ink); vertical-align: bottom; }
.grid thead th { color: var(--muted); font-weight: 600; }
.grid th .settings { display: block; font-weight: 400; font-size: 12px; font-family: ui-monospace, monospace; overflow-wrap: normal; }
.grid tbody th { position: sticky; left: 0; z-index: 1; background: var(--paper); font-weight: 600; min-width: 72px; max-width: 120px; vertical-align: middle; }
.grid td { padding: 0; }
.grid button.cell {
  display: flex; flex-direction: column; align-items: center; justify-content: center;
  min-width: 64px; min-height: 40px; padding: 3px 8px; line-height: 1.2; font-weight: 400;
  background: var(--paper); color: var(--ink); border: 1px solid var(--line); border-radius: 6px;
}
.grid .cell-state { font-size: 13px; font-variant-numeric: tabular-nums; }
.grid td[data-chosen=true] button.cell { border: 2px solid var(--accent); }
.grid td[data-playing=true] button.cell { background: var(--accent); color: var(--accent-ink); }
.grid td[data-state=failed] button.cell { border-color: var(--bad); color: var(--bad); }
.grid button.cell:focus-visible { outline: 3px solid var(--focus); outline-offset: 1px; }
.hint, .grid-time { margin: 4px 0 0; font-size: 13px; color: var(--muted); }
.grid-time:empty { display: none; }
.sr-only { position: absolute; width: 1px; height: 1px; padding: 0; margin: -1px; overflow: hidden; clip: rect(0 0 0 0); white-space: nowrap; border: 0; }
[hidden] { display: none !important; }
`;
