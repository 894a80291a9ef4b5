// The device checker: what a firmware author runs (propeller off) to see whether a board speaks protocol v1 as
// PROTOCOL.md says. Each check names the section it holds the board to. It exercises the handshake (nonce,
// repeated HELLO, a restart when the port is reopened), the heartbeat cut and its timing, refusals and their
// order, the hard ceiling, STOP, the fault latch, BYE, the STAT interval, the declared rates against the baud
// budget, and how numbers are written and read. `checkDevice` is the programmatic entry (the emulated board's
// harness and the tests call it); `ductbench check-device` (server/cli/check-device.ts) prints its report.
//
// The board is left as it was found as far as the protocol allows: disarmed, no fault latched, session ended
// with BYE. A latch found at the start is reported and cleared (the checker needs an unlatched board).

import { performance } from 'node:perf_hooks';
import { encodeLine } from '../../firmware-protocol/src/codec.js';
import {
  ACK_TIMEOUT_MS,
  DEFAULT_BAUD,
  HANDSHAKE_TIMEOUT_MS,
  HELLO_RETRY_MS,
  STAT_MAX_INTERVAL_MS,
  heartbeatIntervalFor,
  heartbeatTimeoutProblem,
  lineBudget,
  ratesFromCaps,
} from '../../firmware-protocol/src/host-rules.js';
import { CHANNELS, PROTOCOL_VERSION, type FrameOf } from '../../firmware-protocol/src/messages.js';
import type { Transport } from '../link/transport.js';
import { Probe, type Answer } from './probe.js';

/** PROTOCOL.md sections a check can name (its headings). */
export const SECTIONS = [
  'Framing',
  'Handshake',
  'Heartbeat',
  'Ending a session',
  'Safety guarantees of the firmware',
  'Refusals and their order',
  'Acknowledgements',
  'Telemetry',
] as const;
export type Section = (typeof SECTIONS)[number];

/** Markdown anchor of a section heading, as GitHub writes it. */
export function sectionAnchor(s: Section): string {
  return 'PROTOCOL.md#' + s.toLowerCase().replace(/[^a-z0-9 -]/g, '').replace(/ /g, '-');
}

export interface CheckResult {
  id: string;
  section: Section;
  title: string;
  pass: boolean;
  /** What was seen; for a failure, what was wrong. */
  detail: string;
}

export interface CheckReport {
  device: string;
  firmware: string | null;
  pass: boolean;
  checks: CheckResult[];
  /** Measured: heartbeat cut (ms after the last HB), longest STAT gap (ms), worst-case byte rate. */
  measured: { heartbeat_cut_ms: number | null; stat_gap_ms: number | null; bytes_per_s: number | null; capacity_per_s: number | null };
}

export interface CheckOptions {
  /** A fresh transport for each opening of the port (the checker opens it twice). */
  transport: () => Transport;
  /** Baud rate for the byte budget (default: the transport's own, else DEFAULT_BAUD). */
  baud?: number;
  /** A small throttle (0..0.2) to check that STOP and heartbeat loss cut a running output; 0 keeps it at zero. */
  spinThrottle?: number;
  /** Progress lines for people. */
  progress?: (line: string) => void;
}

/** A heartbeat cut later than the announced time-out plus this (ms) fails: serial latency and a busy checker fit in it. */
export const HEARTBEAT_CUT_TOLERANCE_MS = 150;
/** A cut sooner than the announced time-out minus this (ms) fails: the board would trip a host that keeps the rules. */
export const HEARTBEAT_EARLY_TOLERANCE_MS = 15;
/** Pause between closing the port and opening it again (ms). */
const REOPEN_PAUSE_MS = 1000;
/** Slack on STAT_MAX_INTERVAL_MS for the line and the checker's own timers. */
const STAT_GAP_SLACK_MS = 60;

class Aborted extends Error {}

export async function checkDevice(opts: CheckOptions): Promise<CheckReport> {
  const say = opts.progress ?? (() => {});
  const checks: CheckResult[] = [];
  const add = (id: string, section: Section, title: string, pass: boolean, detail: string): boolean => {
    checks.push({ id, section, title, pass, detail });
    say(`${pass ? 'PASS' : 'FAIL'} ${title}: ${detail} (${sectionAnchor(section)})`);
    return pass;
  };
  const measured: CheckReport['measured'] = { heartbeat_cut_ms: null, stat_gap_ms: null, bytes_per_s: null, capacity_per_s: null };
  const spin = Math.min(0.2, Math.max(0, opts.spinThrottle ?? 0.05));
  const probe = new Probe(opts.transport);
  let ident: FrameOf<'IDENT'> | null = null;
  let nonce = Math.floor(Math.random() * 60000);
  const fresh = () => (nonce = (nonce + 1) % 65536);
  const answerText = (a: Answer) => (a.kind === 'ack' ? 'ACK' : a.kind === 'nak' ? `NAK ${a.why}` : 'no answer');
  const expectAnswer = async (id: string, section: Section, title: string, want: 'ack' | string, run: () => Promise<Answer>): Promise<boolean> => {
    const a = await run();
    const ok = want === 'ack' ? a.kind === 'ack' : a.kind === 'nak' && a.why === want;
    return add(id, section, title, ok, `${answerText(a)}${ok ? '' : `, expected ${want === 'ack' ? 'ACK' : `NAK ${want}`}`}`);
  };

  /** HELLO every HELLO_RETRY_MS with a fresh nonce until an IDENT copies one; notes a boot IDENT on the way. */
  const handshake = async (): Promise<{ ident: FrameOf<'IDENT'> | null; boot: FrameOf<'IDENT'> | null; bootStat: FrameOf<'STAT'> | null; foreign: number; ms: number }> => {
    const t0 = performance.now();
    const from = probe.mark();
    const sent = new Set<number>();
    let boot: FrameOf<'IDENT'> | null = null;
    let bootStat: FrameOf<'STAT'> | null = null;
    let foreign = 0;
    let scanned = from;
    while (performance.now() - t0 < HANDSHAKE_TIMEOUT_MS) {
      sent.add(fresh());
      await probe.send('HELLO', { proto: PROTOCOL_VERSION, host: 'ductbench-check', nonce });
      const until = performance.now() + HELLO_RETRY_MS;
      while (performance.now() < until) {
        for (; scanned < probe.received.length; scanned++) {
          const r = probe.received[scanned];
          if (r.frame.tag === 'STAT' && boot && !bootStat) bootStat = r.frame;
          if (r.frame.tag !== 'IDENT') continue;
          const f = r.frame;
          if (f.fields.boot !== undefined) {
            boot = f;
            continue;
          }
          if (f.fields.nonce !== undefined && sent.has(f.fields.nonce)) return { ident: f, boot, bootStat, foreign, ms: performance.now() - t0 };
          foreign++;
        }
        await probe.sleep(5);
      }
    }
    return { ident: null, boot, bootStat, foreign, ms: performance.now() - t0 };
  };

  try {
    await probe.open();
    say(`checking ${probe.description} (propeller off, please)`);
    // ------------------------------------------------------------ handshake
    const hs = await handshake();
    if (!hs.ident) {
      add(
        'handshake',
        'Handshake',
        'IDENT answers HELLO and copies its nonce',
        false,
        hs.foreign > 0 ? `${hs.foreign} IDENT(s) came back without the HELLO's nonce` : `no IDENT within ${HANDSHAKE_TIMEOUT_MS} ms`,
      );
      throw new Aborted();
    }
    ident = hs.ident;
    const afterIdent = await probe.waitFor((f) => f.tag === 'STAT', ACK_TIMEOUT_MS, probe.received.findIndex((r) => r.frame === hs.ident) + 1);
    add('handshake', 'Handshake', 'IDENT answers HELLO and copies its nonce, then a STAT', afterIdent !== null, afterIdent ? `answered in ${Math.round(hs.ms)} ms` : 'no STAT after the IDENT');
    const f = ident.fields;
    add('protocol', 'Handshake', 'IDENT proto is 1', f.proto === PROTOCOL_VERSION, `proto=${f.proto}`);
    const hbProblem = heartbeatTimeoutProblem(f.hb);
    add('hb-range', 'Heartbeat', 'IDENT hb is one the host accepts', hbProblem === null, hbProblem ?? `hb=${f.hb} ms`);
    const rates = ratesFromCaps(f.caps);
    const unknown = Object.keys(rates).filter((n) => !(CHANNELS as readonly string[]).includes(n) || !(rates[n] > 0));
    add('caps', 'Telemetry', 'IDENT caps are known channels with a rate', unknown.length === 0 && Object.keys(rates).length > 0, unknown.length ? `not name@rate of a known channel: ${unknown.join(', ')}` : f.caps.join(','));
    const baud = opts.baud ?? probe.baudRate ?? DEFAULT_BAUD;
    const budget = lineBudget(rates, baud);
    measured.bytes_per_s = budget.bytesPerSecond;
    measured.capacity_per_s = budget.capacityPerSecond;
    add(
      'budget',
      'Telemetry',
      'the declared rates fit the line',
      budget.fits,
      `worst case ${budget.bytesPerSecond} bytes/s against ${budget.capacityPerSecond} at ${baud} baud (${Math.round(budget.utilisation * 100)} %)`,
    );
    const hbMs = Math.max(heartbeatTimeoutProblem(f.hb) ? 300 : f.hb, 20);
    const period = heartbeatIntervalFor(hbMs);
    probe.heartbeat(period);

    // Two HELLOs back to back: two answers, each with its own nonce, neither taken for a restart.
    {
      const from = probe.mark();
      const a = fresh();
      await probe.send('HELLO', { proto: PROTOCOL_VERSION, host: 'ductbench-check', nonce: a });
      const b = fresh();
      await probe.send('HELLO', { proto: PROTOCOL_VERSION, host: 'ductbench-check', nonce: b });
      await probe.waitFor((x) => x.tag === 'IDENT' && x.fields.nonce === b, ACK_TIMEOUT_MS, from);
      const ids = probe.received.slice(from).filter((r) => r.frame.tag === 'IDENT').map((r) => r.frame as FrameOf<'IDENT'>);
      const ok = ids.length === 2 && ids[0].fields.nonce === a && ids[1].fields.nonce === b && ids.every((x) => x.fields.boot === undefined);
      add('repeat-hello', 'Handshake', 'each of two HELLOs in a row gets its own IDENT', ok, ids.map((x) => `nonce=${x.fields.nonce ?? '-'}${x.fields.boot ? ` boot=${x.fields.boot}` : ''}`).join(', ') || 'no IDENT');
    }

    // A latch from before (or from a reset on open) is cleared: the rest needs an unlatched board.
    let st = await probe.status(ACK_TIMEOUT_MS);
    if (st && st.fields.fault !== 'none') {
      say(`the board is latched (fault=${st.fields.fault}); clearing it to go on`);
      await probe.command('CLEAR', {}, ACK_TIMEOUT_MS);
      st = await probe.status(ACK_TIMEOUT_MS);
    }
    if (!st || st.fields.fault !== 'none') {
      add('clear', 'Safety guarantees of the firmware', 'CLEAR unlatches', false, st ? `still fault=${st.fields.fault}` : 'no STAT');
      throw new Aborted();
    }

    // ------------------------------------------------------------ refusals while disarmed, and their order
    const ceiling = f.thrmax;
    const above = Math.round(Math.min(1, ceiling + 0.05) * 1e4) / 1e4;
    const small = Math.min(spin > 0 ? spin : 0.05, ceiling);
    if (above > ceiling) {
      await expectAnswer('order-ceiling-first', 'Refusals and their order', 'disarmed, a THR above the ceiling is refused as above_ceiling (before not_armed)', 'above_ceiling', () => probe.command('THR', { v: above }, ACK_TIMEOUT_MS));
    }
    if (small > 0) await expectAnswer('not-armed', 'Safety guarantees of the firmware', 'disarmed, a non-zero THR is refused as not_armed', 'not_armed', () => probe.command('THR', { v: small }, ACK_TIMEOUT_MS));
    await expectAnswer('thr-zero', 'Safety guarantees of the firmware', 'disarmed, THR v=0 is accepted', 'ack', () => probe.command('THR', { v: 0 }, ACK_TIMEOUT_MS));

    // ------------------------------------------------------------ numbers as a host may spell them
    {
      const spellings = ['0', '0.', '.0', '0e0', '0E+0', '0.00000'];
      const wrong: string[] = [];
      for (const sp of spellings) {
        const a = await probe.commandRaw(`THR <seq> v=${sp}`, ACK_TIMEOUT_MS);
        if (a.kind !== 'ack') wrong.push(`v=${sp}: ${answerText(a)}`);
      }
      add('numbers-in', 'Framing', 'accepts every valid spelling of a number (THR v=0, 0., .0, 0e0, 0E+0, 0.00000)', wrong.length === 0, wrong.length ? wrong.join('; ') : 'all acknowledged');
      const invalid = ['+0', '0x0', '.', '0e', 'nan'];
      const taken: string[] = [];
      for (const sp of invalid) {
        const a = await probe.commandRaw(`THR <seq> v=${sp}`, 300);
        if (a.kind === 'ack') taken.push(`v=${sp}`);
        else if (a.kind === 'nak' && a.why !== 'bad_value') taken.push(`v=${sp}: NAK ${a.why} (expected bad_value or silence)`);
      }
      add('numbers-bad', 'Framing', 'refuses invalid numbers (v=+0, 0x0, ., 0e, nan)', taken.length === 0, taken.length ? `carried out: ${taken.join('; ')}` : 'none carried out');
    }

    // ------------------------------------------------------------ armed: ceiling, throttle_not_zero, STOP
    await expectAnswer('arm', 'Safety guarantees of the firmware', 'ARM is accepted at zero throttle', 'ack', () => probe.command('ARM', {}, ACK_TIMEOUT_MS));
    if (above > ceiling) {
      await expectAnswer('ceiling', 'Safety guarantees of the firmware', 'armed, a THR above the ceiling is refused (never clamped)', 'above_ceiling', () => probe.command('THR', { v: above }, ACK_TIMEOUT_MS));
      const s2 = await probe.status(ACK_TIMEOUT_MS);
      add('ceiling-output', 'Safety guarantees of the firmware', 'the refused THR leaves the output where it was', s2 !== null && s2.fields.out === 0, s2 ? `out=${s2.fields.out.toFixed(3)}` : 'no STAT');
    }
    if (spin > 0) {
      await expectAnswer('spin', 'Safety guarantees of the firmware', `armed, THR v=${spin} is accepted`, 'ack', () => probe.command('THR', { v: spin }, ACK_TIMEOUT_MS));
      await expectAnswer('order-throttle-not-zero', 'Refusals and their order', 'ARM with the throttle above zero is refused as throttle_not_zero', 'throttle_not_zero', () => probe.command('ARM', {}, ACK_TIMEOUT_MS));
    }
    {
      const from = probe.mark();
      const a = await probe.command('STOP', {}, ACK_TIMEOUT_MS);
      const cut = await probe.waitFor((x) => x.tag === 'STAT' && !x.fields.armed && x.fields.out === 0 && x.fields.fault === 'estop', ACK_TIMEOUT_MS, from);
      add('stop', 'Safety guarantees of the firmware', 'STOP is acknowledged, cuts the output, disarms and latches estop', a.kind === 'ack' && cut !== null, `${answerText(a)}; ${cut ? 'STAT armed=0 out=0.000 fault=estop' : 'no STAT showing the cut and the estop latch'}`);
    }

    // ------------------------------------------------------------ the latch
    await expectAnswer('latched-arm', 'Safety guarantees of the firmware', 'latched, ARM is refused as latched', 'latched', () => probe.command('ARM', {}, ACK_TIMEOUT_MS));
    if (above > ceiling) await expectAnswer('order-latched-first', 'Refusals and their order', 'latched, a THR above the ceiling is refused as latched (before above_ceiling)', 'latched', () => probe.command('THR', { v: above }, ACK_TIMEOUT_MS));
    await expectAnswer('latched-thr-zero', 'Safety guarantees of the firmware', 'latched, THR v=0 is refused as latched', 'latched', () => probe.command('THR', { v: 0 }, ACK_TIMEOUT_MS));
    await expectAnswer('latched-disarm', 'Safety guarantees of the firmware', 'latched, DISARM is carried out', 'ack', () => probe.command('DISARM', {}, ACK_TIMEOUT_MS));
    {
      const a = await probe.command('STOP', { why: 'host_trip' }, ACK_TIMEOUT_MS);
      const s3 = await probe.status(ACK_TIMEOUT_MS);
      add('first-fault-kept', 'Safety guarantees of the firmware', 'a new fault does not replace the latched one', a.kind === 'ack' && s3?.fields.fault === 'estop', `STOP why=host_trip: ${answerText(a)}; fault=${s3?.fields.fault ?? '?'}`);
    }
    {
      const a = await probe.command('CLEAR', {}, ACK_TIMEOUT_MS);
      const s4 = await probe.status(ACK_TIMEOUT_MS);
      add('clear', 'Safety guarantees of the firmware', 'CLEAR unlatches and leaves the board disarmed', a.kind === 'ack' && s4?.fields.fault === 'none' && !s4.fields.armed, `${answerText(a)}; ${s4 ? `armed=${s4.fields.armed ? 1 : 0} fault=${s4.fields.fault}` : 'no STAT'}`);
    }

    // ------------------------------------------------------------ STAT interval (a quiet second)
    {
      const from = probe.mark();
      await probe.sleep(1000);
      // Gaps are judged on the board's own clock where telemetry gives it (TEL t between two STATs): a stall of
      // the line or of this checker delays lines without the board having left a gap. Where no TEL falls
      // between two STATs, their arrival times are what there is.
      const lines = probe.received.slice(from);
      let gap = 0;
      let prev = -1;
      let stats = 0;
      for (let i = 0; i < lines.length; i++) {
        if (lines[i].frame.tag !== 'STAT') continue;
        stats++;
        if (prev >= 0) {
          const tel = lines.slice(prev + 1, i).filter((r) => r.frame.tag === 'TEL').map((r) => (r.frame as FrameOf<'TEL'>).fields.t);
          const deviceMs = tel.length >= 2 ? (((tel[tel.length - 1] - tel[0]) % 4294967296) + 4294967296) % 4294967296 / 1000 : null;
          gap = Math.max(gap, deviceMs ?? lines[i].at - lines[prev].at);
        }
        prev = i;
      }
      if (stats < 2) gap = 1000;
      measured.stat_gap_ms = Math.round(gap);
      add('stat-interval', 'Telemetry', `STAT at least every ${STAT_MAX_INTERVAL_MS} ms`, gap <= STAT_MAX_INTERVAL_MS + STAT_GAP_SLACK_MS, `longest gap ${Math.round(gap)} ms over a quiet second (${stats} STATs)`);
    }

    // ------------------------------------------------------------ heartbeat loss
    {
      await probe.command('ARM', {}, ACK_TIMEOUT_MS);
      if (spin > 0) await probe.command('THR', { v: spin }, ACK_TIMEOUT_MS);
      const from = probe.mark();
      probe.heartbeat(null);
      const lastHb = probe.lastHbAt;
      const cut = await probe.waitFor((x) => x.tag === 'STAT' && x.fields.fault === 'heartbeat', hbMs * 4 + 1000, from);
      const ms = cut ? cut.at - lastHb : null;
      measured.heartbeat_cut_ms = ms === null ? null : Math.round(ms);
      const stat = cut?.frame as FrameOf<'STAT'> | undefined;
      const inTime = ms !== null && ms >= hbMs - HEARTBEAT_EARLY_TOLERANCE_MS && ms <= hbMs + HEARTBEAT_CUT_TOLERANCE_MS;
      add(
        'heartbeat-cut',
        'Heartbeat',
        `heartbeat loss cuts, disarms and latches heartbeat ${hbMs} ms after the last HB`,
        inTime && stat !== undefined && !stat.fields.armed && stat.fields.out === 0 && !stat.fields.hbok,
        ms === null ? `no STAT fault=heartbeat within ${hbMs * 4 + 1000} ms` : `cut ${Math.round(ms)} ms after the last HB (allowed ${hbMs - HEARTBEAT_EARLY_TOLERANCE_MS}..${hbMs + HEARTBEAT_CUT_TOLERANCE_MS}); STAT armed=${stat!.fields.armed ? 1 : 0} out=${stat!.fields.out.toFixed(3)} hbok=${stat!.fields.hbok ? 1 : 0}`,
      );
      probe.heartbeat(period);
      await probe.command('CLEAR', {}, ACK_TIMEOUT_MS);
    }

    // ------------------------------------------------------------ BYE, and what the board does after it
    {
      await expectAnswer('bye', 'Ending a session', 'BYE is acknowledged', 'ack', () => probe.command('BYE', {}, ACK_TIMEOUT_MS));
      probe.heartbeat(null);
      await probe.sleep(hbMs + 200);
      const s5 = await probe.status(ACK_TIMEOUT_MS);
      add('bye-no-latch', 'Ending a session', 'after BYE, no heartbeat latch however long the silence', s5 !== null && s5.fields.fault === 'none' && !s5.fields.armed, s5 ? `fault=${s5.fields.fault} hbok=${s5.fields.hbok ? 1 : 0}` : 'no STAT');
      add('hbok-before-handshake', 'Heartbeat', 'STAT hbok is 0 without a handshake', s5 !== null && !s5.fields.hbok, s5 ? `hbok=${s5.fields.hbok ? 1 : 0}` : 'no STAT');
      await expectAnswer('not-ready', 'Handshake', 'without a handshake, ARM is refused as not_ready', 'not_ready', () => probe.command('ARM', {}, ACK_TIMEOUT_MS));
      await expectAnswer('disarm-before-handshake', 'Handshake', 'without a handshake, DISARM is carried out', 'ack', () => probe.command('DISARM', {}, ACK_TIMEOUT_MS));
    }

    // ------------------------------------------------------------ the port opened again
    {
      await probe.close();
      // As a person would unplug-replug or restart a terminal: give the operating system a moment between.
      await probe.sleep(REOPEN_PAUSE_MS);
      await probe.open();
      const again = await handshake();
      let detail: string;
      let ok = again.ident !== null;
      if (again.boot) {
        const b = again.boot.fields;
        const statFault = again.bootStat?.fields.fault;
        const consistent = (b.boot === 'reset' && statFault === 'reset') || (b.boot === 'power' && statFault === 'none');
        ok = ok && b.nonce === undefined && consistent;
        detail = `the board restarted on open (boot=${b.boot}${b.nonce !== undefined ? `, nonce=${b.nonce} on a boot IDENT` : ''}, STAT fault=${statFault ?? 'none sent'}) and answered a HELLO ${Math.round(again.ms)} ms after the port opened`;
      } else {
        detail = again.ident ? `no restart on open; answered in ${Math.round(again.ms)} ms` : `no answer within ${HANDSHAKE_TIMEOUT_MS} ms of opening the port again`;
      }
      add('reopen', 'Handshake', 'opening the port again: a boot IDENT (if the board resets) carries boot= and no nonce, and a HELLO is answered', ok, detail);
      if (again.ident) {
        probe.heartbeat(heartbeatIntervalFor(hbMs));
        const s6 = await probe.status(ACK_TIMEOUT_MS);
        if (s6 && s6.fields.fault !== 'none') await probe.command('CLEAR', {}, ACK_TIMEOUT_MS);
        await probe.command('BYE', {}, ACK_TIMEOUT_MS);
        probe.heartbeat(null);
      }
    }
  } catch (err) {
    if (!(err instanceof Aborted)) add('link', 'Framing', 'the port works', false, (err as Error).message);
  } finally {
    probe.heartbeat(null);
    // Every line the board sent is judged for its spelling: decodable, and written as an encoder writes it.
    const nonCanonical = probe.received.filter((r) => {
      try {
        return encodeLine(r.frame.tag, r.frame.seq, r.frame.fields as never).trimEnd() !== r.raw;
      } catch {
        return true;
      }
    });
    add(
      'numbers-out',
      'Framing',
      'every line from the board decodes and is written with the declared decimals',
      probe.bad.length === 0 && nonCanonical.length === 0 && probe.received.length > 0,
      probe.bad.length
        ? `${probe.bad.length} lines did not decode (${probe.bad[0].reason}: ${JSON.stringify(probe.bad[0].raw.slice(0, 60))})`
        : nonCanonical.length
          ? `${nonCanonical.length} of ${probe.received.length} lines not as declared, e.g. ${JSON.stringify(nonCanonical[0].raw.slice(0, 80))}`
          : `${probe.received.length} lines, all canonical`,
    );
    await probe.close();
  }
  return {
    device: probe.description || 'device',
    firmware: ident ? `${ident.fields.fw} ${ident.fields.fwver}` : null,
    pass: checks.length > 0 && checks.every((c) => c.pass),
    checks,
    measured,
  };
}

/** The report for people: one line per check, failures first named with their PROTOCOL.md section. */
export function formatReport(r: CheckReport): string {
  const lines = [`device: ${r.device}${r.firmware ? ` (${r.firmware})` : ''}`];
  for (const c of r.checks) lines.push(`${c.pass ? 'PASS' : 'FAIL'}  [${c.section}] ${c.title}: ${c.detail}`);
  const failed = r.checks.filter((c) => !c.pass);
  lines.push('');
  lines.push(
    failed.length === 0
      ? `all ${r.checks.length} checks passed`
      : `${failed.length} of ${r.checks.length} checks failed; read ${[...new Set(failed.map((c) => sectionAnchor(c.section)))].join(', ')}`,
  );
  return lines.join('\n') + '\n';
}
