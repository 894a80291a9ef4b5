// `ductbench` command line. Every command declares its options once (cli/args.ts); a bad flag, a missing port
// or a port without a ductbench device gets one clear line on stderr and a non-zero exit.

import { readFileSync } from 'node:fs';
import { helpText, parseArgs, UsageError, type CommandSpec, type Parsed } from './cli/args.js';
import { DEFAULT_HTTP_PORT, startDaemon, type DeviceSource } from './daemon.js';
import { listPorts } from './link/ports.js';
import { parseRig } from './model/rig.js';
import { DEFAULT_DATA_DIR } from './store/store.js';
import { resolveAtmosphere, type AtmosphereInput } from './bench/atmosphere.js';
import type { RigSpec } from './model/rig-types.js';
import { EXIT_INTERNAL, installLastResort } from './util/last-resort.js';
import { boundAddresses } from './http/access.js';

const VERSION = (JSON.parse(readFileSync(new URL('../../package.json', import.meta.url), 'utf8')) as { version: string }).version;

/** Exit codes: 0 done, 1 runtime failure (device, port), 2 bad usage or input, 70 internal error (a bug that escaped). */
export const EXIT = { ok: 0, failure: 1, usage: 2, internal: EXIT_INTERNAL } as const;

const SERVE: CommandSpec = {
  name: 'serve',
  summary: 'run the bench daemon and the dashboard',
  usage: 'ductbench serve [--sim [--sim-rig FILE] | --port PATH [--baud N]] [--http-port N] [--token T] [--data-dir DIR]',
  options: {
    sim: { kind: 'flag', help: 'use the built-in virtual bench (the default when no --port is given)' },
    'sim-rig': { kind: 'string', value: 'FILE', help: 'rig file for the virtual bench (built-in open 10-inch rig otherwise)' },
    'sim-seed': { kind: 'int', value: 'N', help: 'noise seed for the virtual bench', min: 0 },
    port: { kind: 'string', value: 'PATH', help: 'serial port of the bench microcontroller, e.g. /dev/ttyACM0' },
    baud: { kind: 'int', value: 'N', help: 'serial baud rate (default 115200)', min: 1200, max: 4_000_000 },
    host: { kind: 'string', value: 'ADDR', help: 'address to listen on (default 127.0.0.1; anything else exposes the bench to the network)' },
    'http-port': { kind: 'int', value: 'N', help: `HTTP port of the dashboard (default ${DEFAULT_HTTP_PORT}; 0 picks a free one)`, min: 0, max: 65535 },
    token: { kind: 'string', value: 'T', help: 'access token (default: $DUCTBENCH_TOKEN, else a new random one each launch)' },
    'data-dir': { kind: 'string', value: 'DIR', help: 'folder for recorded sessions (default ./ductbench-data)' },
    rig: { kind: 'string', value: 'FILE', help: 'rig file of the first mount, for the prediction and the limits (default: the virtual bench rig); its parts go into the parts library, and the controlling dashboard may mount others while disarmed' },
    altitude: { kind: 'number', value: 'METRES', help: 'air from the standard atmosphere at this altitude (default 0)', min: -500, max: 6000 },
    'air-temp': { kind: 'number', value: 'DEGC', help: 'measured air temperature (with --air-pressure)' },
    'air-pressure': { kind: 'number', value: 'PA', help: 'measured air pressure in pascals (with --air-temp)' },
    humidity: { kind: 'number', value: 'PERCENT', help: 'measured relative humidity (with --air-temp and --air-pressure)', min: 0, max: 100 },
    density: { kind: 'number', value: 'KG_PER_M3', help: 'air density, when known directly' },
  },
  notes: ['The dashboard URL, with its token, is printed on start. Ctrl-C or SIGTERM cuts the throttle before exiting.'],
};

const PORTS: CommandSpec = {
  name: 'ports',
  summary: 'list serial ports that could be a bench microcontroller',
  usage: 'ductbench ports [--json]',
  options: { json: { kind: 'flag', help: 'print JSON' } },
};

const SIM: CommandSpec = {
  name: 'sim',
  summary: 'run the virtual bench behind a pseudo-terminal, as if it were a microcontroller on a serial port',
  usage: 'ductbench sim [--sim-rig FILE] [--link PATH] [--seed N] [--reset-on-open MS]',
  options: {
    'reset-on-open': { kind: 'int', value: 'MS', help: 'behave like a board with auto-reset: restart whenever the port is opened, deaf for MS (its bootloader)', min: 0, max: 10000 },
    'sim-rig': { kind: 'string', value: 'FILE', help: 'rig file (built-in open 10-inch rig otherwise)' },
    link: { kind: 'string', value: 'PATH', help: 'path of the device-side symlink to create (default /tmp/ductbench-sim)' },
    seed: { kind: 'int', value: 'N', help: 'noise seed', min: 0 },
  },
  notes: ['Needs socat. Prints the device path; then run: ductbench serve --port <that path>'],
};

const stdio = { stdout: (s: string) => void process.stdout.write(s), stderr: (s: string) => void process.stderr.write(s) };

const COMMANDS: Record<string, { spec?: CommandSpec; summary: string; run: (argv: string[]) => Promise<number> }> = {
  serve: { spec: SERVE, summary: SERVE.summary, run: (a) => withSpec(SERVE, a, serve) },
  ports: { spec: PORTS, summary: PORTS.summary, run: (a) => withSpec(PORTS, a, ports) },
  sim: { spec: SIM, summary: SIM.summary, run: (a) => withSpec(SIM, a, sim) },
  run: {
    summary: 'run a throttle-step sequence headless (virtual bench or hardware) and report the operating points',
    run: async (a) => {
      const { runMain } = await import('./cli/run.js');
      return runMain(a, stdio, {
        defaultDataDir: DEFAULT_DATA_DIR,
        // The prediction at each step (with its band, and the fit kept in the data folder) is the daemon's own.
        // The run is one session in the store: its context, its points, and its outcome as the runner saw it.
        record: ({ tags, plan, daemon }) => {
          const keeper = daemon.sessions;
          if (!keeper) return null;
          keeper.prepare({ title: plan.name, tags, sequence: plan, managed: true });
          return {
            onPoint: (p) => keeper.addPoint(p),
            finish: (r) => keeper.finish(r.outcome),
          };
        },
      });
    },
  },
  'check-device': {
    summary: 'check a board against wire protocol v1, naming the PROTOCOL.md section of every check (propeller off)',
    run: async (a) => (await import('./cli/check-device.js')).checkDeviceMain(a, stdio),
  },
  calibrate: {
    summary: 'calibrate the load cell, current, voltage and rpm channels, with a dated history',
    run: async (a) => (await import('./cli/calibrate.js')).calibrateMain(a, stdio),
  },
  sessions: {
    summary: 'list, show, export, import, tag, report and delete recorded sessions',
    run: async (a) => (await import('./cli/sessions.js')).sessionsMain(a, stdio),
  },
  parts: {
    summary: 'the parts library: list, show, add, edit (new revision), retire, import and export rig files',
    run: async (a) => (await import('./cli/parts.js')).partsMain(a, stdio),
  },
  compare: {
    summary: 'compare sessions against a baseline: power saving, thrust gain, net of duct mass, vehicle verdict',
    run: async (a) => (await import('./cli/compare.js')).compareMain(a, stdio),
  },
  predict: {
    summary: 'predict thrust and power for a rig or a what-if propeller and duct',
    run: async (a) => {
      const { predictMain } = await import('./cli/predict.js');
      return predictMain(a, {
        stdout: (s) => process.stdout.write(s),
        stderr: (s) => process.stderr.write(s),
        readFile: (p) => readFileSync(p, 'utf8'),
      });
    },
  },
};

function topHelp(): string {
  const w = Math.max(...Object.keys(COMMANDS).map((k) => k.length)) + 4;
  return [
    `ductbench ${VERSION}: bench companion for open and ducted propellers`,
    '',
    'usage: ductbench <command> [options]      (ductbench <command> --help for its options)',
    '',
    'commands:',
    ...Object.entries(COMMANDS).map(([k, c]) => `  ${k.padEnd(w)}${c.summary}`),
    '',
    'Safety: keep out of the rotor plane, wear eye protection, secure the stand and the propeller, supervise',
    'batteries in a fire-safe place. The software stop does not replace a hard-wired power cut.',
    '',
  ].join('\n');
}

async function withSpec(spec: CommandSpec, argv: string[], fn: (p: Parsed) => Promise<number>): Promise<number> {
  const p = parseArgs(spec, argv);
  if (p.help) {
    process.stdout.write(helpText(spec));
    return EXIT.ok;
  }
  return fn(p);
}

async function serve(p: Parsed): Promise<number> {
  const o = p.opts as Record<string, string | number | boolean | undefined>;
  if (o.port !== undefined && (o.sim || o['sim-rig'] !== undefined || o['sim-seed'] !== undefined)) throw new UsageError('--port and --sim exclude each other');
  if (o.baud !== undefined && o.port === undefined) throw new UsageError('--baud goes with --port');
  const source: DeviceSource =
    o.port !== undefined
      ? { kind: 'serial', path: String(o.port), ...(o.baud !== undefined ? { baud: Number(o.baud) } : {}) }
      : { kind: 'sim', ...(o['sim-rig'] !== undefined ? { rigFile: String(o['sim-rig']) } : {}), ...(o['sim-seed'] !== undefined ? { seed: Number(o['sim-seed']) } : {}) };
  const token = (o.token as string | undefined) ?? process.env.DUCTBENCH_TOKEN ?? undefined;
  const host = (o.host as string | undefined) ?? '127.0.0.1';
  if (host !== '127.0.0.1' && host !== 'localhost' && host !== '::1') {
    // The Host check accepts exactly these (and the loopback names): say which, so nobody guesses.
    const reachable = boundAddresses(host).filter((a) => a !== '127.0.0.1' && a !== '::1');
    process.stderr.write(
      `ductbench: WARNING: listening on ${host} (answering as ${reachable.length ? reachable.join(', ') : 'no address but loopback'}): anyone who can reach ${reachable.length === 1 ? 'this address' : 'these addresses'} and has the token can drive the bench\n`,
    );
  }
  // Until the device answers, keep the daemon's log to ourselves: a failed start is reported as one line.
  let early: string[] | null = [];
  const log = (line: string) => (early ? early.push(line) : process.stderr.write(line + '\n'));
  let rig: RigSpec | undefined;
  if (o.rig !== undefined) {
    try {
      rig = parseRig(JSON.parse(readFileSync(String(o.rig), 'utf8')));
    } catch (err) {
      throw new UsageError(`--rig ${String(o.rig)}: ${(err as Error).message}`);
    }
  }
  const num = (k: string) => (o[k] !== undefined ? Number(o[k]) : undefined);
  const atmosphere: AtmosphereInput = {
    ...(num('altitude') !== undefined ? { altitude_m: num('altitude') } : {}),
    ...(num('air-temp') !== undefined ? { temperature_C: num('air-temp') } : {}),
    ...(num('air-pressure') !== undefined ? { pressure_Pa: num('air-pressure') } : {}),
    ...(num('humidity') !== undefined ? { humidity_pct: num('humidity') } : {}),
    ...(num('density') !== undefined ? { density_kg_m3: num('density') } : {}),
  };
  try {
    resolveAtmosphere(atmosphere);
  } catch (err) {
    throw new UsageError((err as Error).message);
  }
  const daemon = await startDaemon({
    log,
    source,
    atmosphere,
    ...(rig ? { rig } : {}),
    host,
    httpPort: (o['http-port'] as number | undefined) ?? DEFAULT_HTTP_PORT,
    ...(token ? { token } : {}),
    dataDir: o['data-dir'] !== undefined ? String(o['data-dir']) : DEFAULT_DATA_DIR,
    // A board that resets when its port opens needs a couple of seconds before it can answer.
    link: { handshakeTimeoutMs: source.kind === 'serial' ? 4000 : 2000 },
  });
  let stopping = false;
  const shutdown = (sig: string) => {
    if (stopping) return;
    stopping = true;
    // Cut first, questions later: close() writes STOP before anything else is torn down.
    process.stderr.write(`ductbench: ${sig}: cutting throttle and stopping\n`);
    void daemon.close().then(() => process.exit(EXIT.ok));
  };
  process.on('SIGINT', () => shutdown('SIGINT'));
  process.on('SIGTERM', () => shutdown('SIGTERM'));
  // Anything that still escapes every handler: cut, record, close, exit 70 (server/util/last-resort.ts).
  installLastResort(daemon);
  // Fault injection for the tests of that policy only: once the motor runs, an exception thrown from a timer,
  // outside every handler.
  if (process.env.DUCTBENCH_INJECT_ESCAPE === 'running') {
    let armedFault = true;
    daemon.controller.on('bench', (b) => {
      if (!armedFault || b.state !== 'running') return;
      armedFault = false;
      setTimeout(() => {
        throw new Error('injected escape (DUCTBENCH_INJECT_ESCAPE)');
      }, 300);
    });
  }

  await daemon.firstConnect;
  if (!daemon.link.isReady) {
    const err = daemon.link.view().error;
    await daemon.close();
    process.stderr.write(`ductbench: ${err ? err.message : 'device did not connect'}\n`);
    return EXIT.failure;
  }
  for (const line of early) process.stderr.write(line + '\n');
  early = null;
  const id = daemon.link.identity;
  process.stdout.write(`ductbench ${VERSION}: bench on ${daemon.link.view().source}${id ? ` (${id.firmware} ${id.firmwareVersion})` : ''}\n`);
  process.stdout.write(`dashboard: ${daemon.url}\n`);
  process.stdout.write('Keep out of the rotor plane. The software stop does not replace a hard-wired power cut. Ctrl-C cuts the throttle and exits.\n');
  return new Promise<number>(() => {}); // runs until a signal
}

async function ports(p: Parsed): Promise<number> {
  const list = await listPorts();
  if (p.opts.json) {
    process.stdout.write(JSON.stringify(list, null, 2) + '\n');
    return EXIT.ok;
  }
  if (list.length === 0) {
    process.stdout.write('no serial ports found (is the board plugged in, and may this user open /dev/tty*?)\n');
    return EXIT.ok;
  }
  for (const port of list) {
    const extra = [port.manufacturer, port.serialNumber && `serial ${port.serialNumber}`, port.byId].filter(Boolean).join(', ');
    process.stdout.write(`${port.path}${extra ? `  (${extra})` : ''}\n`);
  }
  return EXIT.ok;
}

async function sim(p: Parsed): Promise<number> {
  const { simMain } = await import('./sim/index.js');
  await simMain({
    ...(p.opts['sim-rig'] !== undefined ? { rigFile: String(p.opts['sim-rig']) } : {}),
    ...(p.opts.link !== undefined ? { link: String(p.opts.link) } : {}),
    ...(p.opts.seed !== undefined ? { seed: Number(p.opts.seed) } : {}),
    ...(p.opts['reset-on-open'] !== undefined ? { resetOnOpenMs: Number(p.opts['reset-on-open']) } : {}),
  });
  return EXIT.ok;
}

export async function main(argv: string[]): Promise<number> {
  const [cmd, ...rest] = argv;
  if (cmd === undefined || cmd === '--help' || cmd === '-h' || cmd === 'help') {
    process.stdout.write(topHelp());
    return cmd === undefined ? EXIT.usage : EXIT.ok;
  }
  if (cmd === '--version') {
    process.stdout.write(VERSION + '\n');
    return EXIT.ok;
  }
  const c = COMMANDS[cmd];
  if (!c) {
    process.stderr.write(`ductbench: unknown command ${JSON.stringify(cmd)} (try ductbench --help)\n`);
    return EXIT.usage;
  }
  try {
    return await c.run(rest);
  } catch (err) {
    if (err instanceof UsageError) {
      process.stderr.write(`ductbench ${cmd}: ${err.message} (see ductbench ${cmd} --help)\n`);
      return EXIT.usage;
    }
    process.stderr.write(`ductbench ${cmd}: ${(err as Error).message}\n`);
    return EXIT.failure;
  }
}

// Run when executed directly (node dist/server/cli.js); bin/ductbench.js imports main() instead.
if (process.argv[1] !== undefined && import.meta.url === new URL(`file://${process.argv[1]}`).href) {
  main(process.argv.slice(2)).then(
    (code) => {
      process.exitCode = code;
      if (code !== EXIT.ok) process.exit(code);
    },
    (err: Error) => {
      process.stderr.write(`ductbench: ${err.message}\n`);
      process.exit(EXIT.failure);
    },
  );
}
