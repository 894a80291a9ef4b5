// Reusable pieces for headless-browser tests of the dashboard: Debian's chromium through playwright-core,
// a build of the dashboard into a folder of the test's choosing, and a helper that opens a dashboard URL and
// waits until it is live. The mock-server test uses them now; the daemon's end-to-end test can use the same.

import { execFile } from 'node:child_process';
import { mkdtemp } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { chromium, type Browser, type BrowserContext, type Page } from 'playwright-core';

export const REPO_ROOT = resolve(fileURLToPath(new URL('.', import.meta.url)), '../..');
export const ARTIFACTS_DIR = join(REPO_ROOT, 'test-artifacts');
export const CHROMIUM_PATH = process.env.DUCTBENCH_CHROMIUM ?? '/usr/bin/chromium';

/** Waits are generous: a loaded 2-core machine can take seconds to start chromium and paint. */
export const WAIT_MS = 30_000;

export function launchBrowser(): Promise<Browser> {
  return chromium.launch({
    executablePath: CHROMIUM_PATH,
    args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-component-update', '--no-first-run', '--disable-sync'],
    timeout: 60_000,
  });
}

/**
 * Builds the dashboard with the project's own Vite config into outDir (a fresh temp folder by default, so a
 * test never races another build of dist/web). Returns the folder.
 */
export async function buildDashboard(outDir?: string): Promise<string> {
  const out = outDir ?? (await mkdtemp(join(tmpdir(), 'ductbench-web-')));
  const vite = join(REPO_ROOT, 'node_modules/vite/bin/vite.js');
  await new Promise<void>((done, fail) => {
    execFile(
      process.execPath,
      [vite, 'build', '--config', 'web/vite.config.ts', '--logLevel', 'warn', '--outDir', out, '--emptyOutDir'],
      { cwd: REPO_ROOT, timeout: 120_000 },
      (err, _stdout, stderr) => (err ? fail(new Error(`dashboard build failed: ${err.message}\n${stderr}`)) : done()),
    );
  });
  return out;
}

export interface OpenedDashboard {
  context: BrowserContext;
  page: Page;
  /** Uncaught page errors and console errors, for the test to assert on. */
  errors: string[];
}

export interface OpenOptions {
  /** Wait for the live state (default) or just for the app to exist (for tests of refusals). */
  waitFor?: 'live' | 'app';
  viewport?: { width: number; height: number };
  timeoutMs?: number;
}

/**
 * Opens url in a fresh browser context (its own sessionStorage and localStorage) and waits until the
 * dashboard reports data-connection="live", i.e. the snapshot has arrived.
 */
export async function openDashboard(browser: Browser, url: string, opts: OpenOptions = {}): Promise<OpenedDashboard> {
  const timeout = opts.timeoutMs ?? WAIT_MS;
  const context = await browser.newContext({ viewport: opts.viewport ?? { width: 1400, height: 1000 } });
  const page = await context.newPage();
  page.setDefaultTimeout(timeout);
  const errors: string[] = [];
  page.on('pageerror', (e) => errors.push(`pageerror: ${e.message}`));
  page.on('console', (m) => {
    // A refused WebSocket logs a console error by itself; those are the browser's, not ours.
    if (m.type() === 'error' && !/WebSocket connection to .* failed/.test(m.text())) errors.push(`console: ${m.text()}`);
  });
  await page.goto(url, { waitUntil: 'load', timeout });
  if ((opts.waitFor ?? 'live') === 'live') await waitForConnection(page, 'live', timeout);
  else await page.waitForSelector('db-app', { timeout });
  return { context, page, errors };
}

export async function waitForConnection(page: Page, state: string, timeoutMs = WAIT_MS): Promise<void> {
  await page.waitForSelector(`db-app[data-connection="${state}"]`, { timeout: timeoutMs, state: 'attached' });
}

/** Polls fn until it returns a value accepted by ok (no fixed sleeps: each poll is a round trip to the page). */
export async function eventually<T>(fn: () => Promise<T>, ok: (v: T) => boolean, what: string, timeoutMs = WAIT_MS): Promise<T> {
  const end = Date.now() + timeoutMs;
  let last: T | undefined;
  for (;;) {
    last = await fn();
    if (ok(last)) return last;
    if (Date.now() > end) throw new Error(`timed out waiting for ${what}; last value ${JSON.stringify(last)}`);
    await new Promise((r) => setTimeout(r, 50));
  }
}
