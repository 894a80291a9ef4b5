// A linked pair of pseudo-terminals made by socat: whatever is written to one end is read from the other,
// through the operating system's real tty layer. Used to run the virtual bench as if it were a board on a
// serial port, and by tests and benchmarks of the serial path.

import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

export interface PtyPair {
  /** One end (give this to the daemon as --port). */
  a: string;
  /** The other end (the device side). */
  b: string;
  close(): Promise<void>;
}

export class PtyUnavailable extends Error {
  override name = 'PtyUnavailable';
}

export function socatPath(): string | null {
  const r = spawnSync('sh', ['-c', 'command -v socat'], { encoding: 'utf8' });
  const p = r.stdout.trim();
  return r.status === 0 && p ? p : null;
}

/** Opens a pty pair. `links` chooses the symlink paths; a private temp folder otherwise. */
export async function openPtyPair(links?: { a: string; b: string }, timeoutMs = 5000): Promise<PtyPair> {
  const socat = socatPath();
  if (!socat) throw new PtyUnavailable('socat not found: install it (Debian/Ubuntu: apt-get install socat) to use a pseudo-terminal');
  let dir: string | null = null;
  if (!links) {
    dir = mkdtempSync(join(tmpdir(), 'ductbench-pty-'));
    links = { a: join(dir, 'a'), b: join(dir, 'b') };
  }
  for (const p of [links.a, links.b]) if (existsSync(p)) rmSync(p, { force: true });
  const child: ChildProcess = spawn(socat, ['-d', '-d', `pty,raw,echo=0,link=${links.a}`, `pty,raw,echo=0,link=${links.b}`], { stdio: ['ignore', 'ignore', 'pipe'] });
  let stderr = '';
  child.stderr?.on('data', (d: Buffer) => (stderr += d.toString()));
  const deadline = Date.now() + timeoutMs;
  // socat prints "starting data transfer loop" once both ends exist.
  while (!stderr.includes('starting data transfer loop')) {
    if (child.exitCode !== null) throw new PtyUnavailable(`socat exited: ${stderr.trim().split('\n').pop() ?? ''}`);
    if (Date.now() > deadline) {
      child.kill('SIGKILL');
      throw new PtyUnavailable('socat did not create the pseudo-terminals in time');
    }
    await new Promise((r) => setTimeout(r, 10));
  }
  const { a, b } = links;
  return {
    a,
    b,
    close: () =>
      new Promise<void>((resolve) => {
        const done = () => {
          if (dir) rmSync(dir, { recursive: true, force: true });
          resolve();
        };
        if (child.exitCode !== null) return done();
        child.once('exit', done);
        child.kill('SIGTERM');
      }),
  };
}
