// The built dashboard in headless Chromium against the real daemon on the in-process virtual bench: it
// connects with the token from the printed URL, the charts move with bench data, arm and a manual throttle
// spin the motor, stop (button and key) cuts the output at the device, a second browser is a viewer that
// cannot command, and the prediction overlay is drawn.

import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Browser } from 'playwright-core';
import { startDaemon, type RunningDaemon } from '../../server/daemon.js';
import { ARTIFACTS_DIR, buildDashboard, eventually, launchBrowser, openDashboard } from './harness.js';
import { mkdir } from 'node:fs/promises';

let browser: Browser;
let d: RunningDaemon;

beforeAll(async () => {
  const webRoot = await buildDashboard();
  await mkdir(ARTIFACTS_DIR, { recursive: true });
  d = await startDaemon({ source: { kind: 'sim', seed: 21 }, httpPort: 0, webRoot, log: () => {} });
  await d.firstConnect;
  browser = await launchBrowser();
}, 120_000);

afterAll(async () => {
  await browser?.close();
  await d?.close();
});

const canvasImage = (page: import('playwright-core').Page, sel: string) => page.locator(`${sel} canvas`).first().evaluate((c) => (c as HTMLCanvasElement).toDataURL());

describe('dashboard on the real daemon', () => {
  it('loads with the token, plots move, arm + throttle spin the motor, stop cuts it', async () => {
    const { page, errors, context } = await openDashboard(browser, d.url);
    try {
      // charts update with virtual-bench data
      const img1 = await canvasImage(page, 'db-live-chart[channel="voltage"]');
      await eventually(() => canvasImage(page, 'db-live-chart[channel="voltage"]'), (img) => img !== img1, 'the voltage chart to change');
      // the device identity is shown
      await page.locator('db-identity-card').getByText(/vbench/).first().waitFor({ state: 'visible' });
      // the model overlay arrived in the snapshot
      await expect(page.locator('db-efficiency-chart .head').textContent()).resolves.not.toContain('no model overlay');

      expect(d.controller.view(), 'bench before arming').toMatchObject({ state: 'safe' });
      expect(await page.getByTestId('viewer-note').count(), 'this dashboard is the controller').toBe(0);
      await page.getByTestId('arm').click();
      await eventually(async () => d.controller.state, (s) => s === 'armed', 'armed');
      const number = page.getByTestId('throttle-number');
      await number.fill('45');
      await number.press('Enter');
      await eventually(async () => d.sim!.state.output, (o) => o > 0.44, 'device output at 45 %');
      const thrust1 = await canvasImage(page, 'db-live-chart[channel="thrust"]');
      await eventually(() => canvasImage(page, 'db-live-chart[channel="thrust"]'), (img) => img !== thrust1, 'the thrust chart to move');
      await eventually(() => page.locator('db-efficiency-chart').getAttribute('data-points'), (p) => Number(p) > 5, 'thrust-per-watt points');
      await page.screenshot({ path: join(ARTIFACTS_DIR, 'dashboard-daemon-running.png'), fullPage: true });

      await page.getByTestId('stop').click();
      await eventually(async () => d.sim!.state.output, (o) => o === 0, 'device output cut by the stop button');
      expect(d.sim!.state.armed).toBe(false);
      await eventually(async () => d.controller.state, (s) => s === 'tripped', 'tripped (estop latched)');
      expect(errors).toEqual([]);
    } finally {
      await context.close();
    }
  });

  it('Escape stops the motor; a second browser is a viewer that cannot command', async () => {
    // clear the latch left by the previous test
    if (d.controller.state === 'tripped') await d.controller.acknowledge();
    const ctl = await openDashboard(browser, d.url);
    const viewer = await openDashboard(browser, d.url);
    try {
      await ctl.page.getByTestId('arm').click();
      await eventually(async () => d.controller.state, (s) => s === 'armed', 'armed');
      await d.controller.setThrottle(0.3);
      await eventually(async () => d.sim!.state.output, (o) => o > 0.29, 'output up');
      // the viewer's controls are disabled and its Arm cannot reach the bench
      await expect(viewer.page.getByTestId('arm').isDisabled()).resolves.toBe(true);
      await viewer.page.screenshot({ path: join(ARTIFACTS_DIR, 'dashboard-daemon-viewer.png') });
      await ctl.page.locator('body').press('Escape');
      await eventually(async () => d.sim!.state.output, (o) => o === 0, 'device output cut by Escape');
      expect(ctl.errors).toEqual([]);
    } finally {
      await ctl.context.close();
      await viewer.context.close();
    }
  });
});
