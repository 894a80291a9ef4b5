// `ductbench run`: a guided throttle-step sequence without the dashboard. Starts the daemon in process (HTTP
// on a free loopback port, so a dashboard can still watch), checks the sequence against the device and the
// rig, arms, runs, ramps down, disarms, and reports. Progress goes to stderr; the result to stdout (a table,
// or with --json one JSON object).
//
// Acknowledgement: on real hardware (--port) the run needs --yes-i-have-checked, after the cautions printed
// on stderr; nothing arms a real motor from a command line without it. The virtual bench (--sim, the default)
// needs none: nothing can be hurt.
//
// Exit codes: 0 only when the outcome is completed and recorded whole; 1 for tripped, aborted, interrupted or a
// device that did not connect; 2 for bad usage or a sequence/rig/latched board that is refused before arming;
// 3 for a run that completed whose record is incomplete (the disk filled: the outcome line, the JSON's `record`
// and the session say how many points and samples were kept). With --json stdout always carries one JSON
// object, refusals included (outcome "refused" or "failed" with the reasons).
//
// A board found latched is reported with its cause. A reset latch whose boot the link saw during this very
// handshake is the one opening the port caused (auto-reset): it is cleared, and said so. Any other latch is
// cleared only with --clear-latch, after printing what it was.
//
// SIGINT / SIGTERM during a run cut first (controller.stop through the runner), then the run ends as aborted.

import { readFileSync } from 'node:fs';
import { startDaemon, type DaemonOptions, type DeviceSource, type RunningDaemon } from '../daemon.js';
import { parseLimits } from '../interlocks/limits.js';
import { parseRig, rigGeometry } from '../model/rig.js';
import type { RigSpec } from '../model/rig-types.js';
import { FAULT_KINDS, type InjectedFaultKind } from '../sim/faults.js';
import { FAULT_MEANINGS } from '../../firmware-protocol/src/doc.js';
import { linkCounters } from '../link/link.js';
import { loadSequence, SequenceError, SequenceRunner, formatIssue, type PredictFn, type RunPoint, type RunResult, type RunTransitionEvent, type SequencePlan } from '../sequence/index.js';
import { helpText, parseArgs, UsageError, type CommandSpec } from './args.js';
import { describeIncomplete, type RecordSummary } from '../store/recorder.js';

/** Exit status of a run that completed on the bench but whose record in the store is incomplete (disk full). */
export const EXIT_RECORD_INCOMPLETE = 3;

export interface RunIo {
  stdout: (s: string) => void;
  stderr: (s: string) => void;
}

/** Where the session store (or anything else) hears about a run. Every member is optional. */
export interface RunRecordHook {
  onTransition?(t: RunTransitionEvent): void;
  onPoint?(p: RunPoint): void;
  /** Ends the record; what it kept against what was taken, when the hook knows. */
  finish?(r: RunResult): void | RecordSummary | null | Promise<void | RecordSummary | null>;
}

export interface RunRecordContext {
  dataDir: string | null;
  tags: string[];
  plan: SequencePlan;
  rig: RigSpec | null;
  daemon: RunningDaemon;
}

/** Seams for the integrator and for tests; the command works without any of them. */
export interface RunHooks {
  readFile?: (path: string) => string;
  /** Subscribes to interrupt signals; default SIGINT and SIGTERM on the process. Returns an unsubscribe. */
  signals?: (fn: (signal: string) => void) => () => void;
  /** The performance model, once wired: a predictor for the rig in use (null: no prediction). */
  predictorFor?: (rig: RigSpec) => PredictFn | null;
  /** Opens a session record (the store) for this run. */
  record?: (ctx: RunRecordContext) => RunRecordHook | null | Promise<RunRecordHook | null>;
  /** Data folder when --data-dir is not given (the CLI passes the documented default; tests leave it out). */
  defaultDataDir?: string;
  /** Extra daemon options (tests: a noise seed, limit overrides). */
  daemon?: Partial<DaemonOptions>;
  /** Told when the runner exists, before its checks (tests drive faults and signals from here). */
  onRunner?: (runner: SequenceRunner, daemon: RunningDaemon) => void;
}

export const RUN_SPEC: CommandSpec = {
  name: 'run',
  summary: 'run a throttle-step sequence headless and report the operating points',
  usage:
    'ductbench run (--sequence FILE | --staircase START,STOP,STEP --hold SECONDS [--ramp SECONDS] [--window SECONDS])\n' +
    '              [--sim [--sim-rig FILE] [--sim-seed N] [--sim-fault KIND[@SECONDS] ...] | --port PATH [--baud N] --yes-i-have-checked]\n' +
    '              [--rig FILE] [--max-throttle F] [--air-density KG_PER_M3] [--keep-zero] [--tag T ...] [--data-dir DIR] [--json]',
  options: {
    sequence: { kind: 'string', value: 'FILE', help: 'sequence file (JSON; see server/sequence/SCHEMA.md)' },
    staircase: { kind: 'string', value: 'START,STOP,STEP', help: 'a staircase of throttle fractions 0..1 instead of a file, e.g. 0.2,0.8,0.1' },
    hold: { kind: 'number', value: 'SECONDS', help: 'with --staircase: longest settle wait per step', min: 0.5, max: 600 },
    ramp: { kind: 'number', value: 'SECONDS', help: 'with --staircase: ramp time between steps (default 1)', min: 0, max: 600 },
    window: { kind: 'number', value: 'SECONDS', help: 'with --staircase: measurement window per step (default 2)', min: 0.2, max: 600 },
    sim: { kind: 'flag', help: 'use the built-in virtual bench (the default when no --port is given)' },
    'sim-rig': { kind: 'string', value: 'FILE', help: 'rig file for the virtual bench' },
    'sim-seed': { kind: 'int', value: 'N', help: 'noise seed for the virtual bench', min: 0 },
    'sim-fault': { kind: 'string', value: 'KIND[@SECONDS]', help: `inject a virtual-bench fault at that second of the run (${FAULT_KINDS.join(', ')})`, repeat: true },
    port: { kind: 'string', value: 'PATH', help: 'serial port of the bench microcontroller (real hardware)' },
    baud: { kind: 'int', value: 'N', help: 'serial baud rate (default 115200)', min: 1200, max: 4_000_000 },
    'yes-i-have-checked': { kind: 'flag', help: 'required with --port: you have gone through the cautions printed by this command' },
    rig: { kind: 'string', value: 'FILE', help: 'rig description: propeller diameter for the figure of merit, limits for the checks' },
    'max-throttle': { kind: 'number', value: 'F', help: 'refuse any step above this throttle (on top of the device ceiling)', min: 0, max: 1 },
    'air-density': { kind: 'number', value: 'KG_PER_M3', help: 'air density for the figure of merit (default 1.225, ISA sea level)', min: 0.3, max: 1.6 },
    'keep-zero': { kind: 'flag', help: 'do not zero the thrust at rest before the run: keep the zero in force (the session says so)' },
    tag: { kind: 'string', value: 'T', help: 'tag for the recorded session', repeat: true },
    'data-dir': { kind: 'string', value: 'DIR', help: 'folder for recorded sessions' },
    json: { kind: 'flag', help: 'print the result as one JSON object on stdout (refusals included)' },
    'clear-latch': { kind: 'flag', help: 'clear a fault the board was already latched with (after printing it) instead of refusing' },
  },
  notes: [
    'Throttle values are fractions 0..1. A sequence asking for more than the device ceiling or the rig limit is refused before anything arms.',
    'Before arming, the thrust is read at rest and taken as zero; thrust that is not steady at rest (wind, vibration, something touching the stand) refuses the run. After it, the thrust at rest is read again and the zero drift reported.',
    'Exit status: 0 completed; 1 tripped, aborted, interrupted or no device; 2 bad usage or a refused sequence. Ctrl-C cuts the throttle first.',
  ],
};

const CAUTIONS = [
  'Before spinning a propeller:',
  '  - keep everyone out of the plane of rotation; wear eye protection',
  '  - the stand is clamped down and the propeller nut is tight',
  '  - the battery sits in a fire-safe place and is supervised',
  '  - a hard-wired power cut is within reach (the software stop does not replace it)',
  '  - nothing loose near the intake or the wash',
];

class RefusedError extends Error {}

function parseFault(raw: string): { kind: InjectedFaultKind; at_s: number } {
  const [kind, at] = raw.split('@');
  if (!(FAULT_KINDS as readonly string[]).includes(kind)) throw new UsageError(`--sim-fault: unknown kind ${JSON.stringify(kind)} (known: ${FAULT_KINDS.join(', ')})`);
  let at_s = 0;
  if (at !== undefined) {
    at_s = Number(at);
    if (at.trim() === '' || !Number.isFinite(at_s) || at_s < 0) throw new UsageError(`--sim-fault: ${JSON.stringify(at)} is not a number of seconds`);
  }
  return { kind: kind as InjectedFaultKind, at_s };
}

function staircaseSequence(raw: string, hold: number, ramp: number | undefined, window: number | undefined): unknown {
  const parts = raw.split(',');
  if (parts.length !== 3) throw new UsageError('--staircase takes START,STOP,STEP (three throttle fractions)');
  const [start, stop, step] = parts.map((p) => {
    const n = Number(p);
    if (p.trim() === '' || !Number.isFinite(n)) throw new UsageError(`--staircase: ${JSON.stringify(p)} is not a number`);
    return n;
  });
  return {
    name: `staircase ${start} to ${stop} by ${step}`,
    steps: [{ staircase: { start, stop, step, hold_s: hold, ...(ramp !== undefined ? { ramp_s: ramp } : {}), ...(window !== undefined ? { window_s: window } : {}) } }],
  };
}

function fmt(x: number | null | undefined, digits: number): string {
  return x === null || x === undefined || !Number.isFinite(x) ? '-' : x.toFixed(digits);
}

function pointLine(p: RunPoint, n: number): string {
  const c = p.channels;
  return (
    `point ${p.index + 1}/${n}: throttle ${p.throttle.toFixed(3)}  thrust ${fmt(c.thrust?.mean, 3)} N  ${fmt(c.power?.mean, 1)} W  ` +
    `${fmt(p.grams_per_watt, 2)} g/W  FM ${fmt(p.figure_of_merit, 3)}${p.settled ? '' : '  (not settled)'}`
  );
}

function table(r: RunResult, incomplete: RecordSummary | null = null): string {
  const head = ['step', 'throttle', 'thrust_N', 'std_N', 'voltage_V', 'current_A', 'power_W', 'rpm', 'temp_C', 'g_per_W', 'FM', 'settled', 'dev_%'];
  const rows = r.points.map((p) => {
    const c = p.channels;
    return [
      String(p.index + 1),
      p.throttle.toFixed(3),
      fmt(c.thrust?.mean, 3),
      fmt(c.thrust?.std, 3),
      fmt(c.voltage?.mean, 2),
      fmt(c.current?.mean, 2),
      fmt(c.power?.mean, 1),
      fmt(c.rpm?.mean, 0),
      fmt(c.temp?.mean, 1),
      fmt(p.grams_per_watt, 2),
      fmt(p.figure_of_merit, 3),
      p.settled ? 'yes' : 'no',
      fmt(p.deviation_pct, 1),
    ];
  });
  const w = head.map((h, i) => Math.max(h.length, ...rows.map((row) => row[i].length)));
  const line = (cells: string[]) => cells.map((c, i) => c.padStart(w[i])).join('  ');
  const out = [line(head), ...rows.map(line)];
  out.push('', `outcome: ${r.outcome} (${r.reason})${incomplete ? `; ${describeIncomplete(incomplete)}` : ''}`);
  if (r.trip) out.push(`trip: ${r.trip.rule} value ${fmt(r.trip.value, 3)} limit ${fmt(r.trip.limit, 3)}, cut ${fmt(r.trip.cut_latency_ms, 2)} ms after the reading`);
  return out.join('\n') + '\n';
}

export function resultJson(r: RunResult, extra: Record<string, unknown> = {}): Record<string, unknown> {
  return {
    outcome: r.outcome,
    reason: r.reason,
    trip: r.trip ? { rule: r.trip.rule, value: r.trip.value, limit: r.trip.limit, cut_latency_ms: r.trip.cut_latency_ms, detail: r.trip.detail, source: r.trip.source } : null,
    points: r.points,
    sequence: r.sequence,
    started_at: r.started_at,
    ended_at: r.ended_at,
    ...extra,
    transitions: r.transitions,
  };
}

function readJsonFile(read: (p: string) => string, path: string, what: string): unknown {
  let text: string;
  try {
    text = read(path);
  } catch (err) {
    throw new RefusedError(`cannot read ${what} ${path}: ${(err as Error).message}`);
  }
  try {
    return JSON.parse(text) as unknown;
  } catch (err) {
    throw new RefusedError(`${what} ${path} is not valid JSON: ${(err as Error).message}`);
  }
}

/** Exit code. Never throws: usage errors and refusals are reported on stderr (and with --json on stdout). */
export async function runMain(argv: string[], io: RunIo, hooks: RunHooks = {}): Promise<number> {
  const said: string[] = [];
  const say = (s: string) => {
    said.push(s);
    io.stderr(`ductbench run: ${s}\n`);
  };
  let printed = false;
  const out: RunIo = {
    stdout: (s) => {
      printed = true;
      io.stdout(s);
    },
    stderr: io.stderr,
  };
  let code: number;
  try {
    code = await runInner(argv, out, hooks, say);
  } catch (err) {
    if (err instanceof UsageError) {
      say(`${err.message} (see ductbench run --help)`);
      code = 2;
    } else if (err instanceof SequenceError) {
      for (const i of err.issues) say(formatIssue(i));
      code = 2;
    } else if (err instanceof RefusedError) {
      say(err.message);
      code = 2;
    } else {
      say((err as Error).message);
      code = 1;
    }
  }
  // --json promises one JSON object whatever happened: a script must never have to parse stderr.
  if (!printed && code !== 0 && argv.includes('--json') && !argv.includes('--help')) {
    io.stdout(JSON.stringify({ outcome: code === 2 ? 'refused' : 'failed', reason: said[said.length - 1] ?? 'failed', messages: said, points: [] }) + '\n');
  }
  return code;
}

async function runInner(argv: string[], io: RunIo, hooks: RunHooks, say: (s: string) => void): Promise<number> {
  const p = parseArgs(RUN_SPEC, argv);
  if (p.help) {
    io.stdout(helpText(RUN_SPEC));
    return 0;
  }
  const o = p.opts as Record<string, string | number | boolean | (string | number)[] | undefined>;
  const has = (k: string) => o[k] !== undefined;

  // ---- usage
  if (has('sequence') === has('staircase')) throw new UsageError('give either --sequence FILE or --staircase START,STOP,STEP');
  if (has('staircase') && !has('hold')) throw new UsageError('--staircase needs --hold SECONDS');
  for (const k of ['hold', 'ramp', 'window']) if (has(k) && !has('staircase')) throw new UsageError(`--${k} goes with --staircase`);
  const real = has('port');
  if (real && (o.sim || has('sim-rig') || has('sim-seed') || has('sim-fault'))) throw new UsageError('--port and the --sim options exclude each other');
  if (has('baud') && !real) throw new UsageError('--baud goes with --port');
  const faults = ((o['sim-fault'] as string[] | undefined) ?? []).map(parseFault);
  const tags = ((o.tag as string[] | undefined) ?? []).map(String);

  // ---- inputs, all checked before any device is opened
  const read = hooks.readFile ?? ((path: string) => readFileSync(path, 'utf8'));
  const rawSequence = has('sequence')
    ? readJsonFile(read, String(o.sequence), 'sequence file')
    : staircaseSequence(String(o.staircase), Number(o.hold), o.ramp as number | undefined, o.window as number | undefined);
  const plan = loadSequence(rawSequence);
  let rig: RigSpec | null = null;
  if (has('rig')) {
    const doc = readJsonFile(read, String(o.rig), 'rig file');
    try {
      rig = parseRig(doc);
    } catch (err) {
      throw new RefusedError(`rig file ${String(o.rig)}: ${(err as Error).message}`);
    }
  }

  io.stderr(CAUTIONS.join('\n') + '\n');
  if (real && !o['yes-i-have-checked']) {
    say('real hardware: go through the cautions above, then run again with --yes-i-have-checked');
    return 2;
  }

  // ---- the bench
  const source: DeviceSource = real
    ? { kind: 'serial', path: String(o.port), ...(has('baud') ? { baud: Number(o.baud) } : {}) }
    : { kind: 'sim', ...(has('sim-rig') ? { rigFile: String(o['sim-rig']) } : {}), ...(has('sim-seed') ? { seed: Number(o['sim-seed']) } : {}) };
  const daemon = await startDaemon({
    log: (line) => io.stderr(`${line}\n`),
    ...hooks.daemon,
    source,
    httpPort: 0,
    host: '127.0.0.1',
    ...(rig ? { rig } : {}),
    ...(has('data-dir') ? { dataDir: String(o['data-dir']) } : hooks.defaultDataDir ? { dataDir: hooks.defaultDataDir } : {}),
    link: { handshakeTimeoutMs: real ? 4000 : 2000, ...(hooks.daemon?.link ?? {}) },
  });
  let offSignals: () => void = () => {};
  try {
    await daemon.firstConnect;
    if (!daemon.link.isReady) {
      const err = daemon.link.view().error;
      say(err ? err.message : 'device did not connect');
      return 1;
    }
    const latch = await settleStartLatch(daemon, Boolean(o['clear-latch']), say);
    if (latch !== null) return latch;
    // The rig the numbers are for: the file given, else the virtual bench's own description.
    const rigInUse: RigSpec | null = rig ?? (daemon.sim ? daemon.sim.rig : null);
    const limits = parseLimits(rigInUse?.limits, 'rig limits');
    const rigMax = typeof (rigInUse?.limits as Record<string, unknown> | undefined)?.max_throttle === 'number' ? Number(rigInUse!.limits!.max_throttle) : null;
    const cliMax = has('max-throttle') ? Number(o['max-throttle']) : null;
    const rigCeiling = rigMax === null ? cliMax : cliMax === null ? rigMax : Math.min(rigMax, cliMax);
    const runner = new SequenceRunner({ controller: daemon.controller, onSample: (fn) => daemon.onSample(fn), identity: () => daemon.link.identity }, plan, {
      rigCeiling,
      temperatureLimitC: limits.max_temp_c,
      diskArea_m2: rigInUse ? rigGeometry(rigInUse).diskArea_m2 : null,
      ...(has('air-density') ? { airDensity_kg_m3: Number(o['air-density']) } : {}),
      // The daemon's prediction of its mount (with its band and any fit kept in the data folder), unless a hook gives another.
      predict: rigInUse ? (hooks.predictorFor ? hooks.predictorFor(rigInUse) : daemon.predict()) : null,
    });

    hooks.onRunner?.(runner, daemon);
    const issues = runner.check();
    if (issues.length) {
      for (const i of issues) say(formatIssue(i));
      say('refused before arming: nothing was sent to the motor');
      return 2;
    }

    const record = hooks.record ? await hooks.record({ dataDir: has('data-dir') ? String(o['data-dir']) : null, tags, plan, rig: rigInUse, daemon }) : null;
    const n = plan.steps.length;
    runner.on('transition', (t) => {
      record?.onTransition?.(t);
      const pr = runner.view().progress;
      const left = pr.remaining_s === null ? '' : ` (about ${Math.ceil(pr.remaining_s)} s left)`;
      io.stderr(`[step ${Math.min(t.step + 1, n)} of ${n}] ${t.to}: ${t.reason}${left}\n`);
    });
    runner.on('point', (pt) => {
      record?.onPoint?.(pt);
      io.stderr(pointLine(pt, n) + '\n');
    });

    const signals =
      hooks.signals ??
      ((fn: (sig: string) => void) => {
        const a = () => fn('SIGINT');
        const b = () => fn('SIGTERM');
        process.on('SIGINT', a);
        process.on('SIGTERM', b);
        return () => {
          process.off('SIGINT', a);
          process.off('SIGTERM', b);
        };
      });
    offSignals = signals((sig) => {
      // Cut first: the runner writes STOP before it records anything.
      io.stderr(`ductbench run: ${sig}: cutting the throttle\n`);
      if (!runner.cut(sig)) daemon.controller.stop(`run: ${sig}`);
    });

    io.stderr(`ductbench run: ${plan.name}: ${n} step${n === 1 ? '' : 's'} on ${daemon.link.view().source}\n`);
    let zero;
    try {
      zero = await daemon.zero.beforeRun('the run', { keep: o['keep-zero'] === true, managed: true });
    } catch (err) {
      say((err as Error).message);
      say('refused before arming: nothing was sent to the motor');
      return 2;
    }
    io.stderr(`ductbench run: ${zero.text}\n`);
    const started = runner.start();
    // Faults are timed from the start of the run, on the device's clock (which follows real time).
    for (const f of faults) daemon.sim?.injectFault(f.kind, { after_ms: f.at_s * 1000 });
    const result = await started;
    const kept = (await record?.finish?.(result)) ?? null;
    const incomplete = kept && !kept.complete ? kept : null;
    if (incomplete) io.stderr(`ductbench run: ${describeIncomplete(incomplete)} (disk full or unwritable)\n`);
    // The zero read again at rest: the drift over the run.
    daemon.zero.afterRun();
    await daemon.zero.settled();
    const drift = daemon.zero.view().after;
    if (drift) io.stderr(`ductbench run: ${drift.reason}\n`);

    const id = daemon.link.identity;
    const budget = daemon.link.lineBudget;
    const extra = {
      tags,
      device: id
        ? {
            firmware: id.firmware,
            version: id.firmwareVersion,
            ceiling: id.throttleCeiling,
            source: daemon.link.view().source,
            heartbeat_timeout_ms: id.heartbeatTimeoutMs,
            heartbeat_interval_ms: daemon.link.heartbeatIntervalMs,
            boot_on_connect: daemon.link.bootOnConnect,
            line_budget: budget ? { bytes_per_s: budget.bytesPerSecond, capacity_per_s: budget.capacityPerSecond, fits: budget.fits } : null,
          }
        : null,
      link: linkCounters(daemon.link.view()),
      rig: rigInUse ? rigInUse.name : null,
      faults: faults.map((f) => ({ kind: f.kind, at_s: f.at_s })),
      zero: { mode: zero.mode, offset_N: zero.offset_N, previous_offset_N: zero.previous_offset_N, reading: zero.reading, drift },
      record: kept ? { ...kept, text: kept.complete ? 'complete' : describeIncomplete(kept) } : null,
    };
    io.stdout(o.json ? JSON.stringify(resultJson(result, extra)) + '\n' : table(result, incomplete));
    if (result.outcome !== 'completed') return 1;
    return incomplete ? EXIT_RECORD_INCOMPLETE : 0;
  } finally {
    offSignals();
    await daemon.close();
  }
}

/**
 * Waits for the board's first STAT, then deals with a latched fault: the reset caused by opening the port is
 * cleared (and said so); any other latch is refused unless --clear-latch, which clears it after saying what it
 * was. Returns null to go on, or the exit code.
 */
async function settleStartLatch(daemon: RunningDaemon, clearLatch: boolean, say: (s: string) => void): Promise<number | null> {
  const c = daemon.controller;
  // The answer to HELLO is IDENT then STAT; the controller knows the fault only once that STAT is in.
  const deadline = Date.now() + 1000;
  while (c.view().throttleOutput === null && Date.now() < deadline && daemon.link.isReady) await new Promise((r) => setTimeout(r, 10));
  if (c.state !== 'tripped') return null;
  const fault = c.view().fault;
  const meaning = fault === 'none' ? c.view().reason : `${fault}: ${FAULT_MEANINGS[fault]}`;
  if (fault === 'reset' && daemon.link.bootOnConnect === 'reset') {
    say('the board restarted when its port was opened (auto-reset: it booted during this handshake), so its reset latch is ours: clearing it');
  } else if (clearLatch) {
    say(`the board was latched before this run (${meaning}); clearing it as --clear-latch asks`);
  } else {
    say(`the board is latched (${meaning}). Find out why, then run again with --clear-latch to clear it`);
    return 2;
  }
  try {
    await c.acknowledge();
  } catch (err) {
    say(`could not clear the latch: ${(err as Error).message}`);
    return 1;
  }
  return null;
}
