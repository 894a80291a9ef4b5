// The device link against a scripted device: handshake outcomes, typed errors, reconnect with back-off,
// the capped write queue, command acknowledgement, and the emergency path overtaking queued commands.

import { afterEach, describe, expect, it } from 'vitest';
import { encodeLine } from '../firmware-protocol/src/codec.js';
import { CommandRefused, DeviceLink, LinkError } from '../server/link/link.js';
import type { Transport } from '../server/link/transport.js';
import { ScriptedDevice } from './helpers/scripted-device.js';

const links: DeviceLink[] = [];
afterEach(async () => {
  for (const l of links.splice(0)) await l.close();
});
function makeLink(factory: () => Transport, extra: Partial<ConstructorParameters<typeof DeviceLink>[0]> = {}): DeviceLink {
  const l = new DeviceLink({ transport: factory, handshakeTimeoutMs: 400, helloRetryMs: 100, reconnectInitialMs: 40, reconnectMaxMs: 200, ...extra });
  links.push(l);
  return l;
}

describe('device link', () => {
  it('handshakes, reports the identity and starts the heartbeat', async () => {
    const dev = new ScriptedDevice();
    const link = makeLink(() => dev);
    const id = await link.start();
    expect(id).toMatchObject({ protocol: 1, firmware: 'scripted', throttleCeiling: 0.8, heartbeatTimeoutMs: 300, channels: { thrust: 80, voltage: 100 } });
    await new Promise((r) => setTimeout(r, 350));
    const hbs = dev.received.filter((f) => f.tag === 'HB').length;
    expect(hbs).toBeGreaterThanOrEqual(2); // every 100 ms
  });

  it('says "not a ductbench device" when a port talks something else', async () => {
    const link = makeLink(() => new ScriptedDevice('junk'), { reconnect: false });
    const err = await link.start().catch((e: unknown) => e);
    expect(err).toBeInstanceOf(LinkError);
    expect((err as LinkError).kind).toBe('not_a_ductbench_device');
    expect(link.status).toBe('closed');
  });

  it('says "did not answer" for a silent port, and "protocol mismatch" for another version', async () => {
    const silent = await makeLink(() => new ScriptedDevice('silent'), { reconnect: false }).start().catch((e: LinkError) => e);
    expect((silent as LinkError).kind).toBe('handshake_timeout');
    const v2 = await makeLink(() => new ScriptedDevice('proto2'), { reconnect: false }).start().catch((e: LinkError) => e);
    expect((v2 as LinkError).kind).toBe('protocol_mismatch');
    expect((v2 as LinkError).message).toMatch(/protocol v2.*v1/);
  });

  it('refuses a device whose heartbeat time-out is longer than 300 ms', async () => {
    const err = await makeLink(() => new ScriptedDevice('slow-heartbeat'), { reconnect: false }).start().catch((e: LinkError) => e);
    expect((err as LinkError).kind).toBe('protocol_mismatch');
    expect((err as LinkError).message).toMatch(/1000 ms.*at most 300 ms/);
  });

  it('a port that cannot be opened is an open_failed error naming the port', async () => {
    const err = await makeLink(() => new ScriptedDevice('refuse-open'), { reconnect: false }).start().catch((e: LinkError) => e);
    expect((err as LinkError).kind).toBe('open_failed');
    expect((err as LinkError).message).toMatch(/scripted device.*No such file/);
  });

  it('reconnects after an unplug with growing back-off and handshakes again', async () => {
    const devices: ScriptedDevice[] = [];
    let attempt = 0;
    // attempts 2 and 3 fail to open (cable still out), the 4th succeeds
    const link = makeLink(() => {
      attempt++;
      const d = new ScriptedDevice(attempt === 2 || attempt === 3 ? 'refuse-open' : 'normal');
      devices.push(d);
      return d;
    });
    await link.start();
    const delays: number[] = [];
    link.on('status', (v) => {
      if (v.status === 'reconnecting' && v.retryInMs !== null) delays.push(v.retryInMs);
    });
    const ready = new Promise<void>((r) => link.once('ready', () => r()));
    const lost = new Promise<void>((r) => link.once('lost', () => r()));
    devices[0].unplug();
    await lost;
    await ready;
    expect(attempt).toBe(4);
    expect(delays.length).toBe(3);
    expect(delays[1]).toBeGreaterThan(delays[0]);
    expect(delays[2]).toBeGreaterThan(delays[1]);
    expect(link.view().reconnects).toBe(3);
    expect(link.view().error).toBeNull();
  });

  it('resolves ACKed commands and turns NAK into a typed refusal', async () => {
    const dev = new ScriptedDevice();
    const link = makeLink(() => dev);
    await link.start();
    await expect(link.command('THR', { v: 0.2 })).resolves.toBeUndefined();
    dev.nakArm = true;
    const err = await link.command('ARM', {}).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(CommandRefused);
    expect((err as CommandRefused).why).toBe('throttle_not_zero');
  });

  it('caps the write queue and counts what it drops', async () => {
    const dev = new ScriptedDevice();
    const link = makeLink(() => dev, { writeQueueCap: 8 });
    await link.start();
    dev.hold = true;
    let accepted = 0;
    for (let i = 0; i < 50; i++) if (link.send('STATUS', {})) accepted++;
    expect(accepted).toBeLessThanOrEqual(9); // 8 queued + at most one in flight
    expect(link.view().writeDropped).toBe(50 - accepted);
    dev.hold = false;
    dev.release();
  });

  it('STOP overtakes queued lines and drops queued throttle commands', async () => {
    const dev = new ScriptedDevice();
    const link = makeLink(() => dev, { heartbeatIntervalMs: 10_000 });
    await link.start();
    await new Promise((r) => setTimeout(r, 20));
    dev.received.length = 0;
    dev.hold = true;
    void link.command('THR', { v: 0.5 }).catch(() => {}); // in flight (held in the "OS buffer")
    const queued = link.command('THR', { v: 0.7 }).catch((e: Error) => e.message);
    link.send('STATUS', {});
    const stop = link.sendUrgent('estop');
    expect(stop).not.toBeNull();
    dev.hold = false;
    dev.release();
    await stop!.acked;
    await new Promise((r) => setTimeout(r, 50));
    const tags = dev.received.map((f) => (f.tag === 'THR' ? `THR ${f.fields.v}` : f.tag));
    // the line already handed to the OS goes first; then STOP, ahead of the queued STATUS; THR 0.7 never leaves
    expect(tags.slice(0, 3)).toEqual(['THR 0.5', 'STOP', 'STATUS']);
    expect(tags).not.toContain('THR 0.7');
    expect(await queued).toMatch(/dropped by emergency stop/);
  });

  it('counts bad lines by reason and sequence gaps', async () => {
    const dev = new ScriptedDevice();
    const link = makeLink(() => dev);
    await link.start();
    const good = (seq: number) => encodeLine('STAT', seq, { armed: false, out: 0, fault: 'none', hbok: true });
    dev.send(good(100));
    dev.send(good(101));
    dev.send(good(105)); // 3 missing
    dev.send('STAT 106 armed=0 out=0.000 fault=none hbok=1*0000\n'); // bad checksum
    dev.send('x'.repeat(5000) + '\n'); // over-long
    await new Promise((r) => setTimeout(r, 20));
    const v = link.view();
    expect(v.seqGaps).toBeGreaterThanOrEqual(3);
    expect(v.linesBad.checksum).toBe(1);
    expect(v.linesBad.too_long).toBe(1);
  });
});
