// Number formatting for the panels (thin spaces between thousands).

export function count(n) {
  if (!Number.isFinite(n)) return String(n);
  return Math.round(n).toString().replace(/\B(?=(\d{3})+(?!\d))/g, '\u202f');
}

export function fixed(v, digits = 1) {
  return Number.isFinite(v) ? v.toFixed(digits) : v === -Infinity ? '−∞' : '—';
}

export function db(v, digits = 1) {
  if (v === -Infinity) return '−∞ dB';
  return `${v > 0 ? '+' : v < 0 ? '−' : ''}${Math.abs(v).toFixed(digits)} dB`;
}

export function hz(v) {
  return `${count(v)} Hz`;
}

export function seconds(s) {
  if (!Number.isFinite(s)) return '—';
  if (s < 60) return `${s.toFixed(s < 10 ? 2 : 1)} s`;
  const m = Math.floor(s / 60);
  return `${m} min ${(s - 60 * m).toFixed(0).padStart(2, '0')} s`;
}

export function clock(s) {
  if (!Number.isFinite(s) || s < 0) s = 0;
  const m = Math.floor(s / 60);
  return `${m}:${(s - 60 * m).toFixed(1).padStart(4, '0')}`;
}

export function bytes(n) {
  if (n < 1024) return `${n} B`;
  if (n < 1 << 20) return `${(n / 1024).toFixed(1)} kB`;
  return `${(n / 1048576).toFixed(1)} MB`;
}

// Peak amplitude to dBFS.
export function dbfs(peak) {
  return peak > 0 ? 20 * Math.log10(peak) : -Infinity;
}
