// Test helpers for crashes and stalls, where the bench and the daemon must live in different processes:
// - SimProcess: the virtual bench behind a pty in a child process (sim-child.mjs), whose state the test asks for;
// - DaemonProcess: the compiled `ductbench` CLI as a child process, with its stdout and stderr kept;
// - waitFor: polls a condition (sync or async) until it holds, with a generous time-out.
// Everything they start is ended by close(); tests call it in afterEach. Needs dist/ (npx tsc -p tsconfig.json).

import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import type { BenchSnapshot, FirmwareBug, FwTransition, InjectedFaultKind } from '../../server/sim/index.js';

export const BIN = fileURLToPath(new URL('../../bin/ductbench.js', import.meta.url));
const CHILD = fileURLToPath(new URL('./sim-child.mjs', import.meta.url));
const BUILT_SIM = fileURLToPath(new URL('../../dist/server/sim/index.js', import.meta.url));
const BUILT_CLI = fileURLToPath(new URL('../../dist/server/cli.js', import.meta.url));

export function assertBuilt(): void {
  for (const f of [BUILT_SIM, BUILT_CLI]) if (!existsSync(f)) throw new Error(`${f} is missing: build first (npx tsc -p tsconfig.json; npm test does)`);
}

/** Resolves once check() holds (it may be async); rejects after timeoutMs with the label (a function: read late). */
export async function waitFor(check: () => boolean | Promise<boolean>, timeoutMs = 10_000, label: string | (() => string) = 'condition', everyMs = 20): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  for (;;) {
    if (await check()) return;
    if (Date.now() > deadline) throw new Error(`timed out after ${timeoutMs} ms waiting for ${typeof label === 'string' ? label : label()}`);
    await new Promise((r) => setTimeout(r, everyMs));
  }
}

function exitOf(child: ChildProcess): Promise<{ code: number | null; signal: NodeJS.Signals | null }> {
  if (child.exitCode !== null || child.signalCode !== null) return Promise.resolve({ code: child.exitCode, signal: child.signalCode });
  return new Promise((resolve) => child.once('exit', (code, signal) => resolve({ code, signal })));
}

/** Ends a child: SIGTERM, then SIGKILL if it has not gone within graceMs. Resolves once it has exited. */
async function endChild(child: ChildProcess, graceMs: number): Promise<void> {
  const exited = exitOf(child);
  if (child.exitCode !== null || child.signalCode !== null) return;
  child.kill('SIGTERM');
  const t = setTimeout(() => child.kill('SIGKILL'), graceMs);
  await exited;
  clearTimeout(t);
}

export class SimProcess {
  private nextId = 1;
  private readonly waiting = new Map<number, (msg: Record<string, unknown>) => void>();
  private buf = '';
  stderr = '';

  private constructor(
    readonly child: ChildProcess,
    readonly devicePath: string,
  ) {}

  static async start(
    opts: { seed?: number; link?: string; timeoutMs?: number; rigSim?: Record<string, unknown>; resetOnOpenMs?: number; bugs?: FirmwareBug[] } = {},
  ): Promise<SimProcess> {
    assertBuilt();
    const child = spawn(process.execPath, [CHILD, JSON.stringify(opts)], { stdio: ['pipe', 'pipe', 'pipe'] });
    let stderr = '';
    child.stderr!.on('data', (d: Buffer) => (stderr += d.toString()));
    const ready = await new Promise<{ devicePath: string; rest: string }>((resolve, reject) => {
      let buf = '';
      const timer = setTimeout(() => reject(new Error(`sim child not ready: ${stderr}`)), opts.timeoutMs ?? 15_000);
      const onData = (d: Buffer) => {
        buf += d.toString();
        const nl = buf.indexOf('\n');
        if (nl < 0) return;
        clearTimeout(timer);
        child.stdout!.off('data', onData);
        const msg = JSON.parse(buf.slice(0, nl)) as { devicePath: string };
        resolve({ devicePath: msg.devicePath, rest: buf.slice(nl + 1) });
      };
      child.stdout!.on('data', onData);
      child.once('exit', (code) => {
        clearTimeout(timer);
        reject(new Error(`sim child exited (${code}) before it was ready: ${stderr}`));
      });
    });
    const p = new SimProcess(child, ready.devicePath);
    p.stderr = stderr;
    child.stderr!.on('data', (d: Buffer) => (p.stderr += d.toString()));
    p.onData(ready.rest);
    child.stdout!.on('data', (d: Buffer) => p.onData(d.toString()));
    return p;
  }

  private onData(text: string): void {
    this.buf += text;
    let nl;
    while ((nl = this.buf.indexOf('\n')) >= 0) {
      const line = this.buf.slice(0, nl);
      this.buf = this.buf.slice(nl + 1);
      if (!line) continue;
      const msg = JSON.parse(line) as Record<string, unknown>;
      const id = msg.id as number | undefined;
      if (id !== undefined) {
        this.waiting.get(id)?.(msg);
        this.waiting.delete(id);
      }
    }
  }

  private request(op: string, extra: Record<string, unknown> = {}, timeoutMs = 10_000): Promise<Record<string, unknown>> {
    const id = this.nextId++;
    return new Promise((resolve, reject) => {
      const timer = setTimeout(() => {
        this.waiting.delete(id);
        reject(new Error(`sim child did not answer ${op} within ${timeoutMs} ms`));
      }, timeoutMs);
      this.waiting.set(id, (msg) => {
        clearTimeout(timer);
        if (typeof msg.error === 'string') reject(new Error(msg.error));
        else resolve(msg);
      });
      this.child.stdin!.write(JSON.stringify({ id, op, ...extra }) + '\n');
    });
  }

  async state(): Promise<BenchSnapshot> {
    return (await this.request('state')).state as BenchSnapshot;
  }

  async transitions(): Promise<FwTransition[]> {
    return (await this.request('transitions')).transitions as FwTransition[];
  }

  /** Heartbeats the board received since the last reset and the longest gap between two, in its own time. */
  async heartbeats(reset = false): Promise<{ count: number; maxGapMs: number }> {
    return (await this.request('heartbeats', { reset })).heartbeats as { count: number; maxGapMs: number };
  }

  async inject(kind: InjectedFaultKind, options: Record<string, unknown> = {}): Promise<void> {
    await this.request('inject', { kind, options });
  }

  /** Polls the bench's state until pred holds. */
  async until(pred: (s: BenchSnapshot) => boolean, timeoutMs = 10_000, label = 'bench state'): Promise<BenchSnapshot> {
    let last: BenchSnapshot | null = null;
    await waitFor(async () => pred((last = await this.state())), timeoutMs, () => `${label} (last: ${JSON.stringify(last)})`);
    return last!;
  }

  async close(): Promise<void> {
    this.child.stdin!.end();
    await endChild(this.child, 3000);
  }
}

export class DaemonProcess {
  readonly child: ChildProcess;
  stdout = '';
  stderr = '';
  readonly exited: Promise<{ code: number | null; signal: NodeJS.Signals | null }>;

  constructor(
    readonly args: string[],
    env: Record<string, string> = {},
  ) {
    assertBuilt();
    this.child = spawn(process.execPath, [BIN, ...args], { env: { ...process.env, ...env }, stdio: ['ignore', 'pipe', 'pipe'] });
    this.child.stdout!.on('data', (d: Buffer) => (this.stdout += d.toString()));
    this.child.stderr!.on('data', (d: Buffer) => (this.stderr += d.toString()));
    this.exited = exitOf(this.child);
  }

  get pid(): number {
    return this.child.pid!;
  }

  get running(): boolean {
    return this.child.exitCode === null && this.child.signalCode === null;
  }

  /** Waits until stdout matches, and returns the match. */
  async stdoutMatch(re: RegExp, timeoutMs = 20_000): Promise<RegExpMatchArray> {
    let m: RegExpMatchArray | null = null;
    await waitFor(() => {
      if (!this.running && !(m = this.stdout.match(re))) throw new Error(`ductbench ${this.args[0]} exited before printing ${re}: ${this.stderr}`);
      return (m = this.stdout.match(re)) !== null;
    }, timeoutMs, `stdout ${re}`);
    return m!;
  }

  kill(signal: NodeJS.Signals): void {
    this.child.kill(signal);
  }

  async close(): Promise<void> {
    await endChild(this.child, 3000);
  }
}

/** Runs the compiled CLI to completion and returns its output. */
export function runCli(args: string[], timeoutMs = 20_000): Promise<{ code: number | null; stdout: string; stderr: string }> {
  const d = new DaemonProcess(args);
  const timer = setTimeout(() => d.kill('SIGKILL'), timeoutMs);
  return d.exited.then(({ code }) => {
    clearTimeout(timer);
    return { code, stdout: d.stdout, stderr: d.stderr };
  });
}
