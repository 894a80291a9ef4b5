// Ingest through a real pseudo-terminal, and serial-line-to-WebSocket latency. Every reader here gets the same
// stream from the same producer process through its own fresh socat pty pair:
//   - the full daemon (child process): split, checksum, decode, calibration, interlocks, session recorder
//     (armed, temp data folder), history, broadcast to a connected WebSocket client;
//   - a bare read-and-split through the daemon's own SerialTransport and LineSplitter (no decoding);
//   - a bare read through serialport's own 'data' events (the read path the daemon used before);
//   - Debian's python3-serial, readline() and a chunked read(in_waiting), when /usr/bin/python3 has it.

import { fork, spawn } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { SerialPort } from 'serialport';
import WebSocket from 'ws';
import type { ServerMessage } from '../server/api/messages.js';
import { LineSplitter } from '../firmware-protocol/src/lines.js';
import { SerialTransport } from '../server/link/serial-transport.js';
import { BENCH_DIR, spread, withProducer, type Spread } from './common.js';
import type { ChildConfig, ChildResult } from './daemon-child.js';

interface DaemonChild {
  send(m: { type: string }): void;
  next<T>(type: string): Promise<T>;
  port: number;
  token: string;
  stop(): Promise<void>;
}

async function forkDaemon(cfg: ChildConfig): Promise<DaemonChild> {
  const child = fork(`${BENCH_DIR}/daemon-child.js`, [JSON.stringify(cfg)], { stdio: ['ignore', 'inherit', 'inherit', 'ipc'], execArgv: ['--expose-gc'] });
  const waiting = new Map<string, (m: unknown) => void>();
  const exited = new Promise<void>((r) => child.once('exit', () => r()));
  child.on('message', (m: { type: string }) => {
    const w = waiting.get(m.type);
    waiting.delete(m.type);
    w?.(m);
  });
  const next = <T>(type: string) =>
    new Promise<T>((res, rej) => {
      waiting.set(type, (m) => res(m as T));
      void exited.then(() => rej(new Error(`daemon child exited before "${type}"`)));
    });
  const hello = await next<{ port: number; token: string }>('listening');
  return {
    send: (m) => child.send(m),
    next,
    port: hello.port,
    token: hello.token,
    async stop() {
      if (child.exitCode === null) child.kill('SIGTERM');
      await exited;
    },
  };
}

function connectClient(port: number, token: string, onMessage: (data: WebSocket.RawData) => void = () => {}): Promise<WebSocket> {
  const ws = new WebSocket(`ws://127.0.0.1:${port}/ws?token=${token}`);
  ws.on('message', onMessage);
  return new Promise((res, rej) => {
    ws.once('open', () => res(ws));
    ws.once('error', rej);
  });
}

export interface DaemonIngest extends ChildResult {
  /** WebSocket messages the connected client received while ingesting. */
  ws_messages: number;
}

/**
 * The full daemon on a pty, armed, recording into a temp data folder, with a dashboard client connected.
 * COUNT flooded lines; memory read after `warmup` samples and at the end (after a forced GC each time).
 */
export async function daemonIngest(count: number, warmup: number, timeoutMs: number): Promise<DaemonIngest> {
  const dataDir = mkdtempSync(join(tmpdir(), 'ductbench-bench-data-'));
  try {
    return await withProducer('flood', count, 0, async (p) => {
      const d = await forkDaemon({ path: p.path, dataDir, arm: true, count, warmup });
      let messages = 0;
      const ws = await connectClient(d.port, d.token, () => messages++);
      try {
        d.send({ type: 'start' });
        const timer = new Promise<never>((_, rej) => setTimeout(() => rej(new Error(`daemon ingest of ${count} lines took over ${timeoutMs} ms`)), timeoutMs).unref());
        const result = await Promise.race([d.next<ChildResult>('result'), timer]);
        return { ...result, ws_messages: messages };
      } finally {
        ws.terminate();
        await d.stop();
      }
    });
  } finally {
    rmSync(dataDir, { recursive: true, force: true });
  }
}

/** Baseline: the same stream through the daemon's SerialTransport and LineSplitter, only counting lines. */
export async function bareTransportRead(count: number): Promise<number> {
  return withProducer('flood', count, 0, async (p) => {
    const t = new SerialTransport(p.path);
    let n = 0;
    let t0 = 0;
    let finish: (ms: number) => void = () => {};
    const done = new Promise<number>((r) => (finish = r));
    const splitter = new LineSplitter(() => {
      if (++n === count) finish(performance.now() - t0);
    });
    await t.open({
      onData: (chunk) => {
        if (t0 === 0) t0 = performance.now();
        splitter.push(chunk);
      },
      onClose: () => {},
    });
    await t.write('go\n');
    const ms = await done;
    await t.close();
    return (count - 1) / (ms / 1000);
  });
}

/** Baseline: serialport's own 'data' events (its thread-pool reads), counting newlines. */
export async function bareSerialportRead(count: number): Promise<number> {
  return withProducer('flood', count, 0, async (p) => {
    const port = new SerialPort({ path: p.path, baudRate: 115200, autoOpen: false, hupcl: false });
    await new Promise<void>((res, rej) => port.open((e) => (e ? rej(e) : res())));
    let n = 0;
    let t0 = 0;
    const ms = await new Promise<number>((resolve) => {
      port.on('data', (b: Buffer) => {
        if (n === 0) t0 = performance.now();
        let i = -1;
        while ((i = b.indexOf(10, i + 1)) >= 0) n++;
        if (n >= count) resolve(performance.now() - t0);
      });
      port.write('go\n');
    });
    await new Promise<void>((r) => port.close(() => r()));
    return (count - 1) / (ms / 1000);
  });
}

const PY = String.raw`
import sys, time, serial
path, mode, count = sys.argv[1], sys.argv[2], int(sys.argv[3])
s = serial.Serial(path, 115200, timeout=5)
s.write(b"go\n")
n = 0
t0 = None
if mode == "readline":
    while n < count:
        line = s.readline()
        if not line: break
        if t0 is None: t0 = time.perf_counter()
        n += 1
else:
    while n < count:
        b = s.read(s.in_waiting or 1)
        if not b: break
        if t0 is None: t0 = time.perf_counter()
        n += b.count(b"\n")
print((n - 1) / (time.perf_counter() - t0))
`;

export async function pythonAvailable(): Promise<boolean> {
  if (!existsSync('/usr/bin/python3')) return false;
  const probe = spawn('/usr/bin/python3', ['-c', 'import serial']);
  return new Promise<boolean>((r) => probe.on('exit', (c) => r(c === 0)));
}

/** Baseline: python3-serial reading the same stream (null when it is not installed). */
export async function pythonRead(count: number, mode: 'readline' | 'chunked'): Promise<number | null> {
  if (!(await pythonAvailable())) return null;
  return withProducer('flood', count, 0, async (p) => {
    const py = spawn('/usr/bin/python3', ['-c', PY, p.path, mode, String(count)]);
    let out = '';
    py.stdout.on('data', (d: Buffer) => (out += d.toString()));
    await new Promise((r) => py.on('exit', r));
    const v = Number(out.trim());
    return Number.isFinite(v) ? v : null;
  });
}

/**
 * Serial line written (device clock stamped from the monotonic clock, which every process here shares) to the
 * WebSocket message received by a client in this process; the daemon runs in its own process.
 */
export async function wsLatency(rate: number, seconds: number): Promise<Spread> {
  const count = rate * seconds;
  return withProducer('paced', count, rate, async (p) => {
    const d = await forkDaemon({ path: p.path, dataDir: null, arm: false, count: 0, warmup: 0 });
    const lat: number[] = [];
    const ws = await connectClient(d.port, d.token, (data) => {
      const now = Number((process.hrtime.bigint() / 1000n) % 4294967296n);
      const m = JSON.parse(data.toString()) as ServerMessage;
      if (m.type !== 'samples') return;
      for (const dt of m.batch.dt) {
        if (dt === null) continue;
        const sentUs = Math.round(dt * 1e6) % 4294967296;
        let l = now - sentUs;
        if (l < 0) l += 4294967296;
        lat.push(l / 1000);
      }
    });
    d.send({ type: 'start' });
    await new Promise((r) => setTimeout(r, seconds * 1000 + 1000));
    ws.terminate();
    d.send({ type: 'close' });
    await d.next('closed').catch(() => {});
    await d.stop();
    // The first tenth covers the handshake and the first batches; the steady state is what a dashboard sees.
    return spread(lat.slice(Math.floor(lat.length * 0.1)));
  });
}
