// A full disk, for real and by the store's size cap. (1) After writes have failed with a large backlog,
// freeing a little space is enough: the recorder retries in bounded chunks, halving them after each failure,
// so the first chunk that fits goes in (one transaction of the whole backlog never would). (2) On a small
// filesystem of its own (a tmpfs this test mounts, filled to the last byte), `ductbench serve` starts with
// recording off and a plain warning, and `sessions list|show` read what is there without writing. (3) A run
// whose record could not be written whole says so: in its outcome line, its exit status (3) and its JSON.
// Parts 2 and 3 need root (mount); without it they are skipped, saying why. Needs dist/ (npm test builds first).

import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync, statSync, truncateSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Sample } from '../server/bench/telemetry.js';
import { EXIT_RECORD_INCOMPLETE } from '../server/cli/run.js';
import { SessionStore } from '../server/store/store.js';
import type { RecorderWriteError } from '../server/store/recorder.js';
import { assertBuilt, DaemonProcess, runCli } from './helpers/sim-process.js';

const sample = (i: number): Sample => ({ t: 1_700_000_000_000 + i, dt: i * 1000, thrust: 1 + (i % 100) / 1000, voltage: 12 + (i % 7) / 100, current: 3 + (i % 11) / 100, power: 36.5, rpm: 5000 + (i % 13), temp: 25, torque: null, out: 0.3 });

describe('recording retries in bounded chunks', () => {
  it('after failures with a large backlog, a little free space is enough to make progress and recover', () => {
    const dir = mkdtempSync(join(tmpdir(), 'ductbench-chunks-'));
    try {
      const store = SessionStore.open(dir, { maxDatabaseBytes: 192 * 1024 });
      const errors: RecorderWriteError[] = [];
      let recovered = 0;
      const rec = store.record({ title: 'full' }, { onError: (e) => errors.push(e), onRecovered: () => recovered++, errorRepeatMs: 0 });
      let i = 0;
      while (errors.length === 0 && i < 500_000) rec.addSample(sample(i++));
      expect(errors[0].code).toBe('SQLITE_FULL');
      // A backlog of tens of thousands of samples (well over a megabyte of blocks) waits in memory.
      for (let k = 0; k < 40_000; k++) rec.addSample(sample(i++));
      for (let k = 0; k < 8; k++) rec.flush();
      const keptBefore = store.summary(rec.id).sample_count;
      // The operator frees a little: about 64 kB more, far less than the backlog needs in one go.
      const page = store.db.pragma('page_size', { simple: true }) as number;
      const pages = store.db.pragma('page_count', { simple: true }) as number;
      store.db.pragma(`max_page_count = ${pages + Math.ceil(65536 / page)}`);
      for (let k = 0; k < 10; k++) rec.flush();
      const keptAfter = store.summary(rec.id).sample_count;
      expect(keptAfter).toBeGreaterThan(keptBefore);
      // Full again (the backlog is larger than what was freed): not yet recovered, the rest still waits.
      expect(recovered).toBe(0);
      expect(rec.pending.samples).toBeGreaterThan(0);
      // Room for all of it: drained over a few ticks, and the operator hears that recording works again.
      store.db.pragma('max_page_count = 1073741823');
      for (let k = 0; k < 100 && rec.pending.samples > 0; k++) rec.flush();
      expect(rec.pending.samples).toBe(0);
      expect(recovered).toBe(1);
      // Nothing was dropped meanwhile (the backlog stayed within its memory bound): the record is whole.
      const summary = rec.finish('completed');
      expect(summary).toMatchObject({ complete: true, samples_taken: i, samples_kept: i });
      expect(store.summary(rec.id).sample_count).toBe(i);
      store.close();
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });
});

// ------------------------------------------------------------------ a small filesystem of our own

function mountUnavailable(): string | null {
  if (process.getuid?.() !== 0) return 'not root: cannot mount a small filesystem';
  return null;
}
const unavailable = mountUnavailable();

/** Fills the filesystem at `dir` to the last byte with a file; returns its path. */
function fill(dir: string): string {
  const filler = join(dir, 'filler');
  try {
    execFileSync('dd', ['if=/dev/zero', `of=${filler}`, 'bs=64k'], { stdio: 'pipe' });
  } catch {
    /* dd stops at ENOSPC: that is the point */
  }
  return filler;
}

describe.skipIf(unavailable !== null)(`a data folder on a full filesystem${unavailable ? ` (skipped: ${unavailable})` : ''}`, () => {
  let mnt = '';
  const children: DaemonProcess[] = [];
  beforeAll(() => {
    assertBuilt();
    mnt = mkdtempSync(join(tmpdir(), 'ductbench-fullfs-'));
    execFileSync('mount', ['-t', 'tmpfs', '-o', 'size=6m', 'tmpfs', mnt]);
  });
  afterAll(async () => {
    for (const c of children) await c.close();
    try {
      execFileSync('umount', [mnt]);
    } catch {
      /* not mounted */
    }
    rmSync(mnt, { recursive: true, force: true });
  });

  it('serve starts with recording off and a plain warning; sessions list and show read what is there', async () => {
    const data = join(mnt, 'serve');
    // A recorded session first, then the disk fills up to the last byte.
    const r0 = await runCli(['run', '--sim', '--staircase', '0.2,0.3,0.1', '--hold', '1', '--data-dir', data, '--json'], 60_000);
    expect(r0.code, r0.stderr).toBe(0);
    const filler = fill(mnt);
    expect(statSync(filler).size).toBeGreaterThan(0);

    const serve = new DaemonProcess(['serve', '--sim', '--http-port', '0', '--data-dir', data]);
    children.push(serve);
    await serve.stdoutMatch(/dashboard: http:\/\/127\.0\.0\.1:(\d+)\//);
    expect(serve.running).toBe(true);
    expect(serve.stderr).toMatch(/WARNING: recording is OFF: the session store in .* cannot be written/);
    await serve.close();

    const list = await runCli(['sessions', 'list', '--data-dir', data, '--json']);
    expect(list.code, list.stderr).toBe(0);
    const sessions = JSON.parse(list.stdout) as { id: number; outcome: string }[];
    expect(sessions.map((s) => s.outcome)).toContain('completed');
    const show = await runCli(['sessions', 'show', String(sessions[0].id), '--data-dir', data, '--json']);
    expect(show.code, show.stderr).toBe(0);
    expect((JSON.parse(show.stdout) as { points: unknown[] }).points.length).toBe(2);
    rmSync(filler);
  });

  it('a run whose record could not be written whole says so: outcome line, exit status 3, JSON', async () => {
    const data = join(mnt, 'run');
    // Room for the store and the session row, then a little: the sweep's samples cannot all fit.
    SessionStore.open(data).close();
    const filler = fill(mnt);
    truncateSync(filler, Math.max(0, statSync(filler).size - 96 * 1024));
    const r = await runCli(['run', '--sim', '--staircase', '0.2,0.4,0.1', '--hold', '3', '--data-dir', data, '--json'], 90_000);
    rmSync(filler);
    expect(r.code, r.stderr).toBe(EXIT_RECORD_INCOMPLETE);
    const out = JSON.parse(r.stdout) as { outcome: string; record: { complete: boolean; samples_taken: number; samples_kept: number; points_taken: number; points_kept: number; text: string } };
    expect(out.outcome).toBe('completed');
    expect(out.record.complete).toBe(false);
    expect(out.record.points_taken).toBe(3);
    expect(out.record.samples_kept).toBeLessThan(out.record.samples_taken);
    expect(out.record.text).toMatch(/record incomplete: \d+ of 3 points and \d+ of \d+ samples kept/);
    expect(r.stderr).toMatch(/record incomplete/);
  });
});
