// `ductbench calibrate`: the calibration workflows from the command line. On real hardware the span asks the
// operator to hang each mass and press Enter; on the virtual bench it hangs the masses itself. Every result
// goes into the calibration history in the data folder and is in force for the next daemon.

import { createInterface } from 'node:readline';
import { helpText, parseArgs, UsageError, type CommandSpec } from './args.js';
import { startDaemon, type DeviceSource } from '../daemon.js';
import { CalibrationHistory, calibrationWarnings, type CalibrationEntry } from '../calibration/history.js';
import { CalibrationError, CalibrationWorkflows } from '../calibration/workflows.js';
import { DEFAULT_DATA_DIR } from '../store/store.js';

export interface CalibrateIo {
  stdout: (s: string) => void;
  stderr: (s: string) => void;
  /** Waits for the operator (a line on stdin by default). */
  ask?: (question: string) => Promise<void>;
}

const ACTIONS = ['show', 'tare', 'span', 'current-zero', 'current-ref', 'voltage-ref', 'rpm-pulses'] as const;
type Action = (typeof ACTIONS)[number];

export const CALIBRATE_SPEC: CommandSpec = {
  name: 'calibrate',
  summary: 'calibrate the bench sensors and keep a dated history',
  usage:
    'ductbench calibrate show [--data-dir DIR] [--json]\n' +
    '       ductbench calibrate tare|span|current-zero|current-ref|voltage-ref (--sim [--sim-seed N] | --port PATH [--baud N]) [--data-dir DIR]\n' +
    '           span --masses KG[,KG...]   current-ref --amps A   voltage-ref --volts V\n' +
    '       ductbench calibrate rpm-pulses --actual N --firmware N [--data-dir DIR]',
  options: {
    sim: { kind: 'flag', help: 'calibrate the virtual bench (it hangs the span masses itself)' },
    'sim-seed': { kind: 'int', value: 'N', help: 'noise seed for the virtual bench', min: 0 },
    port: { kind: 'string', value: 'PATH', help: 'serial port of the bench' },
    baud: { kind: 'int', value: 'N', help: 'serial baud rate (default 115200)', min: 1200, max: 4_000_000 },
    'data-dir': { kind: 'string', value: 'DIR', help: `folder of the calibration history (default ${DEFAULT_DATA_DIR})` },
    masses: { kind: 'string', value: 'KG[,KG...]', help: 'span: the known masses, in kilograms' },
    amps: { kind: 'number', value: 'A', help: 'current-ref: the reference meter reading now', min: 0 },
    volts: { kind: 'number', value: 'V', help: 'voltage-ref: the multimeter reading now', min: 0 },
    actual: { kind: 'int', value: 'N', help: 'rpm-pulses: pulses the pickup really gives per revolution', min: 1, max: 64 },
    firmware: { kind: 'int', value: 'N', help: 'rpm-pulses: pulses per revolution the firmware is set for', min: 1, max: 64 },
    json: { kind: 'flag', help: 'show: print JSON' },
  },
  positionals: [1, 1],
  notes: [
    'Remove the propeller, or keep it still and the ESC disarmed, while calibrating. Span masses hang on the thrust axis (a pulley, or the stand turned upright).',
  ],
};

function stdinAsk(io: CalibrateIo): (q: string) => Promise<void> {
  return (q) =>
    new Promise((resolve) => {
      const rl = createInterface({ input: process.stdin });
      io.stderr(`${q} — then press Enter `);
      rl.once('line', () => {
        rl.close();
        resolve();
      });
    });
}

function describe(e: CalibrationEntry): string {
  const r = `scale ${e.result.scale.toFixed(6)}, offset ${e.result.offset.toFixed(5)}`;
  const nl = e.nonLinearityPct !== undefined ? `, non-linearity ${e.nonLinearityPct.toFixed(3)} % of span` : '';
  const res = e.residuals ? `, residuals ${e.residuals.map((x) => x.toFixed(4)).join(' ')} N` : '';
  return `${e.at.slice(0, 19).replace('T', ' ')}  ${e.channel.padEnd(8)} ${e.kind.padEnd(15)} ${r}${nl}${res}${e.note ? `  (${e.note})` : ''}`;
}

export async function calibrateMain(argv: readonly string[], io: CalibrateIo): Promise<number> {
  try {
    const p = parseArgs(CALIBRATE_SPEC, argv);
    if (p.help) {
      io.stdout(helpText(CALIBRATE_SPEC));
      return 0;
    }
    const action = p.positionals[0] as Action;
    if (!ACTIONS.includes(action)) throw new UsageError(`unknown action ${JSON.stringify(action)} (one of ${ACTIONS.join(', ')})`);
    const o = p.opts as Record<string, string | number | boolean | undefined>;
    const history = new CalibrationHistory(o['data-dir'] !== undefined ? String(o['data-dir']) : DEFAULT_DATA_DIR);

    if (action === 'show') {
      if (o.json) io.stdout(JSON.stringify({ in_force: history.current(), history: history.all, warnings: calibrationWarnings(history, new Date(), null) }, null, 2) + '\n');
      else {
        if (history.all.length === 0) io.stdout('no calibrations yet\n');
        for (const e of history.all) io.stdout(describe(e) + '\n');
        for (const w of calibrationWarnings(history, new Date(), null)) io.stdout(`warning: ${w}\n`);
      }
      return 0;
    }
    if (action === 'rpm-pulses') {
      if (o.actual === undefined || o.firmware === undefined) throw new UsageError('rpm-pulses needs --actual N and --firmware N');
      const wfOffline = new CalibrationWorkflows({ link: null as never, controller: null as never }, history);
      io.stdout(describe(wfOffline.rpmPulses(Number(o.actual), Number(o.firmware))) + '\n');
      return 0;
    }
    if (action === 'span' && o.masses === undefined) throw new UsageError('span needs --masses KG[,KG...]');
    if (action === 'current-ref' && o.amps === undefined) throw new UsageError('current-ref needs --amps A');
    if (action === 'voltage-ref' && o.volts === undefined) throw new UsageError('voltage-ref needs --volts V');
    if (o.port !== undefined && (o.sim || o['sim-seed'] !== undefined)) throw new UsageError('--port and --sim exclude each other');
    const masses = action === 'span' ? String(o.masses).split(',').map((x) => Number(x.trim())) : [];
    if (masses.some((m) => !Number.isFinite(m) || m < 0)) throw new UsageError(`--masses: ${String(o.masses)} is not a list of masses in kilograms`);

    const source: DeviceSource =
      o.port !== undefined
        ? { kind: 'serial', path: String(o.port), ...(o.baud !== undefined ? { baud: Number(o.baud) } : {}) }
        : { kind: 'sim', ...(o['sim-seed'] !== undefined ? { seed: Number(o['sim-seed']) } : {}) };
    const d = await startDaemon({ source, httpPort: 0, log: () => {}, link: { handshakeTimeoutMs: source.kind === 'serial' ? 4000 : 2000 } });
    try {
      await d.firstConnect;
      if (!d.link.isReady) {
        io.stderr(`ductbench calibrate: ${d.link.view().error?.message ?? 'device did not connect'}\n`);
        return 1;
      }
      const wf = new CalibrationWorkflows({ link: d.link, controller: d.controller }, history);
      const unwatch = wf.watch();
      const ask = io.ask ?? stdinAsk(io);
      const place = async (kg: number) => {
        if (d.sim) {
          d.sim.hangMass(kg);
          io.stderr(`virtual bench: ${kg === 0 ? 'load cell empty' : `${kg} kg hung on the load cell`}\n`);
        } else await ask(kg === 0 ? 'Take every mass off the load cell' : `Hang ${kg} kg on the load cell and let it settle`);
      };
      let entry: CalibrationEntry;
      switch (action) {
        case 'tare':
          entry = await wf.tare();
          break;
        case 'span':
          entry = await wf.span(masses, place);
          if (d.sim) d.sim.hangMass(0);
          break;
        case 'current-zero':
          entry = await wf.currentZero();
          break;
        case 'current-ref':
          entry = await wf.scaleAgainst('current', Number(o.amps));
          break;
        case 'voltage-ref':
          entry = await wf.scaleAgainst('voltage', Number(o.volts));
          break;
      }
      unwatch();
      io.stdout(describe(entry) + '\n');
      return 0;
    } finally {
      await d.close();
    }
  } catch (err) {
    if (err instanceof UsageError) {
      io.stderr(`ductbench calibrate: ${err.message} (see ductbench calibrate --help)\n`);
      return 2;
    }
    if (err instanceof CalibrationError) {
      io.stderr(`ductbench calibrate: ${err.message}\n`);
      return 1;
    }
    io.stderr(`ductbench calibrate: ${(err as Error).message}\n`);
    return 1;
  }
}
