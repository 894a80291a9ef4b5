// Duct losses: how far a real duct falls short of the ideal ducted momentum balance.
//
// The ideal ducted rotor (momentum.ts) gains everything from the exit-area ratio sigma: P = T^1.5 / sqrt(4
// sigma rho A), the rotor carrying 1 / (2 sigma) of the thrust and the inlet lip's suction the rest. A real
// duct loses part of that in two ways, and this module computes both from the duct's four dimensions and a
// named set of coefficients (DuctLossCoefficients, the set a ducted sweep is fitted for):
//
//   - the exit-area ratio the flow actually holds, sigma_e (tip gap, diffuser separation, realisation), and
//   - total-pressure losses K inside the duct (inlet lip, diffuser), as a coefficient of the rotor-plane
//     dynamic head 0.5 rho v^2.
//
// DERIVATION of how K enters (extends momentum.ts; mass, momentum and energy conservation in hover). Rotor
// velocity v, exit velocity w, v = sigma_e w. Momentum of the whole control volume: T = rho sigma_e A w^2
// (unchanged by internal losses). The rotor's pressure jump must supply the exit dynamic head and the
// losses: dp = 0.5 rho w^2 + K 0.5 rho v^2 = 0.5 rho w^2 (1 + K sigma_e^2). So
//     T_rotor = dp A = T (1 + K sigma_e^2) / (2 sigma_e),
//     P = dp A v = T^1.5 (1 + K sigma_e^2) / sqrt(4 sigma_e rho A),
// and the duct's own share of the thrust (the inlet lip's suction, net of the diffuser wall) is
//     T_lip / T = 1 - (1 + K sigma_e^2) / (2 sigma_e),
// which is what `lipThrustShare` reports. K = 0 is the ideal duct; sigma_e = 0.5 with K = 0 is the open rotor.
// In the BEMT (bemt.ts) the same balance per annulus reads dCT_rotor = ((1 + K sigma_e^2) / sigma_e^2) F
// lambda^2 x dx, and the total thrust is 2 sigma_e / (1 + K sigma_e^2) times the rotor's.
//
// THE TERMS, each with its coefficient in DuctLossCoefficients:
//
// 1. Tip gap (tipGapLoss). Leakage round the blade tips through the gap rolls up into a tip vortex that both
//    unloads the blade tips and spoils the inlet's suction near the wall. The fraction of the duct's benefit
//    kept is a quadratic rational function of the gap delta over the radius R:
//        g = 1 / (1 + (tipGapLoss * delta / R)^2).
//    Quadratic because a gap inside the blade tip's own boundary layer (a few tenths of a percent of R on
//    these blades) leaks almost nothing, and the vortex grows with the gap once it is wider.
//    g keeps that fraction of the tight duct's difference from the open rotor, both in induced power and in
//    the lip's share of the thrust: r = 1 - g (1 - r_tight), s_rotor = 1 - g (1 - s_tight). So a wider gap
//    always moves the prediction towards the open rotor (never past it) whatever the other losses, and a very
//    wide gap is the open rotor. It also sets the blade's tip loss (tipLossWeight = 1 - g: a closed gap leaves
//    the blade loaded to the tip, a wide one
//    behaves like an open rotor). Default 65: 0.9 of the benefit kept at 0.5 % of the radius, half at
//    1.5 %, a fifth at 3 %, a twelfth at 5 % (common practice: a gap near 1 % of the radius or less is tight,
//    and performance falls quickly as it grows). Published hover tests of small shrouded rotors put most of the benefit gone within a few percent
//    of the radius (Pereira, Hover and wind-tunnel testing of shrouded rotors for improved micro air vehicle
//    design, PhD thesis, University of Maryland, 2008: tip clearances of about 0.1 % to 3 % of the radius,
//    performance falling steadily with clearance; Martin and Tung, Hover performance of a small-scale ducted
//    fan, AHS Forum 60, 2004, the same direction on a 10-inch fan; both magnitudes from memory). The old
//    exponential form with a 5 %-of-radius scale still saved 12 % of the power at a 5 % gap, which no
//    measurement supports. The leakage flow itself (C_d 2 pi R delta w against pi R^2 v, about 2 % of the
//    flow at a 2 % gap) is far too small to explain this; the loss is the vortex, so the form is empirical.
//
// 2. Inlet lip (lipLoss). The lip's suction is the duct's thrust; a sharp lip separates and the flow enters
//    through a vena contracta, losing total pressure. The entry loss coefficient of a rounded inlet, against
//    lip radius over inlet diameter r/d (d taken as the rotor diameter), is the handbook table below (Crane Technical Paper 410, "Flow of
//    fluids", entrance losses; the same values in White, Fluid Mechanics, ch. 6; from memory): sharp 0.5,
//    0.02: 0.28, 0.04: 0.24, 0.06: 0.15, 0.10: 0.09, 0.15 and over: 0.04. lipLoss multiplies the table
//    (1 = the table). Because the lip's share is 1 - (1 + K sigma_e^2) / (2 sigma_e), this sets how much of the
//    thrust the lip carries; the gain keeps growing up to r/d = 0.15, about 30 % of the radius (Pereira 2008
//    found thrust at equal power still rising at his largest lip; the old model saturated by 10 % of R).
//
// 3. Diffuser (diffuserRealisation, separationOnset_deg, stallLoss). The diffuser runs from the rotor (just
//    behind the lip, where the rotor sits) to the exit over the duct length, half-angle theta. Its area ratio
//    AR = sigma. While the flow is attached it recovers diffuserRealisation (eta_d) of its ideal pressure
//    rise 1 - 1 / AR^2, so its loss is K_d = (1 - eta_d) (1 - 1 / AR^2) on the rotor-plane head (the usual
//    diffuser-effectiveness definition). Default 0.92: Gibson's conical-diffuser measurements (in Idelchik's
//    Handbook of Hydraulic Resistance; from memory) put the loss of a clean diffuser at its best angle near
//    0.15 of the sudden-expansion loss, eta_d = 1 - 0.15 (AR - 1) / (AR + 1), about 0.97 for AR 1.1 to 1.5;
//    behind a rotor, with swirl and tip vortices in the boundary layer, less. With this value the model's
//    best diffuser on the demo rig sits near 8 degrees half-angle (test/model-duct-trends.test.ts).
//    Separation: beyond the onset half-angle theta_s the wall stalls. The stalled fraction grows linearly to
//    full stall at twice the onset angle (diffuser stall maps, Reneau, Johnston and Kline, J. Basic Eng. 89,
//    1967, put fully developed stall near twice the angle of first appreciable stall; from memory):
//        f = clamp((theta - theta_s) / theta_s, 0, 1).
//    A stalled wall no longer holds the jet: sigma_held = 1 + (sigma - 1)(1 - f), the
//    attached diffuser loss is weighted by 1 - f, the recirculation behind the tips unloads them as a gap does
//    (tipLossWeight rises to 1 at full stall), and the unsteady separated flow dissipates stallLoss times the
//    Borda-Carnot loss (1 - 1 / AR)^2 of the expansion it failed to make (Gibson's conical-diffuser
//    measurements, in Idelchik's Handbook of Hydraulic Resistance, reach the sudden-expansion loss at total
//    angles of 40 to 60 degrees; from memory). Default stallLoss 0.5, because the jet leaves before it mixes
//    out against a wall. So a fully stalled diffuser is worse than a straight duct, not just capped. Default
//    onset 10 degrees: the optimum diffuser half-angle measured on small shrouds (Pereira 2008; Pereira and
//    Chopra, JAHS 54(1), 2009), performance falling beyond it.
//
// 4. Shroud realisation (shroudRealisation). What the explicit terms leave out: an exit flow that is not
//    the uniform jet the balance assumes (hub wake, swirl no stator removes), and lip suction short of the
//    potential-flow value at these Reynolds numbers. A lumped fraction eta_s of the duct's difference from
//    the open rotor, applied like the gap's: r = 1 - eta_s g (1 - r_tight), the lip's share likewise.
//    Default 0.8. Pereira's best shrouds beat the ideal (they also cut the rotor's own non-ideal losses),
//    hence values up to SHROUD_REALISATION_MAX; a ducted sweep pins it.
//
// Left out on purpose: skin friction on the duct wall. For a 0.25 m duct 0.1 m long with a 15 m/s exit jet
// (Re about 1e5, Cf about 0.005 to 0.007 laminar to turbulent flat plate, from memory) the wall drag is about
// 0.06 N, under 1 % of the thrust.
//
// Geometry: everything but the gap is referred to the rotor's stream tube (the disk area and the rotor
// diameter), since the through-flow passes the disk and the gap's annulus carries the leakage: AR = sigma,
// the lip ratio is r_lip / D, the half-angle runs from the rotor diameter to the exit. So the bore enters
// only through the gap (and a wider gap can never buy a gentler diffuser). For the ducts this tool sees the
// bore is within a few percent of the rotor, and the tables' d (inlet diameter) and the rotor's differ by
// as much.
//
// The coefficients are starting values, not measurements: calibrate them against a ducted sweep. The order
// of the terms: sigma_held (separation) and K = lip + diffuser + stall give the tight duct's rotor share and
// power ratio; the gap's g and the realisation eta_s keep their fraction of both. The BEMT takes the result as an ideal-form
// balance (sigmaEffective, lossCoefficientEquivalent) with the same share and ratio: balance factor
// (1 + K' s^2) / s^2 = 4 s_rotor^3 / r^2 and thrust multiplier 1 / s_rotor.
//
// A consequence of the energy balance, not of a coefficient: with P ~ (eta_d + sigma^2 (1 - eta_d + K_lip))
// / sqrt(sigma) (item 3 written out) the best exit-area ratio of an attached diffuser is sigma* =
// sqrt(eta_d / (3 (1 - eta_d + K_lip))), about 1.35 to 1.6 for the defaults and a well-rounded lip (r/d 0.1 to 0.15), 1.15 for a lip of r/d 0.07: a wider
// exit draws more through-flow past the losses than it saves. Ducted fans are built near that.

import type { DuctSpec } from './rig-types.js';
import { interp1 } from './numeric.js';

/** The duct-loss coefficients of the model, by name (the set a ducted sweep is fitted for). */
export interface DuctLossCoefficients {
  /** Tip-gap loss: benefit kept g = 1 / (1 + (tipGapLoss * gap / R)^2). 65 loses half at 1.5 % of R. */
  tipGapLoss: number;
  /** Lip loss: multiplies the handbook inlet-entry loss coefficient (1 = the table). */
  lipLoss: number;
  /** Diffuser realisation: fraction of the ideal attached-diffuser pressure recovery realised. */
  diffuserRealisation: number;
  /** Diffuser half-angle at which the flow starts to separate, degrees (full stall at twice it). */
  separationOnset_deg: number;
  /** Loss of a fully stalled diffuser, as a multiple of the Borda-Carnot loss of its expansion. */
  stallLoss: number;
  /** Fraction of the remaining ideal equal-thrust induced-power saving realised: 0 open rotor, 1 ideal. */
  shroudRealisation: number;
}

export const DEFAULT_DUCT_LOSSES: Readonly<DuctLossCoefficients> = Object.freeze({
  tipGapLoss: 65,
  lipLoss: 1,
  diffuserRealisation: 0.92,
  separationOnset_deg: 10,
  stallLoss: 0.5,
  shroudRealisation: 0.8,
});

/** Largest shroud realisation accepted: above 1 stands for a shroud that beats the ideal (Pereira 2008). */
export const SHROUD_REALISATION_MAX = 1.5;

/** Valid ranges of the coefficients (the fit's bounds too). */
export const DUCT_LOSS_RANGES: Readonly<Record<keyof DuctLossCoefficients, readonly [number, number]>> = Object.freeze({
  tipGapLoss: [0, 1000],
  lipLoss: [0, 5],
  diffuserRealisation: [0, 1],
  separationOnset_deg: [1, 45],
  stallLoss: [0, 5],
  shroudRealisation: [0, SHROUD_REALISATION_MAX],
});

/** Merge overrides over the defaults and check every coefficient against its range. */
export function ductLossCoefficients(over: Partial<DuctLossCoefficients> = {}): DuctLossCoefficients {
  const c: DuctLossCoefficients = { ...DEFAULT_DUCT_LOSSES, ...over };
  for (const key of Object.keys(DUCT_LOSS_RANGES) as (keyof DuctLossCoefficients)[]) {
    const [lo, hi] = DUCT_LOSS_RANGES[key];
    const v = c[key];
    if (!(Number.isFinite(v) && v >= lo && v <= hi)) throw new RangeError(`${key}: must be within ${lo}..${hi} (got ${v})`);
  }
  return c;
}

/** Entry loss coefficient of a rounded inlet against lip radius over inlet (here rotor) diameter (item 2). */
const INLET_R_OVER_D = [0, 0.02, 0.04, 0.06, 0.1, 0.15];
const INLET_K = [0.5, 0.28, 0.24, 0.15, 0.09, 0.04];

export interface DuctCondition {
  /** Geometric exit-area ratio (exit area / rotor disk area). */
  sigma: number;
  /** Diffuser half-angle from the rotor's diameter to the exit over the duct length, degrees. */
  diffuserHalfAngle_deg: number;
  /** Stalled fraction of the diffuser: 0 attached ... 1 fully separated. */
  stallFraction: number;
  /** Exit-area ratio the wall holds (after separation: towards 1, a straight duct), before the gap. */
  sigmaHeld: number;
  /**
   * Exit-area ratio of the ideal-form balance the BEMT takes, with lossCoefficientEquivalent: the same rotor
   * share and induced-power ratio as the duct with its gap (equal to sigmaHeld and lossCoefficient with the
   * gap closed and a shroud realisation of 1).
   */
  sigmaEffective: number;
  lossCoefficientEquivalent: number;
  /** Total-pressure loss coefficient on the rotor-plane dynamic head (lip + diffuser + stall). */
  lossCoefficient: number;
  /** Its parts, on the same head. */
  lipLossCoefficient: number;
  diffuserLossCoefficient: number;
  stallLossCoefficient: number;
  /** Share of the total thrust on the rotor blades, (1 + K sigma_e^2) / (2 sigma_e). */
  rotorThrustShare: number;
  /** Share carried by the duct (inlet-lip suction net of the diffuser wall), 1 - rotorThrustShare. */
  lipThrustShare: number;
  /** The shroud realisation applied (fraction of the ideal saving). */
  shroudRealisation: number;
  /** Tip gap over rotor radius. */
  gapOverRadius: number;
  /** Fraction of the duct's benefit the tip gap leaves. */
  gapRetention: number;
  /** 0 = no tip loss (gap closed, wall attached) ... 1 = full open-rotor Prandtl tip loss. */
  tipLossWeight: number;
  /** Induced power at equal thrust over the ideal open rotor's, by momentum theory with these losses. */
  inducedPowerRatio: number;
  /** The coefficients used. */
  coefficients: DuctLossCoefficients;
}

/** Length over which the diffuser expands, m: the whole duct (the rotor sits just behind the lip). */
export function diffuserLength(duct: Pick<DuctSpec, 'length_m'>): number {
  return duct.length_m;
}

/** Fraction of the duct's benefit kept at a tip gap (item 1). */
export function gapRetention(gapOverRadius: number, c: Pick<DuctLossCoefficients, 'tipGapLoss'> = DEFAULT_DUCT_LOSSES): number {
  const x = c.tipGapLoss * Math.max(0, gapOverRadius);
  return 1 / (1 + x * x);
}

/** Inlet entry loss coefficient on the rotor-plane dynamic head, by lip radius over rotor diameter (item 2). */
export function inletLossCoefficient(lipOverBore: number, c: Pick<DuctLossCoefficients, 'lipLoss'> = DEFAULT_DUCT_LOSSES): number {
  return c.lipLoss * interp1(INLET_R_OVER_D, INLET_K, Math.max(0, lipOverBore));
}

/** Stalled fraction of a diffuser at a half-angle (item 3). */
export function stallFraction(halfAngle_deg: number, c: Pick<DuctLossCoefficients, 'separationOnset_deg'> = DEFAULT_DUCT_LOSSES): number {
  const s = c.separationOnset_deg;
  return Math.min(1, Math.max(0, (halfAngle_deg - s) / s));
}

/** Evaluate every duct loss for a duct around a propeller of the given diameter. */
export function ductCondition(duct: DuctSpec, propellerDiameter_m: number, over: Partial<DuctLossCoefficients> = {}): DuctCondition {
  const c = ductLossCoefficients(over);
  const D = propellerDiameter_m;
  const R = D / 2;
  const sigma = (duct.exit_diameter_m / D) ** 2;
  // Everything but the gap is referred to the rotor's own stream tube (disk area, rotor diameter): the
  // through-flow passes the disk, the annulus of the gap carries the leakage. So the bore enters only
  // through the gap, and a wider gap can never buy a gentler diffuser or a smaller entry loss.
  const halfAngle = (Math.atan2((duct.exit_diameter_m - D) / 2, diffuserLength(duct)) * 180) / Math.PI;
  const expanding = sigma > 1;
  const f = expanding ? stallFraction(halfAngle, c) : 0;
  const AR = expanding ? sigma : 1;
  const sigmaHeld = expanding ? 1 + (sigma - 1) * (1 - f) : sigma;
  const gapOverRadius = Math.max(0, (duct.bore_diameter_m - D) / 2 / R);
  const g = gapRetention(gapOverRadius, c);
  // The duct with a closed gap, losses on the rotor-plane head.
  const lipK = inletLossCoefficient(duct.inlet_lip_radius_m / D, c);
  const diffK = (1 - f) * (1 - c.diffuserRealisation) * (1 - 1 / (AR * AR));
  const stallK = f * c.stallLoss * (1 - 1 / AR) ** 2;
  const K = lipK + diffK + stallK;
  const held2 = sigmaHeld * sigmaHeld;
  const tightShare = (1 + K * held2) / (2 * sigmaHeld);
  const tightRatio = (1 + K * held2) / Math.sqrt(2 * sigmaHeld);
  // The gap and the shroud realisation keep their fractions of the tight duct's difference from the open
  // rotor, in power and in the lip's share (items 1 and 4).
  const kept = g * c.shroudRealisation;
  const share = 1 - kept * (1 - tightShare);
  const ratio = 1 - kept * (1 - tightRatio);
  // The same state as the ideal-form balance the BEMT takes: balance factor 4 s^3 / r^2, multiplier 1 / s.
  const balance = (4 * share ** 3) / (ratio * ratio);
  const sigmaEffective = (ratio * ratio) / (2 * share * share);
  const lossEquivalent = (balance * sigmaEffective * sigmaEffective - 1) / (sigmaEffective * sigmaEffective);
  return {
    sigma,
    diffuserHalfAngle_deg: halfAngle,
    stallFraction: f,
    sigmaHeld,
    sigmaEffective,
    lossCoefficient: K,
    lossCoefficientEquivalent: lossEquivalent,
    lipLossCoefficient: lipK,
    diffuserLossCoefficient: diffK,
    stallLossCoefficient: stallK,
    rotorThrustShare: share,
    lipThrustShare: 1 - share,
    shroudRealisation: c.shroudRealisation,
    gapOverRadius,
    gapRetention: g,
    tipLossWeight: 1 - g * (1 - f),
    inducedPowerRatio: ratio,
    coefficients: c,
  };
}
