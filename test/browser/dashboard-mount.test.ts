// Mounting from the dashboard, in headless Chromium against the real daemon on the in-process virtual bench
// with a data folder: two dashboards open; the controlling one adds a duct to the library on the spot and
// mounts it without restarting the daemon; both pages show the ducted mount and the ducted prediction at once
// (the chart's model lines, its rig, the checklist's limit table from the new mount); a viewer has no mount
// controls; a staircase run from the page is recorded with the mount and its revisions.

import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Browser, Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { CHECKLIST_IDS } from '../../server/api/messages.js';
import { startDaemon, type RunningDaemon } from '../../server/daemon.js';
import { ARTIFACTS_DIR, buildDashboard, eventually, launchBrowser, openDashboard, type OpenedDashboard } from './harness.js';

let browser: Browser;
let d: RunningDaemon;
let webRoot: string;
let dir: string;

beforeAll(async () => {
  webRoot = await buildDashboard();
  dir = await mkdtemp(join(tmpdir(), 'ductbench-mount-web-'));
  d = await startDaemon({ source: { kind: 'sim', seed: 33 }, httpPort: 0, webRoot, dataDir: dir, log: () => {} });
  await d.firstConnect;
  browser = await launchBrowser();
}, 180_000);

afterAll(async () => {
  await browser?.close();
  await d?.close();
  if (dir) await rm(dir, { recursive: true, force: true });
});

const text = (page: Page, id: string) => page.getByTestId(id).first().textContent().then((t) => (t ?? '').replace(/\s+/g, ' ').trim());
const canvasImage = (page: Page, sel: string) => page.locator(`${sel} canvas`).first().evaluate((c) => (c as HTMLCanvasElement).toDataURL());

describe('mounting from the dashboard', () => {
  it('adds a duct, mounts it for every dashboard, and a run records the mount with its revisions', async () => {
    const ctl: OpenedDashboard = await openDashboard(browser, d.url);
    const viewer: OpenedDashboard = await openDashboard(browser, d.url);
    try {
      for (const p of [ctl.page, viewer.page]) {
        await eventually(() => text(p, 'model-lines'), (t) => t === 'model and ideal open', 'the open prediction');
        await expect(text(p, 'mount-slot-duct')).resolves.toBe('none (open propeller)');
      }
      const openChart = await canvasImage(viewer.page, 'db-efficiency-chart');
      // the viewer sees the mount and has no controls for it
      expect(await viewer.page.getByTestId('mount-apply').count()).toBe(0);
      expect(await viewer.page.getByTestId('mount-pick-duct').count()).toBe(0);

      // a part with a rule broken is refused, naming the field
      const page = ctl.page;
      await page.getByTestId('part-new').locator('summary').click();
      await page.getByTestId('part-kind').selectOption('duct');
      await page.getByTestId('part-name').fill('KD-1');
      // the printed duct's mounting is rated to 12 N (invented): its own limit, stricter than the bench's 40 N
      const fields = { bore_diameter_m: 0.2565, inlet_lip_radius_m: 0.012, exit_diameter_m: 0.2664, length_m: 0.09, mass_kg: 0.085, notes: 'printed', limits: { max_thrust_n: 12 } };
      await page.getByTestId('part-fields').fill(JSON.stringify({ ...fields, length_m: -1 }));
      await page.getByTestId('part-create').click();
      await eventually(() => text(page, 'part-result'), (t) => /^duct\.length_m: must be positive/.test(t), 'the refusal naming the field');
      await page.getByTestId('part-fields').fill(JSON.stringify(fields));
      await page.getByTestId('part-create').click();
      await eventually(() => text(page, 'part-result'), (t) => /^added KD-1 \(#\d+\)/.test(t), 'the duct added');
      // picked in its slot already; the rest stay as mounted
      await expect(page.getByTestId('mount-pick-duct').inputValue()).resolves.not.toBe('');
      const sessionsBefore = await fetch(`http://127.0.0.1:${d.port}/api/sessions?token=${d.token}`).then((r) => r.json() as Promise<{ sessions: unknown[] }>);
      await page.getByTestId('mount-name').fill('Millrace with KD-1');
      await page.getByTestId('mount-apply').click();
      await eventually(() => text(page, 'mount-result'), (t) => t.startsWith('mounted'), 'mounted');

      // both dashboards follow at once: the mount, the ducted prediction and ideal line, the chart redrawn
      for (const p of [page, viewer.page]) {
        await eventually(() => text(p, 'model-lines'), (t) => t === 'model and ideal open and ducted', 'the ducted prediction');
        await expect(text(p, 'mount-slot-duct')).resolves.toMatch(/^KD-1 r1 bore 256\.5 mm, exit 266\.4 mm/);
        // sigma = (266.4 / 254)^2 = 1.100
        await expect(text(p, 'mount-sigma')).resolves.toBe('1.100');
        await expect(text(p, 'mount-rig')).resolves.toBe('Millrace with KD-1 (library)');
        await expect(text(p, 'air')).resolves.toMatch(/^rig Millrace with KD-1 /);
      }
      await eventually(() => canvasImage(viewer.page, 'db-efficiency-chart'), (img) => img !== openChart, 'the viewer\'s chart redrawn with the ducted lines');
      expect(d.sim!.rig.duct).toMatchObject({ exit_diameter_m: 0.2664 });

      // the checklist's limit table is the mount's: the duct's 12 N thrust limit is in force
      await page.getByTestId('arm').click();
      await page.getByTestId('checklist').waitFor({ state: 'visible' });
      await expect(text(page, 'checklist-limits')).resolves.toMatch(/Thrust\s*12 N/);
      expect(d.interlocks.limits.max_thrust_n).toBe(12);
      const boxes = page.getByTestId('checklist').locator('input[type="checkbox"]');
      for (let i = 0; i < CHECKLIST_IDS.length; i++) await boxes.nth(i).check();
      await page.getByTestId('checklist-confirm').click();
      await page.getByTestId('checklist').waitFor({ state: 'detached' });

      // while armed the mount is closed, with the reason
      await page.getByTestId('arm').click();
      await eventually(async () => d.controller.state, (s) => s === 'armed', 'armed');
      await eventually(() => text(page, 'mount-closed'), (t) => /the bench is armed/.test(t), 'mount closed while armed');
      expect(await page.getByTestId('mount-apply').isDisabled()).toBe(true);
      await page.getByTestId('disarm').click();
      await eventually(async () => d.controller.state, (s) => s === 'safe', 'disarmed');

      // a short staircase from the page
      await page.getByTestId('seq-kind-staircase').click();
      for (const [k, v] of [['start', '30'], ['stop', '40'], ['step', '10'], ['ramp_s', '0.5'], ['hold_s', '1'], ['window_s', '0.5']] as const) {
        const input = page.getByTestId(`stair-${k}`);
        await input.fill(v);
        await input.dispatchEvent('change');
      }
      await page.getByTestId('seq-title').fill('KD-1 first look');
      await page.getByTestId('seq-start').click();
      await eventually(() => page.getByTestId('run').getAttribute('data-live'), (v) => v === 'false', 'the run over', 90_000);
      // the run over and the bench disarmed, mounting is open again
      await eventually(() => page.getByTestId('mount-apply').isDisabled(), (v) => v === false, 'mount open after the run');
      expect(await page.getByTestId('mount-closed').count()).toBe(0);
      await page.screenshot({ path: join(ARTIFACTS_DIR, 'dashboard-mount.png'), fullPage: true });

      const after = await fetch(`http://127.0.0.1:${d.port}/api/sessions?token=${d.token}`).then((r) => r.json() as Promise<{ sessions: { id: number; title: string }[] }>);
      // two new sessions: the arm and disarm by hand, then the run
      expect(after.sessions.length).toBe(sessionsBefore.sessions.length + 2);
      const sid = after.sessions.find((s) => s.title === 'KD-1 first look')!.id;
      const s = await fetch(`http://127.0.0.1:${d.port}/api/sessions/${sid}?token=${d.token}`).then((r) => r.json() as Promise<{ session: { mount: { slot: string; name: string; revision: number }[]; rig: { duct: { exit_diameter_m: number } | null } } }>);
      expect(s.session.mount.map((m) => m.slot)).toEqual(['propeller', 'motor', 'esc', 'supply', 'duct']);
      expect(s.session.mount.find((m) => m.slot === 'duct')).toMatchObject({ name: 'KD-1', revision: 1 });
      expect(s.session.mount.every((m) => m.revision === 1)).toBe(true);
      expect(s.session.rig.duct?.exit_diameter_m).toBe(0.2664);
      // the Sessions view shows the parts the run recorded, with their revisions
      await viewer.page.getByTestId('view-sessions').click();
      await viewer.page.getByTestId(`open-${sid}`).click();
      await eventually(() => text(viewer.page, 'session-parts'), (t) => /duct KD-1 \(#\d+ r1\)$/.test(t), 'the parts of the session');
      expect(ctl.errors).toEqual([]);
      expect(viewer.errors).toEqual([]);
    } finally {
      await ctl.context.close();
      await viewer.context.close();
    }
  }, 240_000);
});
