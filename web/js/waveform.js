// Draws a waveform from min/max peaks (computed in the Worker) on a canvas,
// with an optional play-position line.

// A colour of the page's theme (style.css custom properties; the dark theme changes them).
export function themeColour(name) {
  return getComputedStyle(document.documentElement).getPropertyValue(name).trim();
}

export function drawWave(canvas, peaks, colour, position = null) {
  const dpr = Math.max(1, Math.min(3, window.devicePixelRatio || 1));
  const w = Math.max(50, Math.round(canvas.clientWidth * dpr));
  const h = Math.max(30, Math.round(canvas.clientHeight * dpr));
  if (canvas.width !== w) canvas.width = w;
  if (canvas.height !== h) canvas.height = h;
  const g = canvas.getContext('2d');
  g.clearRect(0, 0, w, h);
  g.fillStyle = themeColour('--wave-axis');
  g.fillRect(0, Math.floor(h / 2), w, Math.max(1, Math.round(dpr)));
  const { lo, hi } = peaks;
  const n = lo.length;
  // Full scale fills the height; anything beyond ±1 is drawn clipped at the edge.
  const scale = h / 2 - 1;
  g.fillStyle = colour;
  for (let x = 0; x < w; x++) {
    const a = Math.floor((x * n) / w);
    const b = Math.max(a + 1, Math.floor(((x + 1) * n) / w));
    let mn = 0;
    let mx = 0;
    for (let i = a; i < b && i < n; i++) {
      if (lo[i] < mn) mn = lo[i];
      if (hi[i] > mx) mx = hi[i];
    }
    const y0 = h / 2 - Math.min(1, mx) * scale;
    const y1 = h / 2 - Math.max(-1, mn) * scale;
    g.fillRect(x, Math.floor(y0), 1, Math.max(1, Math.ceil(y1 - y0)));
  }
  if (position !== null && Number.isFinite(position)) {
    g.fillStyle = themeColour('--ink');
    g.fillRect(Math.round(position * (w - 1)), 0, Math.max(1, Math.round(dpr)), h);
  }
}
