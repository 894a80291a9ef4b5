// A daemon bound to a non-loopback address answers to the addresses of the interfaces it is bound to, and to
// nothing else: a LAN host may use the machine's address, a DNS-rebinding name still gets 421. Two parts: the
// rule on a given interface list (a LAN address, IPv6, rebinding spellings), and the real thing in a network
// namespace this test creates (a veth pair, one end with a private address; all traffic stays inside it), with
// `ductbench serve --host 0.0.0.0` and a client both run in the namespace. The second part needs root and
// iproute2 (CI runs as root); without them it is skipped, saying why. Needs dist/ (npm test builds first).

import { execFileSync, spawn } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { allowedHosts, boundAddresses, hostAllowed, originAllowed, type InterfaceList } from '../server/http/access.js';
import { assertBuilt, BIN } from './helpers/sim-process.js';

const info = (address: string, family: 'IPv4' | 'IPv6', internal = false) => ({ address, family, internal, netmask: '', mac: '00:00:00:00:00:00', cidr: null, ...(family === 'IPv6' ? { scopeid: 0 } : {}) }) as never;
const IFACES: InterfaceList = {
  lo: [info('127.0.0.1', 'IPv4', true), info('::1', 'IPv6', true)],
  lan0: [info('192.168.77.5', 'IPv4'), info('fd00:77::5', 'IPv6'), info('fe80::5%lan0', 'IPv6')],
};

describe('Host check for a non-loopback bind (given interfaces)', () => {
  it('0.0.0.0 answers to every interface IPv4 address, :: to IPv6 ones too, a single address to itself', () => {
    expect(boundAddresses('0.0.0.0', IFACES)).toEqual(['127.0.0.1', '192.168.77.5']);
    expect(boundAddresses('::', IFACES)).toEqual(['127.0.0.1', '::1', '192.168.77.5', 'fd00:77::5', 'fe80::5']);
    expect(boundAddresses('192.168.77.5', IFACES)).toEqual(['192.168.77.5']);
    const any4 = allowedHosts('0.0.0.0', 8470, IFACES);
    expect(hostAllowed('192.168.77.5:8470', any4)).toBe(true);
    expect(hostAllowed('[fd00:77::5]:8470', any4)).toBe(false);
    expect(originAllowed('http://192.168.77.5:8470', any4)).toBe(true);
    const any6 = allowedHosts('::', 8470, IFACES);
    expect(hostAllowed('[fd00:77::5]:8470', any6)).toBe(true);
    expect(hostAllowed('[FD00:77::5]:8470', any6)).toBe(true);
  });

  it('still refuses rebinding names and other spellings of the address', () => {
    const hosts = allowedHosts('0.0.0.0', 8470, IFACES);
    for (const bad of [
      'attacker.example:8470',
      '192.168.77.5.nip.io:8470',
      '192.168.77.5.:8470',
      '192.168.77.5:8471',
      '192.168.77.5',
      '3232255237:8470', // decimal form of 192.168.77.5
      '0xc0a84d05:8470',
      '0300.0250.0115.0005:8470',
      '192.168.77.6:8470',
      'localhost.:8470',
    ]) {
      expect(hostAllowed(bad, hosts), bad).toBe(false);
    }
    expect(originAllowed('http://attacker.example:8470', hosts)).toBe(false);
    expect(originAllowed('https://192.168.77.5:8470', hosts)).toBe(false);
  });
});

// ------------------------------------------------------------------ a network namespace of our own

const NS = `ductbench-t${process.pid}`;
const ADDR = '10.77.0.1';
const OTHER = '10.77.0.2';
const TOKEN = 'lan-bind-token-2d81';

function sh(args: string[]): void {
  execFileSync('ip', args, { stdio: 'pipe' });
}

function namespaceUnavailable(): string | null {
  if (process.getuid?.() !== 0) return 'not root: cannot create a network namespace';
  try {
    execFileSync('ip', ['-V'], { stdio: 'pipe' });
  } catch {
    return 'iproute2 (ip) is not installed';
  }
  return null;
}

function createNamespace(): void {
  try {
    sh(['netns', 'add', NS]);
    sh(['-n', NS, 'link', 'set', 'lo', 'up']);
    // A veth pair with both ends in the namespace stands for the LAN card (the dummy driver is not everywhere).
    sh(['-n', NS, 'link', 'add', 'lan0', 'type', 'veth', 'peer', 'name', 'lan1']);
    sh(['-n', NS, 'addr', 'add', `${ADDR}/24`, 'dev', 'lan0']);
    sh(['-n', NS, 'link', 'set', 'lan0', 'up']);
    sh(['-n', NS, 'link', 'set', 'lan1', 'up']);
  } catch (err) {
    try {
      sh(['netns', 'del', NS]);
    } catch {
      /* never created */
    }
    throw new Error(`cannot set up a network namespace: ${(err as Error).message.split('\n')[0]}`);
  }
}

/** Runs a node script inside the namespace; resolves with its stdout. */
function inNamespace(script: string): Promise<string> {
  return new Promise((resolve, reject) => {
    const p = spawn('ip', ['netns', 'exec', NS, process.execPath, '--input-type=module', '-e', script], { stdio: ['ignore', 'pipe', 'pipe'] });
    let out = '';
    let err = '';
    p.stdout.on('data', (d: Buffer) => (out += d.toString()));
    p.stderr.on('data', (d: Buffer) => (err += d.toString()));
    p.on('exit', (code) => (code === 0 ? resolve(out) : reject(new Error(`script failed (${code}): ${err}`))));
  });
}

const unavailable = namespaceUnavailable();

describe.skipIf(unavailable !== null)(`serve --host 0.0.0.0 in a network namespace of its own${unavailable ? ` (skipped: ${unavailable})` : ''}`, () => {
  let serve: ReturnType<typeof spawn>;
  let stderr = '';
  let port = 0;
  let dir = '';

  beforeAll(async () => {
    assertBuilt();
    createNamespace();
    dir = mkdtempSync(join(tmpdir(), 'ductbench-lan-'));
    serve = spawn('ip', ['netns', 'exec', NS, process.execPath, BIN, 'serve', '--sim', '--host', '0.0.0.0', '--http-port', '0', '--token', TOKEN, '--data-dir', dir], { stdio: ['ignore', 'pipe', 'pipe'] });
    serve.stderr!.on('data', (d: Buffer) => (stderr += d.toString()));
    let out = '';
    port = await new Promise<number>((resolve, reject) => {
      const timer = setTimeout(() => reject(new Error(`serve did not start: ${stderr}`)), 30_000);
      serve.stdout!.on('data', (d: Buffer) => {
        out += d.toString();
        const m = out.match(/dashboard: http:\/\/[^:]+:(\d+)\//);
        if (m) {
          clearTimeout(timer);
          resolve(Number(m[1]));
        }
      });
    });
  });

  afterAll(async () => {
    if (serve && serve.exitCode === null) {
      const gone = new Promise((r) => serve.once('exit', r));
      serve.kill('SIGTERM');
      await gone;
    }
    try {
      sh(['netns', 'del', NS]);
    } catch {
      /* already gone */
    }
    if (dir) rmSync(dir, { recursive: true, force: true });
  });

  it('lists the address in its warning, answers a request that uses it, and refuses rebinding names', async () => {
    expect(stderr).toMatch(new RegExp(`WARNING: listening on 0\\.0\\.0\\.0 \\(answering as ${ADDR.replace(/\./g, '\\.')}\\)`));
    // From inside the namespace: the daemon's LAN address with the Host a browser on the LAN would send, a
    // name that resolves there (rebinding), and an address of the subnet that is not the daemon's.
    const script = `
      import http from 'node:http';
      const get = (host) => new Promise((resolve) => {
        http.get({ host: '${ADDR}', port: ${port}, path: '/api/status?token=${TOKEN}', headers: { host } }, (res) => { res.resume(); resolve(res.statusCode); })
          .on('error', (e) => resolve(String(e.code)));
      });
      const upgrade = (host, origin) => new Promise((resolve) => {
        const req = http.request({ host: '${ADDR}', port: ${port}, path: '/ws?token=${TOKEN}', headers: { host, origin, connection: 'Upgrade', upgrade: 'websocket', 'sec-websocket-version': '13', 'sec-websocket-key': 'dGhlIHNhbXBsZSBub25jZQ==' } });
        req.on('upgrade', (res, socket) => { socket.destroy(); resolve(101); });
        req.on('response', (res) => { res.resume(); resolve(res.statusCode); });
        req.on('error', (e) => resolve(String(e.code)));
        req.end();
      });
      const out = {
        lan: await get('${ADDR}:${port}'),
        rebinding: await get('bench.attacker.example:${port}'),
        trailingDot: await get('${ADDR}.:${port}'),
        otherAddress: await get('${OTHER}:${port}'),
        wsLan: await upgrade('${ADDR}:${port}', 'http://${ADDR}:${port}'),
        wsForeignOrigin: await upgrade('${ADDR}:${port}', 'http://bench.attacker.example:${port}'),
      };
      process.stdout.write(JSON.stringify(out));
    `;
    const r = JSON.parse(await inNamespace(script)) as Record<string, number | string>;
    expect(r).toEqual({ lan: 200, rebinding: 421, trailingDot: 421, otherAddress: 421, wsLan: 101, wsForeignOrigin: 403 });
  });
});
