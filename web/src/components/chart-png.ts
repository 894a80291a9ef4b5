// A chart as a PNG file: uPlot draws the plot and its axes to a canvas; the title, the axis labels a chart
// does not draw itself and a legend (uPlot's legend is HTML) are added around it on a second canvas, which
// canvas.toBlob turns into the file.
import type uPlot from 'uplot';
import { saveBlob } from '../data/api.js';

export interface PngDecor {
  title: string;
  /** A second line under the title (units, rig, air density). */
  subtitle?: string;
  /** Axis labels for charts whose uPlot options carry none. */
  xLabel?: string;
  yLabel?: string;
  legend?: { label: string; colour: string }[];
}

export function chartCanvas(u: uPlot, d: PngDecor): HTMLCanvasElement {
  const src = u.ctx.canvas;
  const r = src.width / Math.max(1, u.width); // device pixels per CSS pixel
  const font = (px: number, weight = 400) => `${weight} ${Math.round(px * r)}px system-ui, 'DejaVu Sans', sans-serif`;
  const pad = 14 * r;
  const titleH = (d.subtitle ? 44 : 28) * r;
  const yLab = d.yLabel ? 20 * r : 0;
  const xLab = d.xLabel ? 22 * r : 0;
  const legendH = d.legend?.length ? 24 * r : 0;
  const out = document.createElement('canvas');
  out.width = Math.round(src.width + 2 * pad + yLab);
  out.height = Math.round(src.height + titleH + xLab + legendH + 2 * pad);
  const g = out.getContext('2d')!;
  g.fillStyle = '#ffffff';
  g.fillRect(0, 0, out.width, out.height);
  g.fillStyle = '#1c2430';
  g.textBaseline = 'top';
  g.font = font(16, 700);
  g.fillText(d.title, pad, pad);
  if (d.subtitle) {
    g.fillStyle = '#5a6574';
    g.font = font(12);
    g.fillText(d.subtitle, pad, pad + 22 * r);
  }
  const x0 = pad + yLab;
  const y0 = pad + titleH;
  g.drawImage(src, x0, y0);
  g.fillStyle = '#1c2430';
  g.font = font(12);
  if (d.xLabel) {
    g.textAlign = 'center';
    g.fillText(d.xLabel, x0 + src.width / 2, y0 + src.height + 4 * r);
  }
  if (d.yLabel) {
    g.save();
    g.translate(pad, y0 + src.height / 2);
    g.rotate(-Math.PI / 2);
    g.textAlign = 'center';
    g.fillText(d.yLabel, 0, 0);
    g.restore();
  }
  if (d.legend?.length) {
    g.textAlign = 'left';
    let x = x0;
    const y = y0 + src.height + xLab + 6 * r;
    for (const item of d.legend) {
      g.fillStyle = item.colour;
      g.fillRect(x, y + 3 * r, 14 * r, 8 * r);
      g.fillStyle = '#1c2430';
      g.fillText(item.label, x + 18 * r, y);
      x += 18 * r + g.measureText(item.label).width + 16 * r;
    }
  }
  return out;
}

/** Saves the chart as name.png; resolves false when the browser could not encode it. */
export function downloadChartPng(u: uPlot, d: PngDecor, name: string): Promise<boolean> {
  const canvas = chartCanvas(u, d);
  return new Promise((resolve) =>
    canvas.toBlob((blob) => {
      if (!blob) return resolve(false);
      saveBlob(blob, name.endsWith('.png') ? name : `${name}.png`);
      resolve(true);
    }, 'image/png'),
  );
}

/** Series of a uPlot with a label and a colour, as legend entries. */
export function legendOf(u: uPlot): { label: string; colour: string }[] {
  return u.series
    .slice(1)
    .filter((s) => s.show !== false && typeof s.label === 'string' && s.label !== '')
    .map((s) => ({ label: String(s.label), colour: typeof s.stroke === 'string' ? s.stroke : typeof s.fill === 'string' ? s.fill : '#333' }));
}

export function fileSlug(s: string): string {
  return s.toLowerCase().replace(/[^a-z0-9]+/g, '-').replace(/^-|-$/g, '') || 'chart';
}
