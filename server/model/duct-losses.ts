// Duct losses: how far a real duct falls short of the ideal ducted momentum balance.
//
// The ideal ducted rotor (momentum.ts) gains everything from the exit-area ratio sigma. A real duct loses part
// of that gain in four ways, each an explicit factor here with its own adjustable constant:
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
// 4. Shroud realisation. Even a duct with a tight gap, a round lip and an attached diffuser does not deliver
//    the whole ideal momentum-theory saving: the exit flow is not the uniform jet the ideal balance assumes
//    (hub wake, a fast outer annulus, swirl that no stator takes out), the lip suction falls short of the
//    potential-flow value at these low Reynolds numbers, and the diffuser recovers only part of its ideal
//    pressure rise. None of these has a clean first-order model for a bench propeller, so they are lumped into
//    one explicit factor, eta_s: the fraction of the ideal equal-thrust induced-power saving that is realised.
//    With the duct's ideal power ratio r = 1 / sqrt(2 sigma_g) (sigma_g after items 1 to 3), the realised
//    ratio is 1 - eta_s (1 - r), which defines the effective sigma the rotor works against:
//        sigma_eff = 0.5 / (1 - eta_s (1 - 1 / sqrt(2 sigma_g)))^2.
//    eta_s = 1 is the ideal duct, eta_s = 0 the open rotor; the mapping is monotonic in both eta_s and sigma_g,
//    so every direction of items 1 to 3 is kept. ductEffectiveness() (calibrate.ts) measures the same kind of
//    fraction from an open and a ducted sweep, but on electrical power and with the tip-loss relief of item 1
//    inside it, so with a tight gap a measured effectiveness is an upper estimate of eta_s, not its value.
//    Default 0.5. Measured MAV-scale shrouds span a wide range. A quad-shrouded rotor vehicle (Design and
//    performance of a quad-shrouded rotor micro air vehicle, J. Aircraft, 2014; authors Hrishikeshavan, Black
//    and Chopra and the venue from memory, the figure from its abstract) reached about 15 % more power loading
//    than its open rotors; if its shrouds were near sigma = 1 (the abstract does not say), the ideal promised
//    41 %, so it realised about 0.45 of the ideal saving (derived: 1 - 1/1.15 = 0.13 against
//    1 - 0.707 = 0.29). Pereira's best shrouds (PhD thesis, University of Maryland, 2008) beat the ideal,
//    because they also cut the rotor's non-ideal losses, while a wider gap or a sharper lip cost them much of
//    the gain. A bench tool should not promise the optimum for a duct it knows only by four dimensions, so
//    the default sits near the lower-middle of that range; a ducted sweep pins the value (calibrate with the
//    'shroudRealisation' parameter, up to SHROUD_REALISATION_MAX for a shroud that beats the ideal). The
//    removal of tip loss by a tight gap (item 1) is a separate effect and is not scaled by eta_s.
//
// Left out on purpose: skin friction on the duct wall. For a 0.25 m duct 0.1 m long with a 15 m/s exit jet
// (Re about 1e5, Cf about 0.005 to 0.007 laminar to turbulent flat plate, from memory), the wall drag is
// about 0.06 N, well under 1 % of the thrust. And a separate exit kinetic-energy (non-uniformity) factor:
// the open rotor's wake is non-uniform too and that is already in the calibrated induced factor, so a duct-only
// correction would count it twice; what the duct does not recover is in eta_s.
//
// Items 1 to 3 combine into a geometric effective exit-area ratio
//    sigma_g = 0.5 + (min(sigma, sigma_attached) - 0.5) * eta_gap * eta_lip
// and item 4 turns it into sigma_eff, which the ducted momentum balance in bemt.ts uses, so that every loss
// pulls the rotor back towards the open rotor (sigma = 0.5) and never beyond it. The directions follow the
// measured trends on small shrouded rotors (Pereira and Chopra, JAHS 54(1), 2009): more gap costs, more lip
// radius helps, more sigma helps only until the diffuser separates. The constants are starting values, not
// measurements; calibration against a ducted sweep is the way to pin them.

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
  /** Fraction of the ideal equal-thrust induced-power saving realised: 0 open rotor, 1 ideal duct (item 4). */
  shroudRealisation: number;
}

export const DEFAULT_DUCT_LOSSES: Readonly<DuctLossFactors> = Object.freeze({
  gapScale: 0.05,
  sharpLipRetention: 0.5,
  lipScale: 0.05,
  maxAttachedHalfAngle_deg: 10,
  shroudRealisation: 0.5,
});

/** Largest shroud realisation accepted: above 1 stands for a shroud that beats the ideal (Pereira 2008). */
export const SHROUD_REALISATION_MAX = 1.5;

export interface DuctCondition {
  /** Geometric exit-area ratio (exit area / rotor disk area). */
  sigma: number;
  /** The largest sigma attached diffuser flow supports for this bore and length. */
  sigmaAttached: number;
  /** min(sigma, sigmaAttached). */
  sigmaLimited: number;
  /** Exit-area ratio after the gap, lip and diffuser losses, before the shroud realisation. */
  sigmaGeometric: number;
  /** Exit-area ratio after all losses; what the ducted momentum balance uses. */
  sigmaEffective: number;
  /** The shroud realisation applied (fraction of the ideal saving). */
  shroudRealisation: number;
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

/**
 * Effective sigma of a duct that realises a fraction of the ideal equal-thrust power saving at sigma (item 4
 * above). Sigma at or below 0.5 (no ideal saving) is returned unchanged.
 */
export function realisedSigma(sigma: number, realisation: number): number {
  if (!(Number.isFinite(realisation) && realisation >= 0 && realisation <= SHROUD_REALISATION_MAX)) {
    throw new RangeError(`shroudRealisation: must be within 0..${SHROUD_REALISATION_MAX} (got ${realisation})`);
  }
  if (!(sigma > 0.5)) return sigma;
  const saving = realisation * (1 - 1 / Math.sqrt(2 * sigma));
  return 0.5 / (1 - saving) ** 2;
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
  const sigmaGeometric = sigmaLimited > 0.5 ? 0.5 + (sigmaLimited - 0.5) * eg * el : sigmaLimited;
  const sigmaEffective = realisedSigma(sigmaGeometric, f.shroudRealisation);
  return {
    sigma,
    sigmaAttached,
    sigmaLimited,
    sigmaGeometric,
    sigmaEffective,
    shroudRealisation: f.shroudRealisation,
    gapOverRadius,
    gapRetention: eg,
    lipRetention: el,
    tipLossWeight: 1 - eg,
  };
}
