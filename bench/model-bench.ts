// Model timings: the prediction curve the dashboard overlays (50 throttle points, 40 blade stations, the
// ducted demo rig) and a calibration fit (three aerodynamic factors to a 14-point sweep with 0.5 % noise),
// beside two baselines timed the same way: one BEMT rotor evaluation, and the momentum-theory ideal curve
// (closed form, the floor any curve costs). Medians of repeated runs after a warm-up.

import { DEFAULT_DUCTED_RIG, DEFAULT_OPEN_RIG } from '../server/sim/default-rigs.js';
import { bladeFromPropeller, buildRigModel, calibrate, idealReference, predictAtThrottle, predictCurve, prepareRotor, rotorAt, SEA_LEVEL_AIR, type MeasuredPoint } from '../server/model/index.js';
import { median } from './common.js';

export interface ModelBench {
  /** Model build (BEMT solve) plus the 50-point curve. */
  curve_ms: number;
  /** The curve alone, from a built model. */
  curve_only_ms: number;
  curve_points: number;
  stations: number;
  fit_ms: number;
  fit_points: number;
  fit_converged: boolean;
  baseline_single_bemt_ms: number;
  baseline_ideal_curve_ms: number;
}

function timeMedian(fn: () => void, runs: number, warm = 3): number {
  for (let k = 0; k < warm; k++) fn();
  const ts: number[] = [];
  for (let k = 0; k < runs; k++) {
    const t = performance.now();
    fn();
    ts.push(performance.now() - t);
  }
  return median(ts);
}

/** Seeded deviates (Park-Miller, Box-Muller): the same synthetic sweep on every run. */
function gaussian(seed: number): () => number {
  let s = seed;
  const u = () => (s = (s * 16807) % 2147483647) / 2147483647;
  for (let k = 0; k < 10; k++) u();
  return () => Math.sqrt(-2 * Math.log(u())) * Math.cos(2 * Math.PI * u());
}

export function benchModel(quick: boolean): ModelBench {
  const stations = 40;
  const points = 50;
  const throttles = Array.from({ length: points }, (_, i) => ((i + 1) / points) * 0.9);
  const ducted = buildRigModel(DEFAULT_DUCTED_RIG, { stations });
  let curveThrusts: number[] = [];
  const curve_only_ms = timeMedian(() => {
    curveThrusts = predictCurve(ducted, { throttles }).points.map((p) => p.thrust_N);
  }, quick ? 5 : 15);
  // What the daemon does for a new rig or air: build the model (the BEMT solve) and predict the curve.
  const curve_ms = timeMedian(() => void predictCurve(buildRigModel(DEFAULT_DUCTED_RIG, { stations }), { throttles }), quick ? 5 : 15);

  // One blade-element momentum solve over the 40 stations (the inflow at every station), then one operating point.
  const blade = bladeFromPropeller(DEFAULT_OPEN_RIG.propeller);
  const baseline_single_bemt_ms = timeMedian(() => void rotorAt(prepareRotor(blade, { kind: 'open' }, { stations }), 800, SEA_LEVEL_AIR), 200, 20);
  const D = DEFAULT_DUCTED_RIG.propeller.diameter_m;
  const baseline_ideal_curve_ms = timeMedian(() => {
    for (const T of curveThrusts) idealReference(T, D, SEA_LEVEL_AIR.density_kg_m3, 1.1);
  }, 200, 20);

  const truth = buildRigModel(DEFAULT_OPEN_RIG, { factors: { liftFactor: 1.08, cd0Factor: 1.35, inducedFactor: 1.12 } });
  const g = gaussian(4242);
  const sweep: MeasuredPoint[] = Array.from({ length: 14 }, (_, k) => {
    const d = 0.2 + 0.05 * k;
    const V = 15.6 - 0.08 * k;
    const p = predictAtThrottle(truth, d, V);
    return { throttle: d, busVoltage_V: V, thrust_N: p.thrust_N * (1 + 0.005 * g()), power_W: p.powerElectrical_W * (1 + 0.005 * g()), rpm: p.rpm * (1 + 0.005 * g()) };
  });
  let converged = false;
  const fit_ms = timeMedian(() => {
    converged = calibrate(DEFAULT_OPEN_RIG, sweep).converged;
  }, quick ? 3 : 7, 1);
  return { curve_ms, curve_only_ms, curve_points: points, stations, fit_ms, fit_points: sweep.length, fit_converged: converged, baseline_single_bemt_ms, baseline_ideal_curve_ms };
}
