// The ductbench command as a user runs it (the compiled CLI in a child process): help everywhere, one clear
// line and a non-zero exit for a bad flag, a missing port or a port with no ductbench device, the dashboard
// URL printed by serve, and SIGTERM cutting before exit.

import { spawn } from 'node:child_process';
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { beforeAll, describe, expect, it } from 'vitest';
import { openPtyPair } from '../server/link/pty-pair.js';
import { SerialPort } from 'serialport';

const BIN = fileURLToPath(new URL('../bin/ductbench.js', import.meta.url));
const BUILT = fileURLToPath(new URL('../dist/server/cli.js', import.meta.url));

interface Run {
  code: number | null;
  stdout: string;
  stderr: string;
}

function run(args: string[], opts: { untilStdout?: RegExp; thenSignal?: NodeJS.Signals; timeoutMs?: number; env?: Record<string, string> } = {}): Promise<Run> {
  return new Promise((resolve) => {
    const child = spawn(process.execPath, [BIN, ...args], { env: { ...process.env, ...opts.env }, stdio: ['ignore', 'pipe', 'pipe'] });
    let stdout = '';
    let stderr = '';
    const timer = setTimeout(() => child.kill('SIGKILL'), opts.timeoutMs ?? 20_000);
    child.stdout.on('data', (d: Buffer) => {
      stdout += d.toString();
      if (opts.untilStdout && opts.untilStdout.test(stdout) && opts.thenSignal) {
        const sig = opts.thenSignal;
        opts.untilStdout = undefined;
        setTimeout(() => child.kill(sig), 200);
      }
    });
    child.stderr.on('data', (d: Buffer) => (stderr += d.toString()));
    child.on('exit', (code) => {
      clearTimeout(timer);
      resolve({ code, stdout, stderr });
    });
  });
}

beforeAll(() => {
  if (!existsSync(BUILT)) throw new Error('dist/ is missing: run `npm run build` first (npm test does)');
});

describe('ductbench CLI', () => {
  it('prints help for the program and every command', async () => {
    const top = await run(['--help']);
    expect(top.code).toBe(0);
    for (const cmd of ['serve', 'ports', 'sim', 'predict']) {
      expect(top.stdout).toContain(cmd);
      const h = await run([cmd, '--help']);
      expect(h.code, cmd).toBe(0);
      expect(h.stdout.toLowerCase()).toContain('usage');
    }
  });

  it('a bad flag or command gets one line on stderr and exit 2', async () => {
    for (const args of [['serve', '--prot', '/dev/x'], ['serve', '--http-port', 'eighty'], ['serve', '--sim', '--port', '/dev/x'], ['frobnicate']]) {
      const r = await run(args);
      expect(r.code, args.join(' ')).toBe(2);
      expect(r.stderr.trim().split('\n')).toHaveLength(1);
    }
  });

  it('a missing port gets one clear line and a non-zero exit', async () => {
    const r = await run(['serve', '--port', '/dev/ttyDOESNOTEXIST9', '--http-port', '0']);
    expect(r.code).toBe(1);
    expect(r.stderr.trim().split('\n')).toEqual([expect.stringMatching(/^ductbench: cannot open \/dev\/ttyDOESNOTEXIST9 .*No such file/)]);
  });

  it('a port with something else on it is refused as not a ductbench device', async () => {
    const pair = await openPtyPair();
    const other = new SerialPort({ path: pair.b, baudRate: 115200 });
    await new Promise((r) => other.once('open', r));
    // a gadget that chatters in its own format
    const chatter = setInterval(() => other.write('TEMP 21.5C OK\r\n'), 50);
    try {
      const r = await run(['serve', '--port', pair.a, '--http-port', '0']);
      expect(r.code).toBe(1);
      expect(r.stderr.trim().split('\n')).toEqual([expect.stringMatching(/not ductbench protocol v1/)]);
    } finally {
      clearInterval(chatter);
      await new Promise((r) => other.close(() => r(null)));
      await pair.close();
    }
  });

  it('serve prints the dashboard URL with its token, and SIGTERM cuts before exiting', async () => {
    const r = await run(['serve', '--sim', '--http-port', '0'], { untilStdout: /dashboard: http:\/\/127\.0\.0\.1:\d+\/\?token=\S+/, thenSignal: 'SIGTERM', env: { DUCTBENCH_TOKEN: 'from-env-42' } });
    expect(r.stdout).toMatch(/dashboard: http:\/\/127\.0\.0\.1:\d+\/\?token=from-env-42/);
    expect(r.stderr).toMatch(/SIGTERM: cutting throttle/);
    expect(r.code).toBe(0);
  });

  it('serve on another interface warns that the bench is exposed', async () => {
    const r = await run(['serve', '--sim', '--host', '127.0.0.2', '--http-port', '0'], { untilStdout: /dashboard: http:\/\/127\.0\.0\.2:\d+\//, thenSignal: 'SIGTERM' });
    expect(r.stderr).toMatch(/WARNING: listening on 127\.0\.0\.2 \(answering as 127\.0\.0\.2\): anyone who can reach this address and has the token can drive the bench/);
    expect(r.code).toBe(0);
  });

  it('ports lists without udev (falls back to scanning /dev)', async () => {
    const r = await run(['ports', '--json']);
    expect(r.code).toBe(0);
    expect(Array.isArray(JSON.parse(r.stdout))).toBe(true);
  });
});
