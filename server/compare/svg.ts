// Small static SVG line plots for the printable reports: no script, no external resource, readable on paper.
// Pure string building.

export interface PlotSeries {
  name: string;
  x: readonly number[];
  y: readonly (number | null)[];
  /** Half-height of an error bar at each point. */
  err?: readonly (number | null)[];
  color: string;
  dashed?: boolean;
  /** Draw markers at the points (measured data) instead of, or as well as, a line. */
  markers?: boolean;
  line?: boolean;
}

export interface PlotSpec {
  title: string;
  xLabel: string;
  yLabel: string;
  series: PlotSeries[];
  width?: number;
  height?: number;
  /** Force zero into the y range. */
  yZero?: boolean;
}

export function esc(s: string): string {
  return s.replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c] as string);
}

/** About `n` round tick values covering [lo, hi]. */
export function niceTicks(lo: number, hi: number, n = 6): number[] {
  if (!(hi > lo)) {
    const d = Math.abs(lo) * 0.1 || 1;
    lo -= d;
    hi += d;
  }
  const raw = (hi - lo) / n;
  const mag = 10 ** Math.floor(Math.log10(raw));
  const step = [1, 2, 2.5, 5, 10].map((m) => m * mag).find((s) => s >= raw) ?? 10 * mag;
  const out: number[] = [];
  for (let v = Math.ceil(lo / step - 1e-9) * step; v <= hi + step * 1e-9; v += step) out.push(Math.abs(v) < step * 1e-9 ? 0 : v);
  return out;
}

function tickLabel(v: number, ticks: number[]): string {
  const step = ticks.length > 1 ? Math.abs(ticks[1] - ticks[0]) : 1;
  const d = Math.max(0, Math.min(6, -Math.floor(Math.log10(step) + 1e-9)));
  return v.toFixed(d);
}

export function linePlot(spec: PlotSpec): string {
  const W = spec.width ?? 640;
  // The legend sits under the plot, wrapped into rows, so it never hides data or gets cut at the edge.
  const legend = legendLayout(spec.series, W - 62 - 16);
  const H = (spec.height ?? 300) + legend.height;
  const m = { l: 62, r: 16, t: 30, b: 44 + legend.height };
  const xs: number[] = [];
  const ys: number[] = [];
  for (const s of spec.series) {
    s.x.forEach((x, i) => {
      const y = s.y[i];
      if (y === null || !Number.isFinite(y) || !Number.isFinite(x)) return;
      xs.push(x);
      const e = s.err?.[i] ?? 0;
      ys.push(y - (e ?? 0), y + (e ?? 0));
    });
  }
  const title = `<text x="${m.l}" y="18" class="pt">${esc(spec.title)}</text>`;
  if (xs.length === 0) {
    return `<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 ${W} ${H}" width="${W}" height="${H}" role="img">${title}<text x="${W / 2}" y="${H / 2}" text-anchor="middle" class="pl">no data</text></svg>`;
  }
  let x0 = Math.min(...xs);
  let x1 = Math.max(...xs);
  let y0 = Math.min(...ys);
  let y1 = Math.max(...ys);
  // Headroom so a line along the top or bottom of the data does not sit on the frame.
  const pad = (y1 - y0) * 0.05;
  y1 += pad;
  y0 = spec.yZero && y0 >= 0 ? Math.max(0, y0 - pad) : y0 - pad;
  if (spec.yZero) {
    y0 = Math.min(0, y0);
    y1 = Math.max(0, y1);
  }
  const xt = niceTicks(x0, x1);
  const yt = niceTicks(y0, y1, 5);
  x0 = Math.min(x0, xt[0]);
  x1 = Math.max(x1, xt[xt.length - 1]);
  y0 = Math.min(y0, yt[0]);
  y1 = Math.max(y1, yt[yt.length - 1]);
  const px = (x: number) => m.l + ((x - x0) / (x1 - x0 || 1)) * (W - m.l - m.r);
  const py = (y: number) => H - m.b - ((y - y0) / (y1 - y0 || 1)) * (H - m.t - m.b);
  const f = (v: number) => v.toFixed(1);
  const parts: string[] = [title];
  for (const v of xt) parts.push(`<line x1="${f(px(v))}" x2="${f(px(v))}" y1="${m.t}" y2="${H - m.b}" class="pg"/><text x="${f(px(v))}" y="${H - m.b + 16}" text-anchor="middle" class="pl">${tickLabel(v, xt)}</text>`);
  for (const v of yt) parts.push(`<line x1="${m.l}" x2="${W - m.r}" y1="${f(py(v))}" y2="${f(py(v))}" class="pg"/><text x="${m.l - 6}" y="${f(py(v) + 4)}" text-anchor="end" class="pl">${tickLabel(v, yt)}</text>`);
  parts.push(`<rect x="${m.l}" y="${m.t}" width="${W - m.l - m.r}" height="${H - m.t - m.b}" class="pf"/>`);
  parts.push(`<text x="${(m.l + W - m.r) / 2}" y="${H - m.b + 34}" text-anchor="middle" class="pa">${esc(spec.xLabel)}</text>`);
  parts.push(`<text transform="translate(14 ${(m.t + H - m.b) / 2}) rotate(-90)" text-anchor="middle" class="pa">${esc(spec.yLabel)}</text>`);
  spec.series.forEach((s, si) => {
    const pts: string[] = [];
    let path = '';
    s.x.forEach((x, i) => {
      const y = s.y[i];
      if (y === null || !Number.isFinite(y)) {
        path += ' ';
        return;
      }
      path += `${path === '' || path.endsWith(' ') ? 'M' : 'L'}${f(px(x))},${f(py(y))}`;
      const e = s.err?.[i];
      if (e) pts.push(`<line x1="${f(px(x))}" x2="${f(px(x))}" y1="${f(py(y - e))}" y2="${f(py(y + e))}" stroke="${s.color}" stroke-width="1"/>`);
      if (s.markers) pts.push(`<circle cx="${f(px(x))}" cy="${f(py(y))}" r="2.6" fill="${s.color}"/>`);
    });
    if (s.line !== false && path.trim()) parts.push(`<path d="${path.replace(/ +/g, '')}" fill="none" stroke="${s.color}" stroke-width="1.6"${s.dashed ? ' stroke-dasharray="5 4"' : ''}/>`);
    parts.push(...pts);
    const at = legend.at[si];
    const lx = m.l + at.x;
    const ly = H - legend.height + at.y + 8;
    parts.push(
      `<line x1="${lx}" x2="${lx + 18}" y1="${ly - 4}" y2="${ly - 4}" stroke="${s.color}" stroke-width="2"${s.dashed ? ' stroke-dasharray="5 4"' : ''}/>${s.markers ? `<circle cx="${lx + 9}" cy="${ly - 4}" r="2.6" fill="${s.color}"/>` : ''}<text x="${lx + 23}" y="${ly}" class="pl">${esc(s.name)}</text>`,
    );
  });
  return `<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 ${W} ${H}" width="${W}" height="${H}" role="img" aria-label="${esc(spec.title)}">${parts.join('')}</svg>`;
}

/** Places legend entries left to right, wrapping; widths estimated from the text (11 px sans, ~6.2 px a character). */
function legendLayout(series: readonly PlotSeries[], width: number): { height: number; at: { x: number; y: number }[] } {
  const at: { x: number; y: number }[] = [];
  let x = 0;
  let y = 0;
  for (const s of series) {
    const w = 23 + s.name.length * 6.2 + 18;
    if (x > 0 && x + w > width) {
      x = 0;
      y += 16;
    }
    at.push({ x, y });
    x += w;
  }
  return { height: series.length ? y + 22 : 0, at };
}

/** Colours for series, chosen to stay apart in greyscale print too. */
export const PALETTE = ['#1d4e89', '#c8553d', '#2a9d8f', '#8d6a9f', '#e9a23b', '#444444'];
