// Benchmark and test side of crowd-child.ts: N dashboards connecting at once from another process, and a
// history seed so that their snapshots are the largest the daemon sends.

import { spawn, type ChildProcess } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import type { Sample } from '../server/bench/telemetry.js';

// dist/bench/crowd.js -> its sibling; bench/crowd.ts under vitest -> the compiled child (npm test builds first).
const CHILD = fileURLToPath(import.meta.url.endsWith('.ts') ? new URL('../dist/bench/crowd-child.js', import.meta.url) : new URL('./crowd-child.js', import.meta.url));

export interface CrowdReady {
  snapshots: number;
  failed: number;
  bytes: number;
  ms: number;
}

export class Crowd {
  private constructor(
    private readonly child: ChildProcess,
    readonly ready: CrowdReady,
  ) {}

  /** Opens n WebSockets at once from a child process; resolves once each has its snapshot (or failed). */
  static async connect(port: number, token: string, n: number, timeoutMs = 120_000): Promise<Crowd> {
    const child = spawn(process.execPath, [CHILD, JSON.stringify({ port, token, n })], { stdio: ['pipe', 'pipe', 'pipe'] });
    let err = '';
    child.stderr!.on('data', (d: Buffer) => (err += d.toString()));
    const ready = await new Promise<CrowdReady>((resolve, reject) => {
      let buf = '';
      const timer = setTimeout(() => reject(new Error(`crowd of ${n} not ready within ${timeoutMs} ms: ${err}`)), timeoutMs);
      child.stdout!.on('data', (d: Buffer) => {
        buf += d.toString();
        const nl = buf.indexOf('\n');
        if (nl < 0) return;
        clearTimeout(timer);
        resolve(JSON.parse(buf.slice(0, nl)) as CrowdReady);
      });
      child.once('exit', (code) => {
        clearTimeout(timer);
        reject(new Error(`crowd child exited (${code}): ${err}`));
      });
    });
    return new Crowd(child, ready);
  }

  close(): Promise<void> {
    if (this.child.exitCode !== null) return Promise.resolve();
    return new Promise((resolve) => {
      this.child.once('exit', () => resolve());
      this.child.stdin!.end();
      setTimeout(() => this.child.kill('SIGKILL'), 3000).unref();
    });
  }
}

/**
 * `rows` samples at `rateHz` ending at `endMs`, as the bench's thread hands them to the web side. With
 * rows = HISTORY_CAPACITY at 1 kHz the web side's ring is exactly as after an hour of 1 kHz telemetry (it keeps
 * its newest rows), and the snapshot window is full. Call before the link delivers its first sample, so the
 * ring stays in time order.
 */
export function seedHistory(add: (s: Sample) => void, rows: number, rateHz: number, endMs: number): void {
  const step = 1000 / rateHz;
  for (let i = 0; i < rows; i++) {
    const t = endMs - (rows - i) * step;
    // A spinning rotor at a steady point with some ripple: every channel present, as a full TEL line gives,
    // at the resolution of the bench's sensors (mN, 10 mV, 10 mA, 1 rpm), which is what sets the JSON's size.
    const w = Math.sin(i / 50);
    const r = (x: number, q: number) => Math.round(x / q) * q;
    const voltage = r(15.9 - 0.01 * w, 0.01);
    const current = r(9.1 + 0.1 * w, 0.01);
    add({ t: Math.round(t), dt: Math.round(i * step * 1000), thrust: r(4.2 + 0.05 * w, 0.001), voltage, current, power: r(voltage * current, 0.01), rpm: Math.round(8200 + 20 * w), temp: 31.5, torque: r(0.061 + 0.001 * w, 0.0001), out: 0.45 });
  }
}
