// Blade-element momentum theory (BEMT) for a propeller at zero forward speed, open or inside a duct.
//
// ASSUMPTIONS (all of them; change one and the tests in test/model-bemt.test.ts say what moved)
// - Hover only: no forward or climb speed. The rotor works in still air; the bench is a static stand.
// - Annuli are independent (no radial flow), the classical BEMT hypothesis.
// - Small angles in the inflow relation, as in Leishman's hover BEMT: the inflow angle is phi = lambda / x,
//   the section sees the in-plane speed Omega r, lift acts normal to the disk and drag in its plane. For
//   the outer blade, which makes most of the thrust, phi stays below about 0.15 rad and the error is
//   below about 1 %. The geometric pitch itself (the twist) is not small-angle; it is used as given.
// - Each annulus balances blade-element thrust with momentum thrust. Open rotor, far-wake contraction:
//       dCT = 4 F lambda^2 x dx.
//   Ducted rotor (momentum.ts, duct-losses.ts): with internal total-pressure losses K (on the rotor-plane
//   head) the rotor carries (1 + K sigma^2) / (2 sigma) of the total thrust and its inflow follows the
//   balance T_rotor = rho A v^2 (1 + K sigma^2) / (2 sigma^2), so per annulus
//       dCT_rotor = ((1 + K sigma^2) / sigma^2) F lambda^2 x dx,   total thrust = 2 sigma / (1 + K sigma^2) * rotor.
//   sigma here is the effective exit-area ratio from duct-losses.ts (tip gap, diffuser separation and
//   realisation folded in); at sigma = 0.5 and K = 0 both relations are the same.
//   With the blade-element side dCT = (sigma_l a / 2)(theta_e x - lambda) x dx (sigma_l = Nb c / (pi R),
//   theta_e = pitch - zero-lift angle), each annulus has the closed form
//       lambda = (b / 2) (sqrt(1 + 4 theta_e x / b) - 1),  b = sigma_l a / (2 K F),  K = 4 or (1 + K_loss sigma^2) / sigma^2.
//   F depends on lambda, so the closed form is iterated to a fixed point (a few iterations).
// - Stall: if the resulting lift coefficient exceeds clMax, the annulus is re-solved with CL = clMax, which
//   is again closed form (K F lambda^2 = sigma_l clMax x / 2).
// - Tip loss: Prandtl, F = (2/pi) arccos(exp(-(Nb/2)(1 - x)/(x phi))) for the open rotor. Inside a duct the
//   wall stops the flow going round the tip, so the loss fades as the gap closes:
//       F_duct = 1 - w (1 - F_Prandtl),  w = tipLossWeight from duct-losses.ts (0 for no gap, towards 1 for a
//       wide gap). No hub loss; the root cut-out simply carries no load.
// - Power: dCP = (sigma_l / 2)(kappa CL phi + CD) x^3 dx, where kappa (the induced-power factor, 1 by default)
//   stands for everything this model leaves out of the induced loss: swirl, non-uniform wake, blade-tip
//   vortex details. The profile-drag factor multiplies CD0. Both are free factors for calibration.
// - The lift depends on the Reynolds number (airfoil.ts), so the inflow does too, slowly. It is solved at
//   eight Reynolds numbers at 0.75 R (1/8 to 16 times the polar's reference, each station at its own Re) once
//   per rotor, and a speed is evaluated between the two nodes around it, linear in log Re; the profile drag
//   is evaluated exactly at each speed. That keeps a 50-point curve cheap and lets static CT rise with rpm.
// - Coefficients are rotorcraft-normalised internally (CT = T / (rho A (Omega R)^2)); results also carry the
//   propeller coefficients CT = T / (rho n^2 D^4), CP = P / (rho n^3 D^5).

import type { AirState } from './atmosphere.js';
import { DEFAULT_POLAR, liftDependentDrag, liftReynoldsFactor, profileDrag, type AirfoilPolar } from './airfoil.js';
import type { PropellerSpec } from './rig-types.js';
import { interp1 } from './numeric.js';

/** Blade description sampled by the BEMT; x = r / R. */
export interface BladeDefinition {
  radius_m: number;
  blades: number;
  /** Root cut-out as a fraction of the radius; stations start there. */
  rootCutout: number;
  chordAt(x: number): number;
  /** Geometric pitch angle of the chord line, rad. */
  pitchAt(x: number): number;
}

/** How the rotor's inflow is set: free (open) or by a duct of effective exit-area ratio sigma. */
export type InflowModel =
  | { kind: 'open' }
  | {
      kind: 'ducted';
      sigmaEffective: number;
      tipLossWeight: number;
      /** Total-pressure loss inside the duct on the rotor-plane dynamic head (duct-losses.ts); default 0. */
      lossCoefficient?: number;
    };

/** Free factors that calibration adjusts. */
export interface AeroFactors {
  /** Multiplies the lift slope. */
  liftFactor: number;
  /** Multiplies the profile drag coefficient CD0. */
  cd0Factor: number;
  /** Multiplies the induced power (kappa). */
  inducedFactor: number;
}

export const DEFAULT_FACTORS: Readonly<AeroFactors> = Object.freeze({ liftFactor: 1, cd0Factor: 1, inducedFactor: 1 });

export interface BemtOptions {
  stations?: number;
  /** Prandtl tip loss on (default) or off (to compare with closed forms). */
  tipLoss?: boolean;
  polar?: Partial<AirfoilPolar>;
  factors?: Partial<AeroFactors>;
}

/** Default blade stations. */
export const DEFAULT_STATIONS = 40;

/** Chord over radius of the generated default planform, by x: a typical small fixed-pitch propeller. */
const DEFAULT_PLANFORM_X = [0.15, 0.3, 0.45, 0.6, 0.75, 0.9, 1.0];
const DEFAULT_PLANFORM_C = [0.14, 0.19, 0.195, 0.18, 0.15, 0.11, 0.065];
const DEFAULT_ROOT_CUTOUT = 0.15;

/**
 * Blade from a rig's propeller. With explicit geometry the table is interpolated linearly; otherwise a
 * default planform (chord peaking near 40 % radius at 0.195 R) and the twist of constant geometric pitch,
 * theta = atan(pitch / (2 pi r)), are generated from diameter and pitch.
 */
export function bladeFromPropeller(p: PropellerSpec): BladeDefinition {
  const R = p.diameter_m / 2;
  if (p.geometry) {
    const { r_over_R, chord_m, twist_deg } = p.geometry;
    const twistRad = twist_deg.map((d) => (d * Math.PI) / 180);
    return {
      radius_m: R,
      blades: p.blades,
      rootCutout: r_over_R[0],
      chordAt: (x) => interp1(r_over_R, chord_m, x),
      pitchAt: (x) => interp1(r_over_R, twistRad, x),
    };
  }
  const pitch = p.pitch_m;
  return {
    radius_m: R,
    blades: p.blades,
    rootCutout: DEFAULT_ROOT_CUTOUT,
    chordAt: (x) => interp1(DEFAULT_PLANFORM_X, DEFAULT_PLANFORM_C, x) * R,
    pitchAt: (x) => Math.atan(pitch / (2 * Math.PI * x * R)),
  };
}

/** Prandtl tip-loss factor at x = r / R for inflow angle phi (rad) and Nb blades. */
export function prandtlTipLoss(x: number, phi: number, blades: number): number {
  if (x >= 1) return 0;
  if (!(phi > 0)) return 1;
  const f = ((blades / 2) * (1 - x)) / (x * phi);
  return (2 / Math.PI) * Math.acos(Math.min(1, Math.exp(-f)));
}

/** Per-station solution, exposed for plots and tests. */
export interface StationSolution {
  x: number;
  dx: number;
  chord_m: number;
  pitch_rad: number;
  solidity: number;
  inflow: number;
  tipLoss: number;
  alpha_rad: number;
  cl: number;
  stalled: boolean;
}

/** A rotor whose inflow is solved; evaluate it at any speed with rotorAt. */
export interface BemtRotor {
  readonly blade: BladeDefinition;
  readonly inflowModel: InflowModel;
  readonly polar: Readonly<AirfoilPolar>;
  readonly factors: Readonly<AeroFactors>;
  readonly stations: readonly StationSolution[];
  /** Rotor thrust coefficient (rotorcraft form), excluding any duct thrust, at Re(0.75 R) = reynoldsRef. */
  readonly ctRotor: number;
  /** Total thrust coefficient (rotor plus duct). */
  readonly ctTotal: number;
  /** Induced power coefficient, kappa included. */
  readonly cpInduced: number;
  /** Per-station weights and Reynolds-independent drag for the profile-power sum. */
  readonly profileWeights: Float64Array;
  readonly liftDrag: Float64Array;
  /** rho-free part of the station Reynolds number: Re = omega * rho / mu * reynoldsScale. */
  readonly reynoldsScale: Float64Array;
  /** The same at 0.75 R, which places a speed between the Reynolds nodes. */
  readonly re75Scale: number;
  /** The rotor solved at Reynolds numbers (at 0.75 R) from 1/8 to 16 times reynoldsRef; one without the effect. */
  readonly nodes: readonly RotorNode[];
}

function solveAnnulus(
  x: number,
  solidity: number,
  thetaEff: number,
  a: number,
  clMax: number,
  K: number,
  blades: number,
  tipLoss: boolean,
  tipWeight: number,
): { inflow: number; F: number; stalled: boolean } {
  if (!(thetaEff > 0) || solidity === 0) return { inflow: 0, F: 1, stalled: false };
  const lossFor = (lambda: number): number => {
    if (!tipLoss) return 1;
    const fp = prandtlTipLoss(x, lambda / x, blades);
    return 1 - tipWeight * (1 - fp);
  };
  const linear = (F: number): number => {
    const b = (solidity * a) / (2 * K * F);
    // Written as 2 t / (1 + sqrt(1 + 4 t / b)) to avoid cancellation when b is large (tip, F -> 0).
    const t = thetaEff * x;
    return (2 * t) / (1 + Math.sqrt(1 + (4 * t) / b));
  };
  const stall = (F: number): number => Math.sqrt((solidity * clMax * x) / (2 * K * F));

  let F = 1;
  let lambda = linear(F);
  for (let k = 0; k < 60; k++) {
    const Fn = Math.max(1e-6, lossFor(lambda));
    const ln = linear(Fn);
    const done = Math.abs(ln - lambda) < 1e-13 && Math.abs(Fn - F) < 1e-12;
    lambda = ln;
    F = Fn;
    if (done) break;
  }
  if (a * (thetaEff - lambda / x) <= clMax) return { inflow: lambda, F, stalled: false };
  for (let k = 0; k < 60; k++) {
    const Fn = Math.max(1e-6, lossFor(lambda));
    const ln = stall(Fn);
    const done = Math.abs(ln - lambda) < 1e-13;
    lambda = ln;
    F = Fn;
    if (done) break;
  }
  return { inflow: lambda, F, stalled: true };
}

/** Solve the inflow of a rotor once; the result is evaluated at any speed by rotorAt. */
export function prepareRotor(blade: BladeDefinition, inflowModel: InflowModel, opts: BemtOptions = {}): BemtRotor {
  const n = opts.stations ?? DEFAULT_STATIONS;
  if (!Number.isInteger(n) || n < 4 || n > 1000) throw new RangeError('stations: must be a whole number within 4..1000');
  const polar: AirfoilPolar = { ...DEFAULT_POLAR, ...opts.polar };
  const factors: AeroFactors = { ...DEFAULT_FACTORS, ...opts.factors };
  for (const [k, v] of Object.entries(factors)) {
    if (!(Number.isFinite(v) && v > 0)) throw new RangeError(`factors.${k}: must be a positive finite number`);
  }
  const tipLoss = opts.tipLoss ?? true;
  let K = 4;
  let tipWeight = 1;
  let thrustMultiplier = 1;
  if (inflowModel.kind === 'ducted') {
    const s = inflowModel.sigmaEffective;
    if (!(s > 0 && Number.isFinite(s))) throw new RangeError('sigmaEffective: must be a positive finite number');
    // The loss coefficient may be an equivalent one (duct-losses.ts: a gap's blend of the duct and the open
    // rotor), below zero; the balance only needs 1 + K s^2 > 0.
    const loss = inflowModel.lossCoefficient ?? 0;
    if (!(Number.isFinite(loss) && 1 + loss * s * s > 0)) throw new RangeError('lossCoefficient: must be finite with 1 + K sigma^2 > 0');
    // Ducted balance with internal losses (duct-losses.ts): T_rotor = rho A v^2 (1 + K s^2) / (2 s^2),
    // total thrust 2 s / (1 + K s^2) times the rotor's.
    K = (1 + loss * s * s) / (s * s);
    tipWeight = Math.min(1, Math.max(0, inflowModel.tipLossWeight));
    thrustMultiplier = (2 * s) / (1 + loss * s * s);
  }
  const a = polar.liftSlope_perRad * factors.liftFactor;
  const R = blade.radius_m;
  const x0 = blade.rootCutout;
  const dx = (1 - x0) / n;
  const profileWeights = new Float64Array(n);
  const reynoldsScale = new Float64Array(n);
  const xs = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    const x = x0 + (i + 0.5) * dx;
    xs[i] = x;
    const c = blade.chordAt(x);
    profileWeights[i] = (blade.blades * c) / (Math.PI * R) / 2 * x * x * dx * x;
    reynoldsScale[i] = R * x * c;
  }
  const re75Scale = R * 0.75 * blade.chordAt(0.75);
  // Reynolds-number nodes at 0.75 R: the inflow is solved at each, with every station's lift slope and clMax
  // at its own Reynolds number, and interpolated in log Re between them (see reynoldsNodes).
  const nodeCount = polar.liftReynoldsExponent === 0 ? 1 : REYNOLDS_NODES.length;
  const nodes: RotorNode[] = [];
  for (let k = 0; k < nodeCount; k++) {
    const re75 = nodeCount === 1 ? polar.reynoldsRef : polar.reynoldsRef * 2 ** REYNOLDS_NODES[k];
    const stations: StationSolution[] = [];
    const liftDrag = new Float64Array(n);
    let ct = 0;
    let cpi = 0;
    for (let i = 0; i < n; i++) {
      const x = xs[i];
      const c = blade.chordAt(x);
      const pitch = blade.pitchAt(x);
      const solidity = (blade.blades * c) / (Math.PI * R);
      const thetaEff = pitch - polar.zeroLiftAngle_rad;
      const f = liftReynoldsFactor(polar, (re75 * reynoldsScale[i]) / re75Scale);
      const ai = a * f;
      const clMax = polar.clMax * f;
      const sol = solveAnnulus(x, solidity, thetaEff, ai, clMax, K, blade.blades, tipLoss, tipWeight);
      const phi = sol.inflow / x;
      const alpha = pitch - phi;
      const cl = sol.stalled ? clMax : Math.max(-clMax, ai * (alpha - polar.zeroLiftAngle_rad));
      const w = (solidity / 2) * x * x * dx;
      const dct = w * cl;
      ct += dct;
      cpi += dct * sol.inflow;
      liftDrag[i] = liftDependentDrag({ ...polar, liftSlope_perRad: ai, clMax }, alpha);
      stations.push({ x, dx, chord_m: c, pitch_rad: pitch, solidity, inflow: sol.inflow, tipLoss: sol.F, alpha_rad: alpha, cl, stalled: sol.stalled });
    }
    nodes.push({ log2Re: Math.log2(re75 / polar.reynoldsRef), ctRotor: ct, ctTotal: ct * thrustMultiplier, cpInduced: cpi * factors.inducedFactor, liftDrag, stations });
  }
  const ref = nodes[nodeCount === 1 ? 0 : REYNOLDS_NODES.indexOf(0)];
  return {
    blade,
    inflowModel,
    polar,
    factors,
    stations: ref.stations,
    ctRotor: ref.ctRotor,
    ctTotal: ref.ctTotal,
    cpInduced: ref.cpInduced,
    profileWeights,
    liftDrag: ref.liftDrag,
    reynoldsScale,
    re75Scale,
    nodes,
  };
}

/** Log2 of Re(0.75 R) / reynoldsRef at the nodes: 12,500 to 1.6 million for the default 100,000. */
const REYNOLDS_NODES = [-3, -2, -1, 0, 1, 2, 3, 4];

/** The rotor solved at one Reynolds number. */
export interface RotorNode {
  log2Re: number;
  ctRotor: number;
  ctTotal: number;
  cpInduced: number;
  liftDrag: Float64Array;
  stations: StationSolution[];
}

/** The rotor's coefficients at a speed: between the two Reynolds nodes around it, linear in log Re. */
export function rotorNodeAt(rotor: BemtRotor, omega: number, air: AirState): Omit<RotorNode, 'stations' | 'log2Re'> {
  const ns = rotor.nodes;
  if (ns.length === 1) return ns[0];
  const re75 = (omega * air.density_kg_m3 * rotor.re75Scale) / air.viscosity_Pa_s;
  const u = re75 > 0 ? Math.log2(re75 / rotor.polar.reynoldsRef) : -Infinity;
  if (!(u > ns[0].log2Re)) return ns[0];
  if (u >= ns[ns.length - 1].log2Re) return ns[ns.length - 1];
  let k = 1;
  while (ns[k].log2Re < u) k++;
  const a = ns[k - 1];
  const b = ns[k];
  const t = (u - a.log2Re) / (b.log2Re - a.log2Re);
  const lerp = (p: number, q: number): number => p + t * (q - p);
  const liftDrag = new Float64Array(a.liftDrag.length);
  for (let i = 0; i < liftDrag.length; i++) liftDrag[i] = lerp(a.liftDrag[i], b.liftDrag[i]);
  return { ctRotor: lerp(a.ctRotor, b.ctRotor), ctTotal: lerp(a.ctTotal, b.ctTotal), cpInduced: lerp(a.cpInduced, b.cpInduced), liftDrag };
}

/** Profile power coefficient (rotorcraft form) at a rotational speed. */
export function profilePowerCoefficient(rotor: BemtRotor, omega: number, air: AirState, liftDrag: Float64Array = rotorNodeAt(rotor, omega, air).liftDrag): number {
  const nuInv = air.density_kg_m3 / air.viscosity_Pa_s;
  const f = rotor.factors.cd0Factor;
  let cp = 0;
  for (let i = 0; i < rotor.profileWeights.length; i++) {
    const re = omega * nuInv * rotor.reynoldsScale[i];
    cp += rotor.profileWeights[i] * (f * profileDrag(rotor.polar, re) + liftDrag[i]);
  }
  return cp;
}

export interface RotorState {
  rpm: number;
  thrust_N: number;
  /** Thrust on the rotor blades alone (equal to thrust_N for an open rotor). */
  rotorThrust_N: number;
  torque_Nm: number;
  power_W: number;
  /** Propeller coefficients, n in rev/s. */
  ct: number;
  cp: number;
  /** Open-form figure of merit sqrt(2/pi) CT^1.5 / CP (can exceed 1 in a duct). */
  figureOfMerit: number;
}

/** Thrust, torque and power of a prepared rotor at a rotational speed (rad/s). */
export function rotorAt(rotor: BemtRotor, omega: number, air: AirState): RotorState {
  const R = rotor.blade.radius_m;
  const A = Math.PI * R * R;
  const rho = air.density_kg_m3;
  const tipSpeed = omega * R;
  const node = rotorNodeAt(rotor, omega, air);
  const cpTotal = node.cpInduced + profilePowerCoefficient(rotor, omega, air, node.liftDrag);
  const thrust = node.ctTotal * rho * A * tipSpeed * tipSpeed;
  const power = cpTotal * rho * A * tipSpeed * tipSpeed * tipSpeed;
  // CT_prop = CT_h pi^3 / 4 and CP_prop = CP_h pi^4 / 4 for the same rotor at the same speed.
  const ctProp = (node.ctTotal * Math.PI ** 3) / 4;
  const cpProp = (cpTotal * Math.PI ** 4) / 4;
  return {
    rpm: (omega * 60) / (2 * Math.PI),
    thrust_N: thrust,
    rotorThrust_N: node.ctRotor * rho * A * tipSpeed * tipSpeed,
    torque_Nm: omega > 0 ? power / omega : 0,
    power_W: power,
    ct: ctProp,
    cp: cpProp,
    figureOfMerit: cpTotal > 0 ? Math.pow(node.ctTotal, 1.5) / (Math.SQRT2 * cpTotal) : 0,
  };
}

/** Rotorcraft-form coefficients at a speed: for comparing with closed-form hover results. */
export function rotorCoefficients(rotor: BemtRotor, omega: number, air: AirState): { ct: number; cp: number; fm: number } {
  const node = rotorNodeAt(rotor, omega, air);
  const cp = node.cpInduced + profilePowerCoefficient(rotor, omega, air, node.liftDrag);
  return { ct: node.ctTotal, cp, fm: Math.pow(node.ctTotal, 1.5) / (Math.SQRT2 * cp) };
}

/**
 * Speed (rad/s) at which the rotor makes a thrust. CT moves only slowly with speed (through the Reynolds
 * number: d ln CT / d ln omega is a few hundredths), so the fixed point omega = sqrt(T / (CT(omega) rho A)) / R
 * converges in a few steps; without a Reynolds effect on lift it is exact at once.
 */
export function omegaForThrust(rotor: BemtRotor, thrust_N: number, air: AirState): number {
  const R = rotor.blade.radius_m;
  if (!(thrust_N > 0) || !(rotor.ctTotal > 0)) return 0;
  const q = thrust_N / (air.density_kg_m3 * Math.PI * R * R);
  let omega = Math.sqrt(q / rotor.ctTotal) / R;
  for (let k = 0; k < 100; k++) {
    const ct = rotorNodeAt(rotor, omega, air).ctTotal;
    if (!(ct > 0)) return 0;
    const next = Math.sqrt(q / ct) / R;
    const done = Math.abs(next - omega) <= 1e-13 * next;
    omega = next;
    if (done) break;
  }
  return omega;
}

/** One-call static BEMT: thrust and torque at an rpm. */
export function bemtStatic(blade: BladeDefinition, inflowModel: InflowModel, rpm: number, air: AirState, opts: BemtOptions = {}): RotorState {
  return rotorAt(prepareRotor(blade, inflowModel, opts), (rpm * 2 * Math.PI) / 60, air);
}
