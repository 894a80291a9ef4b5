// Benchmark helper, run as its own process: plays a microcontroller on one end of a pty pair, through the same
// SerialTransport the daemon uses. It keeps a small device state (armed, output, latched fault), answers HELLO
// with IDENT and STAT, acknowledges ARM, DISARM, THR, STOP, CLEAR, STATUS and TARE as the firmware would, and
// writes telemetry in one of three modes:
//   flood  COUNT lines as fast as the tty takes them, starting on ARM (the daemon's full pipeline, recording
//          while armed) or on a plain "go" line (the bare readers, which speak no protocol);
//   paced  COUNT lines at RATE Hz, device time stamped from the monotonic clock (serial-to-WebSocket latency);
//   trips  telemetry at RATE Hz without end; while armed and not latched it sends one line whose current is
//          above the bench's max_current_a (3 A against 2 A), a varying number of lines after each ARM. It
//          stamps (monotonic clock) each offending line's write and each STOP's arrival, and sends them to
//          the parent on request: the device-side cross-check of the cut latency.
// Started as: node producer.js PATH MODE COUNT RATE_HZ

import { decodeLine, encodeLine } from '../firmware-protocol/src/codec.js';
import { constants, openSync, writeSync } from 'node:fs';
import { crc16, hex4 } from '../firmware-protocol/src/crc.js';
import { LineSplitter } from '../firmware-protocol/src/lines.js';
import type { FaultCode } from '../firmware-protocol/src/messages.js';
import { SerialTransport } from '../server/link/serial-transport.js';
import { TRIP_NORMAL_CURRENT_A, TRIP_OFFENDING_CURRENT_A, type ProducerMode, type ProducerTripReport } from './common.js';


const [path, modeText, countText, rateText] = process.argv.slice(2);
const mode = modeText as ProducerMode;
const count = Number(countText);
const rate = Number(rateText ?? 1000);
const monoMs = () => Number(process.hrtime.bigint()) / 1e6;
const monoUs = () => Number((process.hrtime.bigint() / 1000n) % 4294967296n);

let seq = 0;
let seqBase = 0;
const next = () => {
  const s = seq;
  seq = (seq + 1) % 65536;
  return s;
};

const device = { armed: false, out: 0, fault: 'none' as FaultCode };
// The flood is written through its own blocking descriptor, opened before SerialTransport takes the port's
// exclusive lock (as the transport opens its read side). Through the transport, every 4 KB the pty accepts
// cost a thread-pool write and a poll for writability: measured, the producer then burned more CPU than the
// reader it fed, on a 2-core machine where every process shares the same cores, so it was the bottleneck.
// A blocking write loops in the kernel instead. Commands are still read between blocks.
const floodFd = openSync(path, constants.O_WRONLY | constants.O_NOCTTY);
const transport = new SerialTransport(path, 115200);
let started = false;
const trips: ProducerTripReport = { type: 'trips', offendingWrittenAt: [], stopArrivedAt: [] };
let linesSinceArm = 0;
let armsSeen = 0;
let offendingDue = false;

function telemetry(i: number, t: number, current = TRIP_NORMAL_CURRENT_A + (i % 13) * 0.01): string {
  return encodeLine('TEL', next(), {
    t,
    // Thrust follows the output (a resting stand reads near zero: no zero-throttle trip while armed at 0).
    thrust: 0.05 + 8 * device.out + 0.02 * Math.sin(i / 50),
    v: 16.1 - (i % 7) * 0.001,
    i: current,
    ...(i % 5 === 0 ? { rpm: Math.round(9000 * device.out) + (i % 100) } : {}),
    out: device.out,
  });
}

const stat = () => encodeLine('STAT', next(), { armed: device.armed, out: device.out, fault: device.fault, hbok: true });
const send = (text: string) => void transport.write(text).catch(() => {});

function onCommand(line: string, arrivedAt: number): void {
  const r = decodeLine(line, 'h2d');
  if (!r.ok) {
    // the bare baselines send a plain newline-terminated "go"
    if (line.trim() === 'go') start();
    return;
  }
  const ack = () => encodeLine('ACK', next(), { ref: r.seq });
  const nak = (why: 'latched' | 'not_armed' | 'throttle_not_zero') => encodeLine('NAK', next(), { ref: r.seq, why });
  switch (r.tag) {
    case 'HELLO':
      send(
        encodeLine('IDENT', next(), {
          proto: 1,
          fw: 'bench-producer',
          fwver: '2',
          caps: ['thrust@1000', 'voltage@1000', 'current@1000', 'rpm@200'],
          thrmax: 0.9,
          hb: 300,
          ...(r.fields.nonce !== undefined ? { nonce: r.fields.nonce } : {}),
        }) + stat(),
      );
      if (mode === 'paced' || mode === 'trips') setTimeout(start, 200);
      return;
    case 'STOP':
      device.armed = false;
      device.out = 0;
      device.fault = r.fields.why ?? 'estop';
      trips.stopArrivedAt.push({ at: arrivedAt, why: device.fault });
      send(ack() + stat());
      return;
    case 'ARM':
      if (device.fault !== 'none') return send(nak('latched'));
      if (device.out > 0) return send(nak('throttle_not_zero'));
      device.armed = true;
      linesSinceArm = 0;
      armsSeen++;
      offendingDue = true;
      send(ack() + stat());
      if (mode === 'flood') start();
      return;
    case 'DISARM':
      device.armed = false;
      device.out = 0;
      send(ack() + stat());
      return;
    case 'THR':
      if (device.fault !== 'none') return send(nak('latched'));
      if (!device.armed) return send(nak('not_armed'));
      device.out = r.fields.v;
      send(ack() + stat());
      return;
    case 'CLEAR':
      device.fault = 'none';
      send(ack() + stat());
      return;
    case 'STATUS':
      send(stat());
      return;
    case 'HB':
      return;
    default:
      send(ack());
  }
}

function start(): void {
  if (started) return;
  started = true;
  // Built when the flood is asked for (its sequence numbers follow what was sent); the readers time from the
  // first line they receive, so this preparation is not in any measurement.
  if (mode === 'flood') {
    prepareFlood();
    void flood();
  }
  else paced();
}

/**
 * TEL lines for the flood, made fast enough that the producer is never the bottleneck: the field text comes
 * from a table of 2000 variants, only "seq" and "t" change, and the checksum is computed per line. Sequence
 * numbers are consecutive and device time advances 1 ms a line, as from a 1 kHz board; checked against
 * encodeLine at start-up so the stream is byte for byte what the codec writes.
 */
function floodLines(): (i: number) => string {
  // The flood follows the lines the board sent before it (IDENT, STAT, ACK): sequence numbers stay consecutive.
  seqBase = seq;
  const fields: string[] = [];
  for (let k = 0; k < 2000; k++) {
    const line = telemetry(k, 0);
    fields.push(line.slice(line.indexOf(' t=0 ') + 5, line.lastIndexOf('*')));
  }
  const make = (i: number) => {
    const body = 'TEL ' + ((i + seqBase) % 65536) + ' t=' + ((i * 1000) % 4294967296) + ' ' + fields[i % 2000];
    return body + '*' + hex4(crc16(body)) + '\n';
  };
  for (const i of [0, 1, 4999, 65537]) {
    seq = (i + seqBase) % 65536;
    const want = telemetry(i % 2000, (i * 1000) % 4294967296);
    if (make(i) !== want) throw new Error(`producer: fast TEL line ${JSON.stringify(make(i))} differs from encodeLine ${JSON.stringify(want)}`);
  }
  seq = seqBase;
  return make;
}

/** Lines written from memory before any is made on the fly (about 40 MB). */
const PREBUILT_LINES = 600_000;
const BLOCK_LINES = 2000;
let prebuilt: Buffer[] = [];
let makeLine: ((i: number) => string) | null = null;

function blockText(from: number, to: number): string {
  let text = '';
  for (let i = from; i < to; i++) text += makeLine!(i);
  return text;
}

/** Builds the first lines up front, so a flood of up to PREBUILT_LINES lines costs the producer only writes. */
function prepareFlood(): void {
  makeLine = floodLines();
  const n = Math.min(count, PREBUILT_LINES);
  for (let i = 0; i < n; i += BLOCK_LINES) prebuilt.push(Buffer.from(blockText(i, Math.min(n, i + BLOCK_LINES)), 'latin1'));
}

async function flood(): Promise<void> {
  const write = async (b: Buffer) => {
    try {
      writeSync(floodFd, b);
    } catch {
      process.exit(0); // the reader's end is gone: nothing left to feed
    }
    // Let the commands the reader sends (ARM, heartbeats, STOP) be read between blocks.
    await new Promise<void>((r) => setImmediate(r));
  };
  for (const b of prebuilt) await write(b);
  prebuilt = [];
  for (let i = Math.min(count, PREBUILT_LINES); i < count; i += BLOCK_LINES) await write(Buffer.from(blockText(i, Math.min(count, i + BLOCK_LINES)), 'latin1'));
}

function paced(): void {
  const periodUs = 1e6 / rate;
  let i = 0;
  const t0 = process.hrtime.bigint();
  const tick = () => {
    const elapsedUs = Number((process.hrtime.bigint() - t0) / 1000n);
    const due = mode === 'trips' ? Math.floor(elapsedUs / periodUs) : Math.min(count, Math.floor(elapsedUs / periodUs));
    let out = '';
    let offending = false;
    while (i < due) {
      let current: number | undefined;
      if (mode === 'trips' && device.armed && device.fault === 'none') {
        linesSinceArm++;
        // A different phase each time: 10..29 ms of telemetry after the ARM at any rate.
        if (offendingDue && linesSinceArm >= Math.round(((10 + ((armsSeen * 7) % 20)) * rate) / 1000)) {
          offendingDue = false;
          offending = true;
          current = TRIP_OFFENDING_CURRENT_A;
        }
      }
      out += telemetry(i++, monoUs(), current);
    }
    if (out) {
      send(out);
      // The write is synchronous when the tty takes it at once, which it does at these rates.
      if (offending) trips.offendingWrittenAt.push(monoMs());
    }
    if (mode === 'trips' || i < count) setTimeout(tick, 1);
  };
  tick();
}

const splitter = new LineSplitter((line) => onCommand(line, lineArrivedAt));
let lineArrivedAt = 0;
transport
  .open({
    onData: (chunk) => {
      lineArrivedAt = monoMs();
      splitter.push(chunk);
    },
    onClose: () => process.exit(0),
  })
  .then(
    () => process.send?.('ready'),
    (err: Error) => {
      process.stderr.write(`producer: ${err.message}\n`);
      process.exit(1);
    },
  );
process.on('message', (m) => {
  if (m === 'report') process.send?.(trips);
});
process.on('SIGTERM', () => process.exit(0));
