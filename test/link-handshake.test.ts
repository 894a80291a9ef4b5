// The handshake rule (PROTOCOL.md, Handshake) at the painful edges, with a hand-scripted board: a boot IDENT
// is never the answer, two answers in a row are never a restart, a board that does not copy the nonce is named
// for it, the heartbeat period follows the announced time-out, declared rates are held to the baud budget, and
// a lost THR acknowledgement is reconciled with the board's STAT.

import { afterEach, describe, expect, it } from 'vitest';
import { decodeLine, encodeLine } from '../firmware-protocol/src/codec.js';
import { HOST_RULES, lineBudget, staleLimitsFor } from '../firmware-protocol/src/host-rules.js';
import { LineSplitter } from '../firmware-protocol/src/lines.js';
import type { HostFrame } from '../firmware-protocol/src/messages.js';
import { BenchController } from '../server/bench/controller.js';
import { DEFAULT_LIMITS } from '../server/interlocks/limits.js';
import { DeviceLink, LINK_DEFAULTS } from '../server/link/link.js';
import type { Transport, TransportHandlers } from '../server/link/transport.js';

type Caps = string[];

/** A board whose every answer the test decides; records what the host wrote. */
class Board implements Transport {
  readonly description = 'hand-scripted board';
  h: TransportHandlers | null = null;
  readonly got: HostFrame[] = [];
  private seq = 0;
  private readonly splitter = new LineSplitter((l) => {
    const r = decodeLine(l, 'h2d');
    if (r.ok) this.onFrame(r as unknown as HostFrame);
  });
  onFrame: (f: HostFrame) => void = () => {};
  constructor(readonly baudRate?: number) {}
  async open(h: TransportHandlers): Promise<void> {
    this.h = h;
  }
  write(data: string): Promise<void> {
    return new Promise((resolve) =>
      setImmediate(() => {
        this.splitter.push(data);
        resolve();
      }),
    );
  }
  async close(): Promise<void> {
    this.h = null;
  }
  say<M extends 'IDENT' | 'STAT' | 'ACK' | 'NAK'>(tag: M, fields: Parameters<typeof encodeLine<M>>[2]): void {
    this.h?.onData(Buffer.from(encodeLine(tag, this.seq++ % 65536, fields), 'latin1'));
  }
  ident(extra: { nonce?: number; boot?: 'power' | 'reset'; hb?: number; caps?: Caps } = {}): void {
    const { hb, caps, ...rest } = extra;
    this.say('IDENT', { proto: 1, fw: 'scripted', fwver: '1', caps: caps ?? ['thrust@80', 'voltage@100'], thrmax: 0.8, hb: hb ?? 300, ...rest });
  }
  hellos(): number[] {
    return this.got.filter((f) => f.tag === 'HELLO').map((f) => (f as Extract<HostFrame, { tag: 'HELLO' }>).fields.nonce!);
  }
}

const links: DeviceLink[] = [];
afterEach(async () => {
  for (const l of links.splice(0)) await l.close();
});

function linkTo(board: Board, opts: Partial<ConstructorParameters<typeof DeviceLink>[0]> = {}): DeviceLink {
  const link = new DeviceLink({ transport: () => board, reconnect: false, helloRetryMs: 30, handshakeTimeoutMs: 1500, ...opts });
  links.push(link);
  return link;
}

const until = async (pred: () => boolean, ms = 3000): Promise<void> => {
  const t0 = Date.now();
  while (!pred()) {
    if (Date.now() - t0 > ms) throw new Error('timed out');
    await new Promise((r) => setTimeout(r, 5));
  }
};

describe('handshake by nonce', () => {
  it('every HELLO carries a fresh nonce; a boot IDENT is not the answer, the host greets the booted board at once', async () => {
    const board = new Board();
    let booted = false;
    board.onFrame = (f) => {
      board.got.push(f);
      if (f.tag !== 'HELLO') return;
      if (!booted) {
        // The bootloader swallowed the first HELLOs; the sketch starts and says so.
        if (board.hellos().length === 3) {
          booted = true;
          board.ident({ boot: 'reset' });
          board.say('STAT', { armed: false, out: 0, fault: 'reset', hbok: false });
        }
        return;
      }
      board.ident({ nonce: f.fields.nonce });
      board.say('STAT', { armed: false, out: 0, fault: 'reset', hbok: true });
    };
    const link = linkTo(board);
    await link.start();
    const nonces = board.hellos();
    expect(new Set(nonces).size).toBe(nonces.length);
    expect(nonces.length).toBeGreaterThanOrEqual(4);
    expect(link.bootOnConnect).toBe('reset');
  });

  it('an IDENT without the nonce is never taken for the answer, and the failure says why', async () => {
    const board = new Board();
    board.onFrame = (f) => {
      board.got.push(f);
      if (f.tag === 'HELLO') board.ident();
    };
    const link = linkTo(board, { handshakeTimeoutMs: 300 });
    await expect(link.start()).rejects.toThrow(/does not copy its nonce.*PROTOCOL\.md, Handshake/);
    expect(link.isReady).toBe(false);
  });

  it('two answers in a row (to a repeated HELLO) are not a restart: no second HELLO, no restart frame, the arm stands', async () => {
    const board = new Board();
    const pendingNonces: number[] = [];
    board.onFrame = (f) => {
      board.got.push(f);
      if (f.tag === 'HELLO') pendingNonces.push(f.fields.nonce!);
      if (f.tag === 'ARM') board.say('ACK', { ref: f.seq });
    };
    const link = linkTo(board, { helloRetryMs: 1000 });
    const restarts: string[] = [];
    link.on('frame', (fr) => {
      if (fr.tag === 'IDENT') restarts.push('restart');
    });
    const ready = link.start();
    await until(() => pendingNonces.length === 1);
    // A slow board: the HELLO is answered twice (as it would be had the host repeated it before the answer came).
    board.ident({ nonce: pendingNonces[0] });
    await ready;
    await link.command('ARM', {});
    board.ident({ nonce: pendingNonces[0] });
    await new Promise((r) => setTimeout(r, 50));
    expect(board.hellos()).toHaveLength(1);
    expect(restarts).toEqual([]);
  });

  it('telemetry and STAT streamed before the handshake are ignored: nothing reaches the bench until the answer', async () => {
    const board = new Board();
    board.onFrame = (f) => {
      board.got.push(f);
      if (f.tag !== 'HELLO') return;
      // A board may stream before it is greeted (PROTOCOL.md, Handshake); the answer comes on the third HELLO.
      board.say('STAT', { armed: false, out: 0, fault: 'none', hbok: false });
      if (board.hellos().length === 3) board.ident({ nonce: f.fields.nonce });
    };
    const link = linkTo(board);
    const early: string[] = [];
    link.on('frame', (fr) => {
      if (!link.isReady) early.push(fr.tag);
    });
    await link.start();
    expect(early).toEqual([]);
    expect(link.view().linesOk).toBeGreaterThanOrEqual(3);
  });

  it('a boot IDENT while connected is a restart: the host handshakes again with a fresh nonce', async () => {
    const board = new Board();
    board.onFrame = (f) => {
      board.got.push(f);
      if (f.tag === 'HELLO') board.ident({ nonce: f.fields.nonce });
    };
    const link = linkTo(board);
    const restarts: string[] = [];
    link.on('frame', (fr) => {
      if (fr.tag === 'IDENT') restarts.push(fr.fields.boot ?? '?');
    });
    await link.start();
    const before = board.hellos().length;
    board.ident({ boot: 'reset' });
    await until(() => board.hellos().length > before);
    expect(restarts).toEqual(['reset']);
    expect(link.isReady).toBe(true);
  });
});

describe('limits from what the board declares', () => {
  it('sends HB every floor(hb / 4) ms: 25 ms for hb=100, 75 for hb=300, never slower than 100', async () => {
    for (const [hb, period] of [
      [100, 25],
      [300, 75],
    ] as const) {
      const board = new Board();
      board.onFrame = (f) => {
        board.got.push(f);
        if (f.tag === 'HELLO') board.ident({ nonce: f.fields.nonce, hb });
      };
      const link = linkTo(board);
      await link.start();
      expect(link.heartbeatIntervalMs).toBe(period);
      const t0 = Date.now();
      const n0 = board.got.filter((f) => f.tag === 'HB').length;
      await new Promise((r) => setTimeout(r, 400));
      const beats = board.got.filter((f) => f.tag === 'HB').length - n0;
      // Counted, not timed: at least half the beats a 400 ms window should hold, on a loaded machine.
      expect(beats, `hb=${hb}`).toBeGreaterThanOrEqual(Math.floor((Date.now() - t0) / period / 2));
      await link.close();
    }
  });

  it('refuses a heartbeat time-out outside 60..300 ms', async () => {
    for (const hb of [40, 400]) {
      const board = new Board();
      board.onFrame = (f) => {
        if (f.tag === 'HELLO') board.ident({ nonce: f.fields.nonce, hb });
      };
      await expect(linkTo(board).start()).rejects.toThrow(/heartbeat time-out of \d+ ms/);
    }
  });

  it('warns when the declared rates cannot fit the baud rate, not when they can', async () => {
    for (const [caps, warns] of [
      [['thrust@80', 'voltage@1000', 'current@1000'], true],
      [['thrust@80', 'voltage@100', 'current@100'], false],
    ] as const) {
      const board = new Board(115200);
      board.onFrame = (f) => {
        if (f.tag === 'HELLO') board.ident({ nonce: f.fields.nonce, caps: [...caps] });
      };
      const link = linkTo(board);
      const warnings: string[] = [];
      link.on('warning', (w) => warnings.push(w));
      await link.start();
      expect(warnings.length > 0, caps.join(',')).toBe(warns);
      if (warns) expect(warnings[0]).toMatch(/115200 baud carries 11520/);
      await link.close();
    }
  });

  it('judges staleness by the declared rates: a thrust@2 board is stale after 1.5 s, a fast board after stale_ms', () => {
    // 3 periods of the fastest channel, never less than the limit (host-rules.ts).
    expect(staleLimitsFor({ thrust: 2 }, DEFAULT_LIMITS)).toEqual({ frameMs: 1500, thrustMs: 1500 });
    expect(staleLimitsFor({ thrust: 80, voltage: 100 }, DEFAULT_LIMITS)).toEqual({ frameMs: DEFAULT_LIMITS.stale_ms, thrustMs: DEFAULT_LIMITS.thrust_stale_ms });
    expect(staleLimitsFor({ thrust: 10, voltage: 5 }, DEFAULT_LIMITS)).toEqual({ frameMs: 300, thrustMs: 500 });
  });

  it('counts the byte budget by hand for one line: 115200 baud at 8N1 carries 11520 bytes a second', () => {
    // 10 bits a byte (start, 8 data, stop; common practice): 115200 / 10.
    expect(lineBudget({ thrust: 10 }, 115200).capacityPerSecond).toBe(11520);
    // The widest TEL a thrust-only board can send, ten a second, and the widest STAT five times a second.
    const tel = 'TEL 65535 t=4294967295 thrust=-10000.0000 out=1.000*FFFF\n'.length;
    const stat = 'STAT 65535 armed=0 out=1.000 fault=overcurrent hbok=0*FFFF\n'.length;
    expect(lineBudget({ thrust: 10 }, 115200).bytesPerSecond).toBe(10 * tel + 5 * stat);
  });

  it('every figure the link and the limits default to is one PROTOCOL.md tabulates', () => {
    const rule = (n: string) => HOST_RULES.find(([name]) => name === n)![1];
    expect(LINK_DEFAULTS.handshakeTimeoutMs).toBe(rule('HANDSHAKE_TIMEOUT_MS'));
    expect(LINK_DEFAULTS.helloRetryMs).toBe(rule('HELLO_RETRY_MS'));
    expect(LINK_DEFAULTS.ackTimeoutMs).toBe(rule('ACK_TIMEOUT_MS'));
    expect(DEFAULT_LIMITS.stale_ms).toBe(rule('DEFAULT_STALE_MS'));
    expect(DEFAULT_LIMITS.thrust_stale_ms).toBe(rule('DEFAULT_THRUST_STALE_MS'));
    expect(DEFAULT_LIMITS.bad_line_burst).toBe(rule('DEFAULT_BAD_LINE_BURST'));
  });
});

describe('a lost acknowledgement', () => {
  async function armedBoard(opts: { dropAckOfThr: boolean; carryOut: boolean }) {
    const board = new Board();
    let out = 0;
    let armed = false;
    board.onFrame = (f) => {
      board.got.push(f);
      if (f.tag === 'HELLO') {
        board.ident({ nonce: f.fields.nonce });
        board.say('STAT', { armed, out, fault: 'none', hbok: true });
      } else if (f.tag === 'STATUS') board.say('STAT', { armed, out, fault: 'none', hbok: true });
      else if (f.tag === 'ARM') {
        armed = true;
        board.say('ACK', { ref: f.seq });
        board.say('STAT', { armed, out, fault: 'none', hbok: true });
      } else if (f.tag === 'THR') {
        if (opts.carryOut) out = f.fields.v;
        // The ACK is corrupted on the way back: the host never sees it.
        if (!opts.dropAckOfThr) board.say('ACK', { ref: f.seq });
      }
    };
    const link = linkTo(board, { ackTimeoutMs: 150 });
    const controller = new BenchController(link);
    const events: string[] = [];
    controller.on('event', (e) => events.push(e.text));
    await link.start();
    await until(() => controller.state === 'safe');
    await controller.arm();
    await until(() => controller.state === 'armed');
    return { controller, events };
  }

  it('is reconciled with the next STAT: a THR the board carried out is taken, and said so', async () => {
    const { controller, events } = await armedBoard({ dropAckOfThr: true, carryOut: true });
    await controller.setThrottle(0.0048);
    expect(events.some((t) => /THR v=0\.0048: no acknowledgement, but the board's status shows out=0\.005: it was carried out/.test(t))).toBe(true);
  });

  it('says "no acknowledgement", not "not taken", when the STAT shows the THR was not carried out', async () => {
    const { controller } = await armedBoard({ dropAckOfThr: true, carryOut: false });
    await expect(controller.setThrottle(0.0048)).rejects.toThrow(/THR v=0\.0048: no acknowledgement within 150 ms, and the board's status shows armed=1 out=0\.000/);
  });
});
