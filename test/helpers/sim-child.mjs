// The virtual bench behind a pseudo-terminal in a process of its own, driven over stdin/stdout by
// test/helpers/sim-process.ts: one JSON request per stdin line, one JSON answer per stdout line. Lets a test
// block or kill the daemon's process while the "microcontroller" keeps its own clock, as a real board does.
// Needs the compiled server (dist/); the tests that use it say so.

import { createInterface } from 'node:readline';

const { runSimOnPty, DEFAULT_OPEN_RIG } = await import(new URL('../../dist/server/sim/index.js', import.meta.url).href);

const args = JSON.parse(process.argv[2] ?? '{}');
// rigSim: virtual-bench constants over the default rig's (e.g. heartbeat_timeout_ms); resetOnOpenMs: a board
// with auto-reset; bugs: firmware bug switches (server/sim/firmware.ts), for the device checker's broken boards.
const rig = args.rigSim ? { ...DEFAULT_OPEN_RIG, sim: { ...(DEFAULT_OPEN_RIG.sim ?? {}), ...args.rigSim } } : undefined;
const sim = await runSimOnPty({
  ...(args.link ? { link: args.link } : {}),
  ...(args.seed !== undefined ? { seed: args.seed } : {}),
  ...(rig ? { rig } : {}),
  ...(args.resetOnOpenMs !== undefined ? { resetOnOpen: { bootMs: args.resetOnOpenMs } } : {}),
});
for (const bug of args.bugs ?? []) {
  if (!(bug in sim.bench.firmwareBugs)) throw new Error(`unknown firmware bug ${bug}`);
  sim.bench.firmwareBugs[bug] = true;
}
const say = (obj) => process.stdout.write(JSON.stringify(obj) + '\n');
say({ type: 'ready', devicePath: sim.devicePath });

let closing = false;
async function shutdown() {
  if (closing) return;
  closing = true;
  await sim.close();
  process.exit(0);
}
process.on('SIGTERM', shutdown);
process.on('SIGINT', shutdown);

createInterface({ input: process.stdin }).on('line', (line) => {
  let req;
  try {
    req = JSON.parse(line);
  } catch {
    say({ type: 'error', error: `not JSON: ${line.slice(0, 80)}` });
    return;
  }
  try {
    switch (req.op) {
      case 'state':
        say({ id: req.id, state: sim.bench.state, droppedBytes: sim.droppedBytes });
        break;
      case 'transitions':
        say({ id: req.id, transitions: sim.bench.transitions });
        break;
      case 'heartbeats':
        say({ id: req.id, heartbeats: sim.bench.heartbeatWindow(Boolean(req.reset)) });
        break;
      case 'inject':
        sim.bench.injectFault(req.kind, req.options ?? {});
        say({ id: req.id, ok: true });
        break;
      case 'close':
        say({ id: req.id, ok: true });
        void shutdown();
        break;
      default:
        say({ id: req.id, error: `unknown op ${req.op}` });
    }
  } catch (err) {
    say({ id: req.id, error: String(err && err.message ? err.message : err) });
  }
});
// The parent went away without saying so: do not linger as an orphan holding a pty.
process.stdin.on('end', () => void shutdown());
