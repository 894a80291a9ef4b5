// `ductbench check-device --port PATH`: the device checker for firmware authors (server/checker/). Prints one
// line per check with the PROTOCOL.md section it holds the board to, or one JSON object with --json.
// Exit status 0 when every check passed, 1 when one failed or the port could not be used, 2 for bad usage.

import { DEFAULT_BAUD } from '../../firmware-protocol/src/host-rules.js';
import { SerialTransport } from '../link/serial-transport.js';
import { checkDevice, formatReport, HEARTBEAT_CUT_TOLERANCE_MS } from '../checker/check-device.js';
import { helpText, parseArgs, UsageError, type CommandSpec } from './args.js';

export interface CheckIo {
  stdout: (s: string) => void;
  stderr: (s: string) => void;
}

export const CHECK_SPEC: CommandSpec = {
  name: 'check-device',
  summary: 'check a board against wire protocol v1 (propeller off): handshake, heartbeat, refusals, ceiling, STOP, rates, numbers',
  usage: 'ductbench check-device --port PATH [--baud N] [--spin F] [--json]',
  options: {
    port: { kind: 'string', value: 'PATH', help: 'serial port of the board, e.g. /dev/ttyACM0 (or a pseudo-terminal)' },
    baud: { kind: 'int', value: 'N', help: `serial baud rate (default ${DEFAULT_BAUD}); the declared rates are judged against it`, min: 1200, max: 4_000_000 },
    spin: { kind: 'number', value: 'F', help: 'small throttle used to check that STOP and heartbeat loss cut a running output (default 0.05; 0 never spins)', min: 0, max: 0.2 },
    json: { kind: 'flag', help: 'print the report as one JSON object' },
  },
  notes: [
    'REMOVE THE PROPELLER first: the check arms the board and, unless --spin 0, runs the motor at a small throttle.',
    `The board is opened twice (the second time to see what a reset on open does). A heartbeat cut later than the announced time-out plus ${HEARTBEAT_CUT_TOLERANCE_MS} ms fails.`,
    'Exit status: 0 every check passed; 1 a check failed or the port could not be used; 2 bad usage.',
  ],
};

export async function checkDeviceMain(argv: string[], io: CheckIo): Promise<number> {
  let p;
  try {
    p = parseArgs(CHECK_SPEC, argv);
  } catch (err) {
    if (err instanceof UsageError) {
      io.stderr(`ductbench check-device: ${err.message} (see ductbench check-device --help)\n`);
      return 2;
    }
    throw err;
  }
  if (p.help) {
    io.stdout(helpText(CHECK_SPEC));
    return 0;
  }
  const o = p.opts as Record<string, string | number | boolean | undefined>;
  if (o.port === undefined) {
    io.stderr('ductbench check-device: --port PATH is required (see ductbench check-device --help)\n');
    return 2;
  }
  const path = String(o.port);
  const baud = o.baud === undefined ? DEFAULT_BAUD : Number(o.baud);
  io.stderr('ductbench check-device: the propeller must be off: this arms the board and may turn the motor slowly\n');
  const report = await checkDevice({
    transport: () => new SerialTransport(path, baud),
    baud,
    ...(o.spin !== undefined ? { spinThrottle: Number(o.spin) } : {}),
    progress: (line) => io.stderr(`  ${line}\n`),
  });
  io.stdout(o.json ? JSON.stringify(report) + '\n' : formatReport(report));
  return report.pass ? 0 : 1;
}
