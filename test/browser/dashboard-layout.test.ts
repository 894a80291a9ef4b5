// The floating stop button hides nothing: at common screen widths, at the top, the middle and the bottom of
// the page, and with the side column scrolled to its end (the serial link and bench rows), no panel of the
// page is laid out under the stop button, and the stop button is inside the viewport. Widths: common desktop
// and laptop screens (1920, 1440, 1366, 1280), a small laptop or tablet (1024, 800) and a phone (390);
// common practice, no source.

import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Browser, Page } from 'playwright-core';
import { startDaemon, type RunningDaemon } from '../../server/daemon.js';
import { buildDashboard, launchBrowser, openDashboard } from './harness.js';

let browser: Browser;
let d: RunningDaemon;
let dir: string;

beforeAll(async () => {
  const webRoot = await buildDashboard();
  dir = await mkdtemp(join(tmpdir(), 'ductbench-layout-'));
  d = await startDaemon({ source: { kind: 'sim', seed: 4 }, httpPort: 0, webRoot, dataDir: dir, log: () => {} });
  await d.firstConnect;
  browser = await launchBrowser();
}, 120_000);

afterAll(async () => {
  await browser?.close();
  await d?.close();
  await rm(dir, { recursive: true, force: true });
});

interface Overlap {
  panel: string;
  area: number;
}

/**
 * Every panel of the page (the children of the main and side columns, the charts, the header, the pages of
 * the other views), clipped to the viewport and to the side column where it scrolls inside that column,
 * that overlaps the stop button; and the stop button's box.
 */
function overlaps(page: Page): Promise<{ stop: { x: number; y: number; w: number; h: number }; hits: Overlap[]; panels: number }> {
  return page.evaluate(() => {
    const root = document.querySelector('db-app')!.shadowRoot!;
    const stop = root.querySelector('db-stop-button')!.getBoundingClientRect();
    const side = root.querySelector('.side') as HTMLElement;
    const sideBox = side.getBoundingClientRect();
    const sideScrolls = getComputedStyle(side).overflowY !== 'visible';
    const vw = document.documentElement.clientWidth;
    const vh = document.documentElement.clientHeight;
    const hits: { panel: string; area: number }[] = [];
    const els = [...root.querySelectorAll('header, .main > *, .charts > *, .side > *, .page > *')] as HTMLElement[];
    let panels = 0;
    for (const el of els) {
      if (el.offsetParent === null && getComputedStyle(el).position !== 'fixed') continue; // not rendered
      if (el.classList.contains('charts')) continue; // its charts are checked one by one
      let r = { l: 0, t: 0, r: 0, b: 0 };
      const b = el.getBoundingClientRect();
      r = { l: Math.max(0, b.left), t: Math.max(0, b.top), r: Math.min(vw, b.right), b: Math.min(vh, b.bottom) };
      if (sideScrolls && side.contains(el)) r = { l: Math.max(r.l, sideBox.left), t: Math.max(r.t, sideBox.top), r: Math.min(r.r, sideBox.right), b: Math.min(r.b, sideBox.bottom) };
      if (r.r <= r.l || r.b <= r.t) continue;
      panels++;
      const w = Math.min(r.r, stop.right) - Math.max(r.l, stop.left);
      const h = Math.min(r.b, stop.bottom) - Math.max(r.t, stop.top);
      if (w > 0 && h > 0) hits.push({ panel: el.tagName.toLowerCase() + (el.className ? `.${el.className}` : ''), area: Math.round(w * h) });
    }
    return { stop: { x: stop.left, y: stop.top, w: stop.width, h: stop.height }, hits, panels };
  });
}

const WIDTHS = [1920, 1440, 1366, 1280, 1024, 800, 390];

describe('the stop button hides nothing', () => {
  it('at common widths, at every scroll position, with the side column scrolled to its serial-link and bench rows', async () => {
    const { page, context, errors } = await openDashboard(browser, d.url, { viewport: { width: 1440, height: 900 } });
    try {
      for (const width of WIDTHS) {
        const height = width < 600 ? 800 : width <= 1024 ? 768 : 900;
        await page.setViewportSize({ width, height });
        // Let the layout's measured sizes follow (a resize observer sets them).
        await page.waitForFunction(() => getComputedStyle(document.querySelector('db-app')!).getPropertyValue('--db-stop-h') !== '');
        const docHeight = await page.evaluate(() => document.documentElement.scrollHeight);
        for (const y of [0, docHeight / 2, docHeight]) {
          await page.evaluate((to) => window.scrollTo(0, to), y);
          for (const sideAt of ['top', 'end'] as const) {
            await page.evaluate((at) => {
              const side = document.querySelector('db-app')!.shadowRoot!.querySelector('.side') as HTMLElement;
              side.scrollTop = at === 'top' ? 0 : side.scrollHeight;
            }, sideAt);
            await page.evaluate(() => new Promise((r) => requestAnimationFrame(() => requestAnimationFrame(r))));
            const o = await overlaps(page);
            const where = `${width}x${height}, page at ${Math.round(y)}, side column at its ${sideAt}`;
            expect(o.panels, where).toBeGreaterThan(0);
            expect(o.hits, where).toEqual([]);
            expect(o.stop.y >= 0 && o.stop.y + o.stop.h <= height && o.stop.x >= 0 && o.stop.x + o.stop.w <= width, `${where}: stop on screen ${JSON.stringify(o.stop)}`).toBe(true);
          }
        }
        // The serial link's rows can be brought into view, above the stop button.
        const link = await page.evaluate(() => {
          const root = document.querySelector('db-app')!.shadowRoot!;
          const status = root.querySelector('db-bench-status') as HTMLElement;
          status.scrollIntoView({ block: 'end' });
          const r = status.getBoundingClientRect();
          const s = root.querySelector('db-stop-button')!.getBoundingClientRect();
          return { bottom: r.bottom, top: r.top, stopTop: s.top, stopLeft: s.left, right: r.right, vh: document.documentElement.clientHeight };
        });
        await page.evaluate(() => new Promise((r) => requestAnimationFrame(r)));
        expect(link.bottom <= link.stopTop || link.right <= link.stopLeft, `${width}: bench status ${JSON.stringify(link)}`).toBe(true);
      }
      // Another view: the sessions page keeps a gutter for the button too.
      await page.setViewportSize({ width: 1440, height: 900 });
      await page.getByTestId('view-sessions').click();
      await page.locator('db-sessions-view').waitFor({ state: 'visible' });
      const o = await overlaps(page);
      expect(o.hits).toEqual([]);
      expect(errors).toEqual([]);
    } finally {
      await context.close();
    }
  }, 180_000);
});
