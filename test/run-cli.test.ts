// `ductbench run` through runMain in process (the compiled CLI reaches it once server/cli.ts dispatches
// `run`): usage errors, the hardware acknowledgement, refusal before arming, the --json shape and exit codes
// for completed, interrupted (an injected fault), tripped and a signal mid-run.

import { describe, expect, it } from 'vitest';
import type { RunningDaemon } from '../server/daemon.js';
import { runMain, type RunHooks } from '../server/cli/run.js';
import type { SequenceRunner } from '../server/sequence/index.js';

/** Prediction deviation widened: see test/sequence-runner.test.ts. */
const QUIET_DAEMON = { limits: { deviation_warn_pct: 500, deviation_trip_pct: 1000 }, log: () => {} };

async function run(argv: string[], hooks: RunHooks = {}, files: Record<string, string> = {}) {
  let stdout = '';
  let stderr = '';
  const code = await runMain(
    argv,
    { stdout: (s) => (stdout += s), stderr: (s) => (stderr += s) },
    {
      readFile: (p) => {
        if (p in files) return files[p];
        throw new Error(`ENOENT: no such file ${p}`);
      },
      signals: () => () => {},
      ...hooks,
      daemon: { ...QUIET_DAEMON, ...hooks.daemon },
    },
  );
  return { code, stdout, stderr };
}

const QUICK = ['--staircase', '0.2,0.4,0.1', '--hold', '1.5', '--ramp', '0.3', '--window', '0.5', '--sim', '--sim-seed', '5'];

describe('ductbench run: usage', () => {
  it('prints help', async () => {
    const r = await run(['--help']);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/^ductbench run: /);
    expect(r.stdout).toContain('--yes-i-have-checked');
  });

  it.each([
    [[], /give either --sequence FILE or --staircase/],
    [['--sequence', 'a.json', '--staircase', '0.1,0.2,0.1', '--hold', '2'], /give either/],
    [['--staircase', '0.1,0.2,0.1'], /--staircase needs --hold/],
    [['--sequence', 'a.json', '--hold', '2'], /--hold goes with --staircase/],
    [['--staircase', '0.1,0.2', '--hold', '2'], /START,STOP,STEP/],
    [['--staircase', '0.1,x,0.1', '--hold', '2'], /"x" is not a number/],
    [['--staircase', '0.1,0.2,0.1', '--hold', '2', '--port', '/dev/null', '--sim'], /exclude each other/],
    [['--staircase', '0.1,0.2,0.1', '--hold', '2', '--sim-fault', 'gremlins'], /unknown kind "gremlins"/],
    [['--staircase', '0.1,0.2,0.1', '--hold', '2', '--speed', '3'], /unknown option --speed/],
  ])('%j is bad usage (exit 2)', async (argv, msg) => {
    const r = await run(argv as string[]);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(msg);
    expect(r.stdout).toBe('');
  });

  it('real hardware needs the acknowledgement: cautions on stderr, nothing opened', async () => {
    const r = await run(['--staircase', '0.1,0.2,0.1', '--hold', '2', '--port', '/dev/ductbench-no-such-port']);
    expect(r.code).toBe(2);
    expect(r.stderr).toContain('keep everyone out of the plane of rotation');
    expect(r.stderr).toContain('run again with --yes-i-have-checked');
    expect(r.stderr).not.toMatch(/no-such-port.*(cannot|fail|open)/i);
  });

  it('a sequence file with errors is refused with field paths (exit 2)', async () => {
    const r = await run(['--sequence', 'bad.json', '--sim'], {}, { 'bad.json': JSON.stringify({ name: 'bad', steps: [{ throttle: 0.2, hold: 1 }, { throttle: 2 }] }) });
    expect(r.code).toBe(2);
    expect(r.stderr).toContain('steps[0].hold: unknown key');
    expect(r.stderr).toContain('steps[1].throttle: 2 is outside 0..1');
    expect(r.stdout).toBe('');
  });

  it('a missing or malformed file is exit 2 with the reason', async () => {
    expect((await run(['--sequence', 'missing.json'])).stderr).toMatch(/cannot read sequence file missing.json/);
    const r = await run(['--sequence', 's.json', '--rig', 'rig.json'], {}, { 's.json': '{"name":"s","steps":[{"throttle":0.2}]}', 'rig.json': '{"name": "r"}' });
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/rig file rig.json: propeller: is required/);
  });
});

describe('ductbench run: on the virtual bench', () => {
  it('refuses a staircase above the device ceiling before arming (exit 2, nothing armed)', async () => {
    let daemon: RunningDaemon | null = null;
    const r = await run(['--staircase', '0.5,0.95,0.15', '--hold', '2', '--sim'], { onRunner: (_r, d) => (daemon = d) });
    expect(r.code).toBe(2);
    expect(r.stderr).toContain("steps[0].staircase.stop: 0.95 is above the device's ceiling 0.9 (refused, never clamped)");
    expect(r.stderr).toContain('refused before arming');
    expect(r.stdout).toBe('');
    expect(daemon).not.toBeNull();
    expect(daemon!.sim!.transitions.some((t) => t.to === 'armed')).toBe(false);
  });

  it('with --json a refusal is a JSON object on stdout too, with every reason given on stderr', async () => {
    const r = await run(['--staircase', '0.5,0.95,0.15', '--hold', '2', '--sim', '--json']);
    expect(r.code, r.stderr).toBe(2);
    const out = JSON.parse(r.stdout) as { outcome: string; reason: string; messages: string[]; points: unknown[] };
    expect(out.outcome).toBe('refused');
    expect(out.reason).toBe('refused before arming: nothing was sent to the motor');
    expect(out.messages.some((m) => m.includes("0.95 is above the device's ceiling 0.9"))).toBe(true);
    expect(out.points).toEqual([]);
    const usage = await run(['--staircase', '0.5,0.9,0.1', '--json']);
    expect(usage.code).toBe(2);
    expect((JSON.parse(usage.stdout) as { outcome: string; reason: string }).reason).toMatch(/--staircase needs --hold/);
  });

  it('--json on a completed run: the documented shape, exit 0', async () => {
    const recorded: { points: number; transitions: number; finished: string | null; tags: string[] } = { points: 0, transitions: 0, finished: null, tags: [] };
    const r = await run([...QUICK, '--json', '--tag', 'baseline', '--tag', 'quorrel'], {
      record: (ctx) => {
        recorded.tags = ctx.tags;
        return { onPoint: () => recorded.points++, onTransition: () => recorded.transitions++, finish: (res) => void (recorded.finished = res.outcome) };
      },
    });
    expect(r.code).toBe(0);
    const out = JSON.parse(r.stdout) as Record<string, unknown> & { points: Record<string, any>[] };
    expect(out.outcome).toBe('completed');
    expect(out.trip).toBeNull();
    expect(out.points).toHaveLength(3);
    expect(out.points.map((p) => p.throttle)).toEqual([0.2, 0.3, 0.4]);
    const thrust = out.points.map((p) => p.channels.thrust.mean as number);
    expect(thrust[1]).toBeGreaterThan(thrust[0]);
    expect(thrust[2]).toBeGreaterThan(thrust[1]);
    for (const p of out.points) {
      expect(p).toHaveProperty('settled');
      expect(p.grams_per_watt).toBeGreaterThan(0);
      // the virtual bench's own rig gives the propeller diameter
      expect(p.figure_of_merit).toBeGreaterThan(0);
      expect(p.figure_of_merit).toBeLessThan(1);
    }
    expect(out.tags).toEqual(['baseline', 'quorrel']);
    expect(recorded).toEqual({ points: 3, transitions: (out.transitions as unknown[]).length, finished: 'completed', tags: ['baseline', 'quorrel'] });
    expect(out.sequence).toEqual({ name: 'staircase 0.2 to 0.4 by 0.1', steps: 3 });
    expect((out.device as { firmware: string }).firmware).toBe('vbench');
    // progress on stderr, nothing but the JSON on stdout
    expect(r.stderr).toMatch(/\[step 1 of 3\] ramping/);
    expect(r.stderr).toMatch(/about \d+ s left/);
    expect(r.stdout.trim().split('\n')).toHaveLength(1);
  });

  it('without --json prints a table of the points', async () => {
    const r = await run(['--sequence', 'q.json', '--sim'], {}, { 'q.json': JSON.stringify({ name: 'one', steps: [{ throttle: 0.25, ramp_s: 0.3, hold_s: 1, window_s: 0.5 }] }) });
    expect(r.code).toBe(0);
    expect(r.stdout.split('\n')[0]).toMatch(/step\s+throttle\s+thrust_N/);
    expect(r.stdout).toContain('outcome: completed');
  });

  it('--sim-fault unplug mid-run: interrupted, exit 1', async () => {
    const r = await run([...QUICK, '--json', '--sim-fault', 'unplug@1.2']);
    expect(r.code).toBe(1);
    const out = JSON.parse(r.stdout) as { outcome: string; points: unknown[]; faults: unknown[] };
    expect(out.outcome).toBe('interrupted');
    expect(out.points.length).toBeLessThan(3);
    expect(out.faults).toEqual([{ kind: 'unplug', at_s: 1.2 }]);
  });

  it('a host interlock trip: tripped with rule, value, limit and cut latency, exit 1', async () => {
    const r = await run([...QUICK, '--json'], { daemon: { ...QUIET_DAEMON, limits: { ...QUIET_DAEMON.limits, max_current_a: 1 } } });
    expect(r.code).toBe(1);
    const out = JSON.parse(r.stdout) as { outcome: string; trip: { rule: string; value: number; limit: number; cut_latency_ms: number } };
    expect(out.outcome).toBe('tripped');
    expect(out.trip.rule).toBe('max_current');
    expect(out.trip.limit).toBe(1);
    expect(out.trip.value).toBeGreaterThan(1);
    expect(typeof out.trip.cut_latency_ms).toBe('number');
  });

  it('SIGINT mid-run cuts first: aborted, output zero before the daemon closes, exit 1', async () => {
    let fire: ((sig: string) => void) | null = null;
    let daemon: RunningDaemon | null = null;
    const written: string[] = [];
    let atFinish: { output: number; fault: string; armed: boolean } | null = null;
    const r = await run([...QUICK, '--json'], {
      signals: (fn) => {
        fire = fn;
        return () => (fire = null);
      },
      onRunner: (runner: SequenceRunner, d) => {
        daemon = d;
        runner.once('point', () => {
          d.link.on('written', ({ tag }) => written.push(tag));
          fire!('SIGINT');
        });
      },
      // finish() is awaited before the daemon closes (and writes its own STOP): what the device shows here
      // is the runner's doing.
      record: () => ({
        finish: async () => {
          const sim = daemon!.sim!;
          const t0 = Date.now();
          while ((sim.state.output !== 0 || sim.state.fault !== 'estop') && Date.now() - t0 < 3000) await new Promise((res) => setTimeout(res, 10));
          atFinish = { output: sim.state.output, fault: sim.state.fault, armed: sim.state.armed };
        },
      }),
    });
    expect(r.code).toBe(1);
    const out = JSON.parse(r.stdout) as { outcome: string; reason: string; points: unknown[] };
    expect(out.outcome).toBe('aborted');
    expect(out.reason).toMatch(/emergency cut by SIGINT/);
    expect(out.points).toHaveLength(1);
    expect(r.stderr).toContain('SIGINT: cutting the throttle');
    expect(atFinish).toEqual({ output: 0, fault: 'estop', armed: false });
    // the runner's STOP; the closing daemon finds the bench cut and latched, so it only ends the session with
    // BYE (the latch stays for the next host to see); no throttle command after the cut
    expect(written.filter((t) => t === 'STOP')).toHaveLength(1);
    expect(written[0]).toBe('STOP');
    expect(written.indexOf('BYE')).toBeGreaterThan(0);
    expect(written).not.toContain('THR');
  });
});
