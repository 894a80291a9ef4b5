// `ductbench predict`: the performance model from the command line. Either a rig file (full prediction:
// electrical power, current, rpm, throttle, grams per watt) or what-if flags (ideal momentum-theory power of a
// rotor of some diameter, open or in a duct of some sigma). Files are read only through io.readFile so the
// command runs the same under test as in a terminal.

import { airFromDensity, isaAir, SEA_LEVEL_AIR, type AirState } from '../model/atmosphere.js';
import { modelVersion } from '../model/constants.js';
import {
  buildRigModel,
  defaultSupplyVoltage,
  idealReference,
  PACK_CELL_VOLTAGE,
  predictAtThrusts,
  predictCurve,
  type PredictedPoint,
  type IdealReference,
} from '../model/predict.js';
import { parseRig, RigError, SIGMA_MIN, SIGMA_MAX } from '../model/rig.js';

export interface PredictIo {
  stdout: (s: string) => void;
  stderr: (s: string) => void;
  readFile: (p: string) => string;
}

const USAGE = `usage: ductbench predict (--rig FILE | --prop-diameter METRES [--expansion-ratio SIGMA])
                        [--altitude METRES | --density KG_PER_M3] [--supply-v VOLTS]
                        [--thrust N[,N...] | --throttle F[,F...]] [--json]

  --rig FILE              rig description (JSON); gives the full prediction
  --prop-diameter METRES  what-if: rotor diameter, ideal power only
  --expansion-ratio SIGMA what-if: duct exit area / rotor disk area (${SIGMA_MIN}..${SIGMA_MAX}); omit for open
  --altitude METRES       ISA troposphere air (default sea level)
  --density KG_PER_M3     air density instead of an altitude
  --supply-v VOLTS        supply voltage at rest (needs --rig); it sags under load through the rig's
                          internal resistance. Default: the rig's bench-supply voltage, or its pack at
                          ${PACK_CELL_VOLTAGE} V a cell (charged, about 90 % state of charge)
  --thrust N[,N...]       thrusts in newtons to predict at
  --throttle F[,F...]     throttle fractions 0..1 (needs --rig); default 0.1, 0.2, ... 1.0
  --json                  machine-readable output
  --help                  this text
`;

class UsageError extends Error {}

const FLAGS_WITH_VALUE = ['--rig', '--prop-diameter', '--expansion-ratio', '--altitude', '--density', '--supply-v', '--thrust', '--throttle'] as const;
type ValueFlag = (typeof FLAGS_WITH_VALUE)[number];

interface Parsed {
  values: Partial<Record<ValueFlag, string>>;
  json: boolean;
  help: boolean;
}

function parseArgs(argv: string[]): Parsed {
  const args = argv[0] === 'predict' ? argv.slice(1) : argv;
  const out: Parsed = { values: {}, json: false, help: false };
  for (let i = 0; i < args.length; i++) {
    const a = args[i];
    if (a === '--json') out.json = true;
    else if (a === '--help' || a === '-h') out.help = true;
    else {
      const eq = a.indexOf('=');
      const name = eq > 0 ? a.slice(0, eq) : a;
      if (!(FLAGS_WITH_VALUE as readonly string[]).includes(name)) {
        throw new UsageError(`${a}: unknown option (see --help)`);
      }
      const flag = name as ValueFlag;
      let value: string | undefined;
      if (eq > 0) value = a.slice(eq + 1);
      else {
        value = args[i + 1];
        i++;
      }
      if (value === undefined || value === '') throw new UsageError(`${flag}: needs a value`);
      if (out.values[flag] !== undefined) throw new UsageError(`${flag}: given more than once`);
      out.values[flag] = value;
    }
  }
  return out;
}

function number(flag: string, text: string, rule: string, ok: (x: number) => boolean): number {
  const x = Number(text);
  if (text.trim() === '' || !Number.isFinite(x) || !ok(x)) throw new UsageError(`${flag}: ${rule} (got '${text}')`);
  return x;
}

function list(flag: string, text: string, rule: string, ok: (x: number) => boolean): number[] {
  const parts = text.split(',');
  if (parts.length > 1000) throw new UsageError(`${flag}: at most 1000 values`);
  return parts.map((p) => number(flag, p, rule, ok));
}

interface OutPoint {
  thrust_N: number;
  ideal_power_open_W: number;
  ideal_power_ducted_W: number | null;
  ideal_grams_per_watt_open: number;
  ideal_grams_per_watt_ducted: number | null;
  power_electrical_W?: number | null;
  current_A?: number | null;
  rpm?: number | null;
  throttle?: number | null;
  grams_per_watt?: number | null;
  voltage_V?: number | null;
  /** Thrust on the rotor blades and on the duct (its inlet lip), N; lip null for an open rig. */
  rotor_thrust_N?: number | null;
  lip_thrust_N?: number | null;
  power_shaft_W?: number | null;
  reachable?: boolean;
}

function idealPart(ref: IdealReference): OutPoint {
  return {
    thrust_N: ref.thrust_N,
    ideal_power_open_W: ref.idealPowerOpen_W,
    ideal_power_ducted_W: ref.idealPowerDucted_W,
    ideal_grams_per_watt_open: ref.idealGramsPerWattOpen,
    ideal_grams_per_watt_ducted: ref.idealGramsPerWattDucted,
  };
}

function fullPart(ref: IdealReference, p: PredictedPoint | null): OutPoint {
  return {
    ...idealPart(ref),
    power_electrical_W: p ? p.powerElectrical_W : null,
    current_A: p ? p.current_A : null,
    rpm: p ? p.rpm : null,
    throttle: p ? p.throttle : null,
    grams_per_watt: p ? p.gramsPerWatt : null,
    voltage_V: p ? p.busVoltage_V : null,
    rotor_thrust_N: p ? p.rotorThrust_N : null,
    lip_thrust_N: p ? p.lipThrust_N : null,
    power_shaft_W: p ? p.powerShaft_W : null,
    reachable: p !== null,
  };
}

function fmt(x: number | null | undefined, digits: number): string {
  if (x === null || x === undefined) return '-';
  if (!Number.isFinite(x)) return 'inf';
  return x.toFixed(digits);
}

function table(title: string, density: number, points: OutPoint[], full: boolean, supply: string | null): string {
  const head = full
    ? ['thrust N', 'lip N', 'ideal open W', 'ideal duct W', 'elec W', 'bus V', 'current A', 'rpm', 'throttle', 'g/W', 'ideal g/W']
    : ['thrust N', 'ideal open W', 'ideal duct W', 'ideal open g/W', 'ideal duct g/W'];
  const rows = points.map((p) =>
    full
      ? [
          fmt(p.thrust_N, 2),
          fmt(p.lip_thrust_N, 2),
          fmt(p.ideal_power_open_W, 2),
          fmt(p.ideal_power_ducted_W, 2),
          p.reachable ? fmt(p.power_electrical_W, 1) : 'out of reach',
          fmt(p.voltage_V, 2),
          fmt(p.current_A, 2),
          fmt(p.rpm, 0),
          fmt(p.throttle, 3),
          fmt(p.grams_per_watt, 2),
          fmt(p.ideal_grams_per_watt_ducted ?? p.ideal_grams_per_watt_open, 2),
        ]
      : [
          fmt(p.thrust_N, 2),
          fmt(p.ideal_power_open_W, 2),
          fmt(p.ideal_power_ducted_W, 2),
          fmt(p.ideal_grams_per_watt_open, 2),
          fmt(p.ideal_grams_per_watt_ducted, 2),
        ],
  );
  const widths = head.map((h, j) => Math.max(h.length, ...rows.map((r) => r[j].length)));
  const line = (cells: string[]): string => cells.map((c, j) => c.padStart(widths[j])).join('  ');
  const air = `air density ${density.toFixed(4)} kg/m^3${supply ? `, ${supply}` : ''}`;
  return [`${title}  (${air})`, line(head), ...rows.map(line)].join('\n') + '\n';
}

function jsonSafe(_key: string, v: unknown): unknown {
  return typeof v === 'number' && !Number.isFinite(v) ? null : v;
}

export async function predictMain(argv: string[], io: PredictIo): Promise<number> {
  try {
    const a = parseArgs(argv);
    if (a.help) {
      io.stdout(USAGE);
      return 0;
    }
    const v = a.values;
    if (v['--altitude'] !== undefined && v['--density'] !== undefined) {
      throw new UsageError('--density: give either --altitude or --density, not both');
    }
    if (v['--thrust'] !== undefined && v['--throttle'] !== undefined) {
      throw new UsageError('--throttle: give either --thrust or --throttle, not both');
    }
    let air: AirState = SEA_LEVEL_AIR;
    if (v['--altitude'] !== undefined) {
      const h = number('--altitude', v['--altitude'], 'must be a number of metres within -1000..11000', (x) => x >= -1000 && x <= 11000);
      air = isaAir(h);
    }
    if (v['--density'] !== undefined) {
      const rho = number('--density', v['--density'], 'must be a number of kg/m^3 within 0..2 and above 0', (x) => x > 0 && x <= 2);
      air = airFromDensity(rho);
    }
    const thrusts =
      v['--thrust'] === undefined ? undefined : list('--thrust', v['--thrust'], 'must be a comma-separated list of thrusts in newtons, each above 0', (x) => x > 0 && x <= 10000);
    const rho = air.density_kg_m3;

    let title: string;
    let points: OutPoint[];
    let full: boolean;
    let sigmaOut: number | null;
    let supplyOut: { voltage_v: number; source: 'given' | 'bench supply' | 'pack' } | null = null;
    if (v['--supply-v'] !== undefined && v['--rig'] === undefined) throw new UsageError('--supply-v: needs a full rig (--rig FILE)');
    if (v['--rig'] !== undefined) {
      for (const f of ['--prop-diameter', '--expansion-ratio'] as const) {
        if (v[f] !== undefined) throw new UsageError(`${f}: only for what-if runs without --rig (the rig file sets it)`);
      }
      const file = v['--rig'];
      let text: string;
      try {
        text = io.readFile(file);
      } catch (e) {
        throw new UsageError(`--rig: cannot read ${file} (${e instanceof Error ? e.message : String(e)})`);
      }
      let json: unknown;
      try {
        json = JSON.parse(text);
      } catch (e) {
        throw new UsageError(`--rig: ${file} is not valid JSON (${e instanceof Error ? e.message : String(e)})`);
      }
      let rig;
      try {
        rig = parseRig(json);
      } catch (e) {
        if (e instanceof RigError) throw new UsageError(`${file}: ${e.message}`);
        throw e;
      }
      const supplyV =
        v['--supply-v'] === undefined
          ? undefined
          : number('--supply-v', v['--supply-v'], 'must be a number of volts within 0..1000 and above 0', (x) => x > 0 && x <= 1000);
      supplyOut = {
        voltage_v: supplyV ?? defaultSupplyVoltage(rig),
        source: supplyV !== undefined ? 'given' : rig.supply.voltage_v !== undefined ? 'bench supply' : 'pack',
      };
      const model = buildRigModel(rig, { air, openCircuitVoltage_v: supplyOut.voltage_v });
      sigmaOut = model.geometry.sigma;
      full = true;
      title = `rig ${rig.name}${rig.duct ? ` (duct, sigma ${model.geometry.sigma!.toFixed(3)})` : ' (open)'}`;
      if (thrusts) {
        points = predictAtThrusts(model, thrusts).map((tp) => fullPart(tp, tp.operating));
      } else {
        const throttles =
          v['--throttle'] === undefined
            ? Array.from({ length: 10 }, (_, i) => (i + 1) / 10)
            : list('--throttle', v['--throttle'], 'must be a comma-separated list of fractions within 0..1', (x) => x >= 0 && x <= 1);
        points = predictCurve(model, { throttles }).points.map((p) => fullPart(p, p));
      }
    } else {
      if (v['--prop-diameter'] === undefined) throw new UsageError('--prop-diameter: required without --rig (or give --rig FILE)');
      if (v['--throttle'] !== undefined) throw new UsageError('--throttle: needs a full rig (--rig FILE)');
      const D = number('--prop-diameter', v['--prop-diameter'], 'must be a number of metres within 0.02..3', (x) => x >= 0.02 && x <= 3);
      const sigma =
        v['--expansion-ratio'] === undefined
          ? null
          : number('--expansion-ratio', v['--expansion-ratio'], `must be a number within ${SIGMA_MIN}..${SIGMA_MAX}`, (x) => x >= SIGMA_MIN && x <= SIGMA_MAX);
      if (!thrusts) throw new UsageError('--thrust: required for a what-if run (give --thrust N[,N...])');
      sigmaOut = sigma;
      full = false;
      title = `what-if rotor ${D} m${sigma === null ? ' (open)' : ` in a duct, sigma ${sigma}`}, ideal momentum theory`;
      points = thrusts.map((t) => idealPart(idealReference(t, D, rho, sigma)));
    }

    if (a.json) {
      const supply = supplyOut ? { supply_v: supplyOut.voltage_v, supply_source: supplyOut.source } : {};
      io.stdout(JSON.stringify({ density_kg_m3: rho, sigma: sigmaOut, ...supply, model_version: modelVersion, points }, jsonSafe) + '\n');
    } else {
      const supplyText = supplyOut
        ? `supply ${supplyOut.voltage_v.toFixed(2)} V at rest (${supplyOut.source === 'pack' ? `pack at ${PACK_CELL_VOLTAGE} V a cell` : supplyOut.source})`
        : null;
      io.stdout(table(title, rho, points, full, supplyText));
    }
    return 0;
  } catch (e) {
    if (e instanceof UsageError || e instanceof RangeError) {
      io.stderr(`ductbench predict: ${e.message.split('\n')[0]}\n`);
      return 2;
    }
    throw e;
  }
}
