// A recording daemon killed at a random moment: a real child process records samples at a steady rate into a
// store in a temporary folder and is SIGKILLed mid-run. On reopen the file is intact, the session is marked
// interrupted and the samples run without a hole up to within 250 ms of the last one the child handed over.
// Needs the compiled store (npm test builds first; alone: npx tsc -p tsconfig.json).

import { spawn } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { pathToFileURL } from 'node:url';
import Database from 'better-sqlite3';
import { afterEach, expect, it } from 'vitest';
import { DB_FILE, SessionStore } from '../server/store/store.js';

const DIST_STORE = resolve('dist/server/store/store.js');
const dirs: string[] = [];
afterEach(() => {
  for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
});

const CHILD = (storeUrl: string, dataDir: string) => `
import { SessionStore } from ${JSON.stringify(storeUrl)};
const store = SessionStore.open(${JSON.stringify(dataDir)});
const rec = store.record({ title: 'crash test', tags: ['crash'] });
let seq = 0;
// 5 samples every 10 ms: 500 samples/s, the virtual bench's telemetry rate. dt carries the sequence number so
// the parent can check the stored rows have no hole.
setInterval(() => {
  const t = Date.now();
  for (let k = 0; k < 5; k++) {
    rec.addSample({ t, dt: seq, thrust: 1 + (seq % 100) / 100, voltage: 14.8, current: 3, power: 44.4, rpm: null, temp: null, torque: null, out: 0.5 });
    seq++;
  }
  process.stdout.write('added ' + t + ' ' + seq + '\\n');
}, 10);
process.stdout.write('ready ' + rec.id + '\\n');
`;

it('a SIGKILLed recorder loses at most the last batch and its session is marked interrupted', async () => {
  expect(existsSync(DIST_STORE), `${DIST_STORE} missing: build first (npx tsc -p tsconfig.json)`).toBe(true);
  const dir = mkdtempSync(join(tmpdir(), 'ductbench-crash-'));
  dirs.push(dir);
  const script = join(dir, 'child.mjs');
  writeFileSync(script, CHILD(pathToFileURL(DIST_STORE).href, dir));
  const child = spawn(process.execPath, [script], { stdio: ['ignore', 'pipe', 'inherit'] });
  let id = -1;
  let lastAdded = 0;
  let added = 0;
  let buf = '';
  const exited = new Promise<NodeJS.Signals | null>((res) => child.once('exit', (_code, sig) => res(sig)));
  // Kill once about 1.5 s of samples have been handed over, in the middle of the stream.
  const enough = new Promise<void>((res, rej) => {
    child.stdout.on('data', (chunk: Buffer) => {
      buf += chunk.toString();
      let nl;
      while ((nl = buf.indexOf('\n')) >= 0) {
        const line = buf.slice(0, nl);
        buf = buf.slice(nl + 1);
        const [word, a, b] = line.split(' ');
        if (word === 'ready') id = Number(a);
        if (word === 'added') {
          lastAdded = Number(a);
          added = Number(b);
          if (added >= 750) res();
        }
      }
    });
    child.once('exit', (code) => rej(new Error(`child exited early with ${code}`)));
  });
  await enough;
  // Every line read so far was written after its samples reached the recorder.
  const handedOverUntil = lastAdded;
  child.kill('SIGKILL');
  expect(await exited).toBe('SIGKILL');

  const raw = new Database(join(dir, DB_FILE));
  expect(raw.pragma('integrity_check', { simple: true })).toBe('ok');
  raw.close();

  const store = SessionStore.open(dir);
  const s = store.get(id);
  expect(s.outcome).toBe('interrupted');
  expect(s.events.some((e) => /interrupted/.test(e.text))).toBe(true);
  const b = store.samples(id);
  expect(b.t.length).toBeGreaterThan(0);
  // No hole: rows 0..n-1 in order.
  for (let i = 0; i < b.dt.length; i++) if (b.dt[i] !== i) throw new Error(`sample ${i} holds sequence ${b.dt[i]}`);
  expect(s.sample_count).toBe(b.t.length);
  const lastStored = b.t[b.t.length - 1];
  expect(handedOverUntil - lastStored).toBeLessThanOrEqual(250);
  expect(s.ended_at).toBe(lastStored);
  store.close();
});
