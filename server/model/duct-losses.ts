// Duct losses: how far a real duct falls short of the ideal ducted momentum balance.
//
// The ideal ducted rotor (momentum.ts) gains everything from the exit-area ratio sigma. A real duct loses part
// of that gain in three ways, each an explicit factor here with its own adjustable constant:
//
// 1. Tip clearance. Flow leaking round the blade tips through the gap both unloads the blade tips and spoils
//    the duct's inlet suction. Gap retention eta_gap = exp(-(gap / R) / gapScale): 1 with no gap, falling
//    quickly as the gap grows (common practice: about 1 % of the radius or less is tight). The same factor
//    sets how much Prandtl tip loss the ducted rotor suffers (tipLossWeight = 1 - eta_gap, used by bemt.ts):
//    a closed gap leaves the blade loaded to the tip, a wide gap behaves like an open rotor.
// 2. Inlet lip. The duct's thrust is suction on the curved inlet lip; a sharp lip separates and loses much of
//    it. Lip retention eta_lip = 1 - (1 - sharpLipRetention) exp(-(r_lip / R) / lipScale), rising from
//    sharpLipRetention for a knife edge to 1 for a generous lip.
// 3. Diffuser limit. A diffuser only recovers pressure while its flow stays attached, which bounds the
//    half-angle (an optimum near 10 degrees was measured on small shrouds). The largest exit that attached flow
//    can fill from the bore over the diffuser length gives sigma_attached; any sigma beyond it buys nothing.
//    The rotor is taken to sit just behind the inlet lip and the diffuser to run from there to the exit over
//    the duct length (the lip's own depth is not subtracted, so that a bigger lip never shortens the
//    diffuser and costs attached expansion; the lip and the diffuser stay separate knobs).
//
// These combine into an effective exit-area ratio that the ducted momentum balance in bemt.ts uses:
//    sigma_eff = 0.5 + (min(sigma, sigma_attached) - 0.5) * eta_gap * eta_lip
// so that every loss pulls the rotor back towards the open rotor (sigma = 0.5) and never beyond it. The
// directions follow the measured trends on small shrouded rotors (Pereira and Chopra, JAHS 54(1), 2009):
// more gap costs, more lip radius helps, more sigma helps only until the diffuser separates. The constants
// are starting values, not measurements; calibration against a ducted sweep is the way to pin them.

import type { DuctSpec } from './rig-types.js';

export interface DuctLossFactors {
  /** Gap over rotor radius at which the gap retention has fallen to 1/e. */
  gapScale: number;
  /** Fraction of the duct benefit kept with a sharp (zero-radius) inlet lip. */
  sharpLipRetention: number;
  /** Lip radius over rotor radius at which the sharp-lip deficit has fallen to 1/e. */
  lipScale: number;
  /** Largest diffuser half-angle with attached flow, degrees. */
  maxAttachedHalfAngle_deg: number;
}

export const DEFAULT_DUCT_LOSSES: Readonly<DuctLossFactors> = Object.freeze({
  gapScale: 0.05,
  sharpLipRetention: 0.5,
  lipScale: 0.05,
  maxAttachedHalfAngle_deg: 10,
});

export interface DuctCondition {
  /** Geometric exit-area ratio (exit area / rotor disk area). */
  sigma: number;
  /** The largest sigma attached diffuser flow supports for this bore and length. */
  sigmaAttached: number;
  /** min(sigma, sigmaAttached). */
  sigmaLimited: number;
  /** Exit-area ratio after all losses; what the ducted momentum balance uses. */
  sigmaEffective: number;
  /** Tip gap over rotor radius. */
  gapOverRadius: number;
  gapRetention: number;
  lipRetention: number;
  /** 0 = no tip loss (gap closed) ... 1 = full open-rotor Prandtl tip loss. */
  tipLossWeight: number;
}

/** Length over which the diffuser expands, m (see the comment block above). */
export function diffuserLength(duct: Pick<DuctSpec, 'length_m'>): number {
  return duct.length_m;
}

export function gapRetention(gapOverRadius: number, f: DuctLossFactors = DEFAULT_DUCT_LOSSES): number {
  return Math.exp(-Math.max(0, gapOverRadius) / f.gapScale);
}

export function lipRetention(lipOverRadius: number, f: DuctLossFactors = DEFAULT_DUCT_LOSSES): number {
  return 1 - (1 - f.sharpLipRetention) * Math.exp(-Math.max(0, lipOverRadius) / f.lipScale);
}

/** Sigma that attached diffuser flow can reach from the bore over the diffuser length. */
export function attachedSigma(
  duct: Pick<DuctSpec, 'bore_diameter_m' | 'length_m'>,
  propellerDiameter_m: number,
  f: DuctLossFactors = DEFAULT_DUCT_LOSSES,
): number {
  const dMax = duct.bore_diameter_m + 2 * diffuserLength(duct) * Math.tan((f.maxAttachedHalfAngle_deg * Math.PI) / 180);
  return (dMax / propellerDiameter_m) ** 2;
}

/** Evaluate every duct loss for a duct around a propeller of the given diameter. */
export function ductCondition(
  duct: DuctSpec,
  propellerDiameter_m: number,
  f: DuctLossFactors = DEFAULT_DUCT_LOSSES,
): DuctCondition {
  const R = propellerDiameter_m / 2;
  const sigma = (duct.exit_diameter_m / propellerDiameter_m) ** 2;
  const sigmaAttached = attachedSigma(duct, propellerDiameter_m, f);
  const sigmaLimited = Math.min(sigma, sigmaAttached);
  const gapOverRadius = Math.max(0, (duct.bore_diameter_m - propellerDiameter_m) / 2 / R);
  const eg = gapRetention(gapOverRadius, f);
  const el = lipRetention(duct.inlet_lip_radius_m / R, f);
  // A limited sigma below 0.5 (a nozzle) is left as it is: losses only ever move towards the open rotor.
  const sigmaEffective = sigmaLimited > 0.5 ? 0.5 + (sigmaLimited - 0.5) * eg * el : sigmaLimited;
  return {
    sigma,
    sigmaAttached,
    sigmaLimited,
    sigmaEffective,
    gapOverRadius,
    gapRetention: eg,
    lipRetention: el,
    tipLossWeight: 1 - eg,
  };
}
