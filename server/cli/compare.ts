// `ductbench compare ID ID [ID...]`: the first session is the baseline; the others are compared with it on a
// common thrust grid (power saving, thrust gain, net thrust, ideal saving), optionally with a hover verdict
// for a vehicle and a printable HTML report.

import { compareSessions, type Comparison } from '../compare/compare.js';
import { renderComparisonReport } from '../compare/report.js';
import { validateVehicle, type VehicleSpec } from '../compare/vehicle.js';
import { DEFAULT_DATA_DIR, SessionStore } from '../store/store.js';
import { helpText, parseArgs, UsageError, type CommandSpec } from './args.js';
import { parseId, reportError, writeFileAtomic, type CliIo } from './sessions.js';

export const COMPARE: CommandSpec = {
  name: 'compare',
  summary: 'compare sessions against a baseline: power saving, thrust gain, net thrust after the duct mass',
  usage: 'ductbench compare BASELINE_ID ID [ID...] [--data-dir DIR] [--json] [--grid N] [--mass KG --motors N --battery-wh WH] [--report FILE.html]',
  options: {
    'data-dir': { kind: 'string', value: 'DIR', help: `folder of the session store (default ${DEFAULT_DATA_DIR})` },
    json: { kind: 'flag', help: 'print JSON' },
    grid: { kind: 'int', value: 'N', help: 'thrust grid points inside the common range (default 11)', min: 2, max: 200 },
    mass: { kind: 'number', value: 'KG', help: 'vehicle all-up mass without ducts, for the hover verdict', min: 0.001 },
    motors: { kind: 'int', value: 'N', help: 'number of motors of the vehicle', min: 1, max: 64 },
    'battery-wh': { kind: 'number', value: 'WH', help: 'usable battery energy', min: 0.001 },
    report: { kind: 'string', value: 'FILE', help: 'also write a self-contained HTML report' },
  },
  positionals: [2, 20],
  notes: [
    'Only the thrust range every compared session measured is used; nothing is extrapolated, and sessions that do not overlap are named in the notes.',
    'The ideal saving is momentum theory for the duct’s exit-area ratio sigma = (exit diameter / propeller diameter)^2: 1 - 1/sqrt(2 sigma) against an open rotor.',
  ],
};

const f = (x: number | null, d = 1, w = 8) => (x === null || !Number.isFinite(x) ? '—' : x.toFixed(d)).padStart(w);

export function comparisonText(c: Comparison): string {
  const out: string[] = [];
  const base = c.sessions[0];
  out.push(`baseline: session ${base.session} ${base.title ? `"${base.title}"` : ''}`.trimEnd());
  for (const s of c.sessions) {
    out.push(
      `  session ${String(s.session).padEnd(5)} ${s.ducted ? `ducted, sigma ${s.sigma.toFixed(3)}, duct ${(s.duct_mass_kg * 1000).toFixed(0)} g` : 'open'}; measured ${s.thrust_range_N ? `${s.thrust_range_N[0].toFixed(2)}–${s.thrust_range_N[1].toFixed(2)} N` : 'no usable curve'} (${s.points.length} points)${s.compared ? '' : ' — not compared'}`,
    );
  }
  out.push(c.common_range_N ? `common thrust range: ${c.common_range_N[0].toFixed(2)}–${c.common_range_N[1].toFixed(2)} N` : 'common thrust range: none');
  for (const id of [...new Set(c.rows.map((r) => r.session))]) {
    out.push('', `session ${id} against baseline ${c.baseline}:`);
    out.push('  thrust N   base W      W   saving %     ±   ideal %  effect.  gain %     ±  net N  net gain %');
    for (const r of c.rows.filter((x) => x.session === id)) {
      out.push(
        `  ${f(r.thrust_N, 2)} ${f(r.baseline_power_W)} ${f(r.power_W, 1, 6)} ${f(r.power_saving_pct, 1, 10)} ${f(r.power_saving_std_pct, 1, 5)} ${f(r.ideal_saving_pct, 1, 9)} ${f(r.duct_effectiveness, 2, 8)} ${f(r.thrust_gain_pct, 1, 7)} ${f(r.thrust_gain_std_pct, 1, 5)} ${f(r.net_thrust_N, 2, 6)} ${f(r.net_thrust_gain_pct, 1, 11)}`,
      );
    }
  }
  if (c.notes.length) out.push('', 'notes:', ...c.notes.map((n) => `  - ${n}`));
  if (c.verdict) out.push('', `hover verdict (${c.verdict.vehicle.mass_kg} kg, ${c.verdict.vehicle.motors} motors, ${c.verdict.vehicle.battery_wh} Wh):`, ...c.verdict.text.map((t) => `  ${t}`));
  return out.join('\n') + '\n';
}

/** Entry point for `ductbench compare`; argv is what follows "compare". */
export async function compareMain(argv: readonly string[], io: CliIo): Promise<number> {
  try {
    const p = parseArgs(COMPARE, argv);
    if (p.help) {
      io.stdout(helpText(COMPARE));
      return 0;
    }
    const o = p.opts as Record<string, string | number | boolean | undefined>;
    const ids = p.positionals.map(parseId);
    if (new Set(ids).size !== ids.length) throw new UsageError('a session is named twice');
    const given = ['mass', 'motors', 'battery-wh'].filter((k) => o[k] !== undefined);
    if (given.length > 0 && given.length < 3) throw new UsageError('the hover verdict needs all of --mass, --motors and --battery-wh');
    let vehicle: VehicleSpec | undefined;
    if (given.length === 3) {
      vehicle = { mass_kg: Number(o.mass), motors: Number(o.motors), battery_wh: Number(o['battery-wh']) };
      try {
        validateVehicle(vehicle);
      } catch (err) {
        throw new UsageError((err as Error).message);
      }
    }
    const store = SessionStore.openForReading((o['data-dir'] as string | undefined) ?? DEFAULT_DATA_DIR);
    let c: Comparison;
    try {
      const sessions = ids.map((id) => store.get(id));
      c = compareSessions(sessions, { ...(o.grid !== undefined ? { gridPoints: Number(o.grid) } : {}), ...(vehicle ? { vehicle } : {}) });
    } finally {
      store.close();
    }
    if (o.report !== undefined) {
      const html = renderComparisonReport(c);
      writeFileAtomic(String(o.report), (w) => w(html));
      io.stderr(`wrote ${o.report}\n`);
    }
    if (o.json) {
      // Measured points per session are in the report; the JSON carries the summary of each curve.
      const sessions = c.sessions.map(({ points, ...rest }) => ({ ...rest, point_count: points.length }));
      io.stdout(JSON.stringify({ ...c, sessions }, null, 2) + '\n');
    } else io.stdout(comparisonText(c));
    return 0;
  } catch (err) {
    return reportError('ductbench compare', err, io);
  }
}
