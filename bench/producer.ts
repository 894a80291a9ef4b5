// Benchmark helper, run as its own process: plays a microcontroller on one end of a pty pair. It answers
// HELLO with IDENT, then writes telemetry either as fast as the tty takes it (mode "flood") or at a fixed rate
// (mode "paced", device time stamped from the monotonic clock so the receiver can measure latency).
// Started as: node producer.js PATH MODE COUNT [RATE_HZ]

import { SerialPort } from 'serialport';
import { decodeLine, encodeLine } from '../firmware-protocol/src/codec.js';
import { LineSplitter } from '../firmware-protocol/src/lines.js';

const [path, mode, countText, rateText] = process.argv.slice(2);
const count = Number(countText);
const rate = Number(rateText ?? 1000);
let seq = 0;
const next = () => {
  const s = seq;
  seq = (seq + 1) % 65536;
  return s;
};
const monoUs = () => Number((process.hrtime.bigint() / 1000n) % 4294967296n);

function telemetry(i: number, t: number): string {
  return encodeLine('TEL', next(), {
    t,
    thrust: 4 + Math.sin(i / 50),
    v: 16.1 - (i % 7) * 0.001,
    i: 10 + (i % 13) * 0.01,
    ...(i % 5 === 0 ? { rpm: 9000 + (i % 100) } : {}),
    out: 0.5,
  });
}

const port = new SerialPort({ path, baudRate: 115200, autoOpen: false, hupcl: false });
let started = false;
const splitter = new LineSplitter((line) => {
  const r = decodeLine(line, 'h2d');
  if (!r.ok) {
    // the bare baselines send a plain newline-terminated "go"
    if (line.trim() === 'go') start();
    return;
  }
  if (r.tag === 'HELLO') {
    port.write(encodeLine('IDENT', next(), { proto: 1, fw: 'bench-producer', fwver: '1', caps: ['thrust@1000', 'voltage@1000', 'current@1000', 'rpm@200'], thrmax: 0.9, hb: 300 }));
    port.write(encodeLine('STAT', next(), { armed: false, out: 0, fault: 'none', hbok: true }));
    setTimeout(start, 200);
  }
});

function start(): void {
  if (started) return;
  started = true;
  if (mode === 'flood') flood();
  else paced();
}

function flood(): void {
  // Pre-encode in blocks so the producer is never the bottleneck.
  const block: string[] = [];
  for (let i = 0; i < 2000; i++) block.push(telemetry(i, i * 1000));
  const blockText = block.join('');
  let sent = 0;
  const pump = () => {
    while (sent < count) {
      sent += block.length;
      if (!port.write(blockText, 'latin1')) {
        port.once('drain', pump);
        return;
      }
    }
  };
  pump();
}

function paced(): void {
  const periodUs = 1e6 / rate;
  let i = 0;
  const t0 = process.hrtime.bigint();
  const tick = () => {
    const elapsedUs = Number((process.hrtime.bigint() - t0) / 1000n);
    const due = Math.min(count, Math.floor(elapsedUs / periodUs));
    let out = '';
    while (i < due) out += telemetry(i++, monoUs());
    if (out) port.write(out, 'latin1');
    if (i < count) setTimeout(tick, 1);
  };
  tick();
}

port.open((err) => {
  if (err) {
    process.stderr.write(`producer: ${err.message}\n`);
    process.exit(1);
  }
  port.on('data', (d: Buffer) => splitter.push(d));
  process.send?.('ready');
});
process.on('SIGTERM', () => process.exit(0));
