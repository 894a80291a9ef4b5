// Every figure the host enforces on a device, declared once. The link, the interlocks' defaults, the device
// checker and the "Host rules" table of PROTOCOL.md (doc.ts) all read them from here, so a firmware author
// reads the numbers the host really uses. Pure: no I/O, importable by the browser and the tests.

import { DEFAULT_HEARTBEAT_TIMEOUT_MS, HEARTBEAT_INTERVAL_MS, MESSAGES, type Channel } from './messages.js';

/** How long the host keeps offering HELLO after opening the port: covers a bootloader that waits after an auto-reset. */
export const HANDSHAKE_TIMEOUT_MS = 5000;
/** How often the host repeats HELLO (each with a fresh nonce) until an IDENT answers one of them. */
export const HELLO_RETRY_MS = 250;
/** How long the host waits for the ACK or NAK of an acknowledged command. */
export const ACK_TIMEOUT_MS = 1000;
/** After an ACK is lost, how long the host waits for the STAT that tells whether the command was carried out. */
export const RECONCILE_TIMEOUT_MS = 500;
/** The host sends this many heartbeats per announced time-out (at most every HEARTBEAT_INTERVAL_MS): margin for a busy host. */
export const HEARTBEATS_PER_TIMEOUT = 4;
/** Shortest heartbeat time-out the host accepts: below it a busy host could not keep a board alive. */
export const MIN_HEARTBEAT_TIMEOUT_MS = 60;
/** Longest heartbeat time-out the host accepts: a board that keeps a motor turning longer after the host dies is refused. */
export const MAX_HEARTBEAT_TIMEOUT_MS = DEFAULT_HEARTBEAT_TIMEOUT_MS;
/** Longest gap between two STAT lines a device may leave (STAT is also sent on every change). */
export const STAT_MAX_INTERVAL_MS = 200;
/** Telemetry is stale after this many periods of the fastest declared channel (and never sooner than the stale_ms limit). */
export const STALE_PERIODS = 3;
/** Default of the stale_ms limit: no TEL frame for this long while the motor may turn trips. */
export const DEFAULT_STALE_MS = 250;
/** Default of the thrust_stale_ms limit: no thrust sample for this long (or STALE_PERIODS thrust periods, if longer) trips. */
export const DEFAULT_THRUST_STALE_MS = 500;
/** Default of the bad_line_burst limit: more bad lines than this within one second trips while the motor may turn. */
export const DEFAULT_BAD_LINE_BURST = 20;
/** Bits a byte takes on the line: 8 data bits, 1 start and 1 stop bit (8N1). */
export const LINE_BITS_PER_BYTE = 10;
/** The usual baud rate, assumed when the port does not say (a pseudo-terminal, for example). */
export const DEFAULT_BAUD = 115200;

/** Heartbeat period for a device announcing `timeoutMs`: HEARTBEATS_PER_TIMEOUT chances inside it, never slower than HEARTBEAT_INTERVAL_MS. */
export function heartbeatIntervalFor(timeoutMs: number): number {
  return Math.max(5, Math.min(HEARTBEAT_INTERVAL_MS, Math.floor(timeoutMs / HEARTBEATS_PER_TIMEOUT)));
}

/** Why the host refuses an announced heartbeat time-out, or null when it is acceptable. */
export function heartbeatTimeoutProblem(timeoutMs: number): string | null {
  if (timeoutMs > MAX_HEARTBEAT_TIMEOUT_MS) return `device announces a heartbeat time-out of ${timeoutMs} ms; ductbench requires at most ${MAX_HEARTBEAT_TIMEOUT_MS} ms`;
  if (timeoutMs < MIN_HEARTBEAT_TIMEOUT_MS) return `device announces a heartbeat time-out of ${timeoutMs} ms; ductbench needs at least ${MIN_HEARTBEAT_TIMEOUT_MS} ms to keep it alive from a busy host`;
  return null;
}

/** Frame and thrust staleness for the declared rates (channel name to samples per second) and the configured floors. */
export function staleLimitsFor(rates: Readonly<Record<string, number>>, floors: { stale_ms: number; thrust_stale_ms: number }): { frameMs: number; thrustMs: number } {
  const positive = Object.values(rates).filter((r) => r > 0);
  const fastest = positive.length ? Math.max(...positive) : 0;
  const frameMs = fastest > 0 ? Math.max(floors.stale_ms, (STALE_PERIODS * 1000) / fastest) : floors.stale_ms;
  const thrust = rates.thrust ?? 0;
  const thrustMs = thrust > 0 ? Math.max(floors.thrust_stale_ms, (STALE_PERIODS * 1000) / thrust) : floors.thrust_stale_ms;
  return { frameMs: Math.ceil(frameMs), thrustMs: Math.ceil(thrustMs) };
}

// ---------------------------------------------------------------- the line's byte budget

const TEL_KEY: Readonly<Record<Channel, string>> = { thrust: 'thrust', voltage: 'v', current: 'i', rpm: 'rpm', temp: 'temp', torque: 'torque' };

function widestNumber(min: number, max: number, decimals: number): number {
  const int = (x: number) => String(Math.trunc(Math.abs(x))).length + (x < 0 ? 1 : 0);
  return Math.max(int(min), int(max)) + (decimals > 0 ? decimals + 1 : 0);
}

/** Longest " key=value" a TEL field can take, from its declared range and decimals. */
function telFieldBytes(key: string): number {
  const f = MESSAGES.TEL.fields.find((x) => x.key === key);
  if (!f) return 0;
  const spec = f as { min?: number; max?: number; decimals?: number; kind: string };
  const width = spec.kind === 'uint' ? String(spec.max ?? 0).length : widestNumber(spec.min ?? 0, spec.max ?? 0, spec.decimals ?? 0);
  return 1 + key.length + 1 + width;
}

/** "TEL 65535 t=4294967295 out=1.000*FFFF\n": what every frame carries whatever channels it holds. */
const TEL_FRAME_BYTES = 'TEL'.length + 1 + 5 + telFieldBytes('t') + telFieldBytes('out') + 5 + 1;
/** The longest STAT line ("STAT 65535 armed=0 out=1.000 fault=overcurrent hbok=0*FFFF\n"). */
const STAT_LINE_BYTES = 'STAT 65535 armed=0 out=1.000 fault=overcurrent hbok=0*FFFF\n'.length;

export interface LineBudget {
  /** Worst-case bytes a second the declared channels need: a TEL frame at the fastest rate, each channel's field at its own, STAT at its longest interval. */
  bytesPerSecond: number;
  /** What the line carries at the baud rate (LINE_BITS_PER_BYTE bits a byte). */
  capacityPerSecond: number;
  /** bytesPerSecond / capacityPerSecond. */
  utilisation: number;
  fits: boolean;
}

/** The worst-case telemetry byte rate of declared channel rates against the line's capacity at `baud`. */
export function lineBudget(rates: Readonly<Record<string, number>>, baud: number): LineBudget {
  let fastest = 0;
  let fields = 0;
  for (const [name, hz] of Object.entries(rates)) {
    if (!(hz > 0)) continue;
    fastest = Math.max(fastest, hz);
    const key = TEL_KEY[name as Channel];
    if (key) fields += hz * telFieldBytes(key);
  }
  const bytesPerSecond = Math.ceil(fastest * TEL_FRAME_BYTES + fields + (1000 / STAT_MAX_INTERVAL_MS) * STAT_LINE_BYTES);
  const capacityPerSecond = Math.floor(baud / LINE_BITS_PER_BYTE);
  const utilisation = bytesPerSecond / capacityPerSecond;
  return { bytesPerSecond, capacityPerSecond, utilisation, fits: utilisation <= 1 };
}

/** The channel rates of an IDENT caps list ("thrust@80" -> { thrust: 80 }); an unreadable rate counts as 0. */
export function ratesFromCaps(caps: readonly string[]): Record<string, number> {
  const out: Record<string, number> = {};
  for (const item of caps) {
    const at = item.indexOf('@');
    const name = at < 0 ? item : item.slice(0, at);
    const r = at < 0 ? NaN : Number(item.slice(at + 1));
    if (name) out[name] = Number.isFinite(r) && r > 0 ? r : 0;
  }
  return out;
}

/** The rows of PROTOCOL.md's "Host rules" table: name, value, what the host does with it. */
export const HOST_RULES: ReadonlyArray<readonly [name: string, value: number, meaning: string]> = [
  ['HANDSHAKE_TIMEOUT_MS', HANDSHAKE_TIMEOUT_MS, 'The host keeps offering HELLO this long after opening the port (a bootloader after an auto-reset must be done by then), then reports a handshake time-out.'],
  ['HELLO_RETRY_MS', HELLO_RETRY_MS, 'HELLO is repeated this often, each time with a fresh nonce, until an IDENT echoes one of them.'],
  ['ACK_TIMEOUT_MS', ACK_TIMEOUT_MS, 'An acknowledged command without ACK or NAK within this long is reported as "no acknowledgement".'],
  ['RECONCILE_TIMEOUT_MS', RECONCILE_TIMEOUT_MS, 'After a THR got no acknowledgement, the host asks STATUS and waits this long for the STAT that tells whether the board carried it out.'],
  ['HEARTBEAT_INTERVAL_MS', HEARTBEAT_INTERVAL_MS, 'The host never sends HB less often than this.'],
  ['HEARTBEATS_PER_TIMEOUT', HEARTBEATS_PER_TIMEOUT, 'The host sends HB every floor(hb / this) ms (at most HEARTBEAT_INTERVAL_MS), so hb=100 gets one every 25 ms.'],
  ['MIN_HEARTBEAT_TIMEOUT_MS', MIN_HEARTBEAT_TIMEOUT_MS, 'A device announcing a shorter IDENT hb is refused.'],
  ['MAX_HEARTBEAT_TIMEOUT_MS', MAX_HEARTBEAT_TIMEOUT_MS, 'A device announcing a longer IDENT hb is refused.'],
  ['STAT_MAX_INTERVAL_MS', STAT_MAX_INTERVAL_MS, 'Longest gap a device may leave between two STAT lines.'],
  ['STALE_PERIODS', STALE_PERIODS, 'While the motor may turn, no TEL for this many periods of the fastest declared channel trips (never sooner than stale_ms); no thrust sample for this many thrust periods trips (never sooner than thrust_stale_ms).'],
  ['DEFAULT_STALE_MS', DEFAULT_STALE_MS, 'Default of the rig limit stale_ms.'],
  ['DEFAULT_THRUST_STALE_MS', DEFAULT_THRUST_STALE_MS, 'Default of the rig limit thrust_stale_ms.'],
  ['DEFAULT_BAD_LINE_BURST', DEFAULT_BAD_LINE_BURST, 'Default of the rig limit bad_line_burst: more bad lines than this within one second trips while the motor may turn, and warns otherwise.'],
  ['LINE_BITS_PER_BYTE', LINE_BITS_PER_BYTE, 'Bits a byte takes on the line (8N1), for the byte budget of the declared rates.'],
  ['DEFAULT_BAUD', DEFAULT_BAUD, 'Baud rate the host opens a port at unless told otherwise, and assumes for a pseudo-terminal.'],
];
