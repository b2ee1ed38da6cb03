// The page's state in the address fragment, so an address can be shared and
// opened to the same settings: effect, clip, control values, mix, gains,
// bypass, the A/B side and the comparison grid's chosen cell (clip id and column). The fragment comes from whoever sent the link:
// ids are only looked up in the site's own lists, numbers must be finite
// (the controls panel then checks each against its range), and nothing of it
// is ever inserted as markup.
//
//   #fx=tcn&clip=mono&c.drive=0.2&c.tone=-3&mix=0.5&in=-6&out=0&bypass=1&ab=original&cell=melody.2

const NUMBER = /^-?\d+(\.\d+)?(e[-+]?\d+)?$/i;

function num(v) {
  return typeof v === 'string' && NUMBER.test(v) && Number.isFinite(Number(v)) ? Number(v) : undefined;
}

// The state a fragment asks for; fields it does not give are undefined.
export function readState(hash) {
  const p = new URLSearchParams(String(hash || '').replace(/^#/, ''));
  const controls = {};
  for (const [k, v] of p) if (k.startsWith('c.') && num(v) !== undefined) controls[k.slice(2)] = num(v);
  const ab = p.get('ab');
  const cell = /^([A-Za-z0-9_-]{1,64})\.(\d{1,2})$/.exec(p.get('cell') || '');
  return {
    fx: p.get('fx') || undefined,
    clip: p.get('clip') || undefined,
    controls,
    mix: num(p.get('mix')),
    inputDb: num(p.get('in')),
    outputDb: num(p.get('out')),
    bypass: p.has('bypass') ? p.get('bypass') === '1' : undefined,
    ab: ab === 'original' || ab === 'processed' ? ab : undefined,
    cell: cell ? { clip: cell[1], column: Number(cell[2]) } : undefined,
  };
}

// The fragment for a state (undefined fields left out).
export function writeState(s) {
  const p = new URLSearchParams();
  if (s.fx) p.set('fx', s.fx);
  if (s.clip) p.set('clip', s.clip);
  for (const [k, v] of Object.entries(s.controls || {})) p.set(`c.${k}`, String(v));
  if (s.mix !== undefined) p.set('mix', String(s.mix));
  if (s.inputDb !== undefined) p.set('in', String(s.inputDb));
  if (s.outputDb !== undefined) p.set('out', String(s.outputDb));
  if (s.bypass) p.set('bypass', '1');
  if (s.ab) p.set('ab', s.ab);
  if (s.cell) p.set('cell', `${s.cell.clip}.${s.cell.column}`);
  return `#${p.toString()}`;
}
