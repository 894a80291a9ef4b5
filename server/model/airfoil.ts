// A deliberately simple section polar for the thin, cambered, low-Reynolds-number blades of small
// propellers (chord Reynolds numbers of roughly 30 000 to 200 000).
//
// Assumptions (each a knob in AirfoilPolar):
// - Lift is linear in the angle of attack measured from the zero-lift line, CL = a (alpha - alpha0), with
//   a lift slope below the thin-airfoil 2 pi (about 5 to 6 /rad at these Reynolds numbers, from memory) and
//   a negative zero-lift angle from camber.
// - Lift depends on the Reynolds number: at chord Reynolds numbers of 1e4 to 1e5 a laminar separation bubble
//   thickens the effective section and lowers both the lift slope and the maximum lift, and both recover as
//   Re grows (Lissaman, Low-Reynolds-number airfoils, Annu. Rev. Fluid Mech. 15, 1983; Selig's low-Reynolds
//   airfoil data; from memory). Modelled as a factor (Re / reynoldsRef)^liftReynoldsExponent on the lift
//   slope and on clMax, Re clamped as for the drag. Exponent 0.1: the lift slope rises 7 % per doubling of
//   Re. This is what lets a propeller's static CT rise with rpm, as measured on small two-blade propellers
//   (Brandt and Selig, Propeller performance data at low Reynolds numbers, AIAA 2011-1255).
// - Stall is a cap: CL never exceeds clMax (nor falls below -clMax). Past the stall angle the drag grows
//   with the square of the excess angle (stallDragFactor), which is enough to make a stalled blade root cost
//   power without pretending to model post-stall flow.
// - Drag is a parabola CD = CD0(Re) + k CL^2. Profile drag falls with Reynolds number as
//   CD0(Re) = cd0 (reynoldsRef / Re)^reynoldsExponent, the exponent 0.5 being the laminar skin-friction
//   trend; Re is clamped to reynoldsMin..reynoldsMax so a slow blade root or a very fast tip cannot drive
//   the drag to absurd values.
// - No compressibility (tip Mach numbers of bench propellers stay below about 0.5) and no rotational
//   (stall-delay) effects at the root.

export interface AirfoilPolar {
  liftSlope_perRad: number;
  zeroLiftAngle_rad: number;
  clMax: number;
  /** Profile drag coefficient at reynoldsRef. */
  cd0: number;
  reynoldsRef: number;
  reynoldsExponent: number;
  reynoldsMin: number;
  reynoldsMax: number;
  /** Lift slope and clMax scale as (Re / reynoldsRef)^liftReynoldsExponent (0: no Reynolds effect on lift). */
  liftReynoldsExponent: number;
  /** Lift-dependent drag factor k in CD = CD0 + k CL^2. */
  inducedDragK: number;
  stallDragFactor: number;
}

export const DEFAULT_POLAR: Readonly<AirfoilPolar> = Object.freeze({
  liftSlope_perRad: 5.7,
  zeroLiftAngle_rad: (-4 * Math.PI) / 180,
  clMax: 1.15,
  cd0: 0.022,
  reynoldsRef: 100000,
  reynoldsExponent: 0.5,
  reynoldsMin: 20000,
  reynoldsMax: 1000000,
  liftReynoldsExponent: 0.1,
  inducedDragK: 0.025,
  stallDragFactor: 2.0,
});

/** Profile drag coefficient at a chord Reynolds number. */
export function profileDrag(polar: AirfoilPolar, reynolds: number): number {
  const re = Math.min(polar.reynoldsMax, Math.max(polar.reynoldsMin, reynolds));
  return polar.reynoldsExponent === 0 ? polar.cd0 : polar.cd0 * Math.pow(polar.reynoldsRef / re, polar.reynoldsExponent);
}

/** Factor on the lift slope and clMax at a chord Reynolds number (1 at reynoldsRef). */
export function liftReynoldsFactor(polar: AirfoilPolar, reynolds: number): number {
  if (polar.liftReynoldsExponent === 0) return 1;
  const re = Math.min(polar.reynoldsMax, Math.max(polar.reynoldsMin, reynolds));
  return Math.pow(re / polar.reynoldsRef, polar.liftReynoldsExponent);
}

/** Lift coefficient at an angle of attack (rad, from the chord line). */
export function liftCoefficient(polar: AirfoilPolar, alpha_rad: number): number {
  const cl = polar.liftSlope_perRad * (alpha_rad - polar.zeroLiftAngle_rad);
  return Math.max(-polar.clMax, Math.min(polar.clMax, cl));
}

/** The Reynolds-independent part of the drag: k CL^2 plus the post-stall penalty. */
export function liftDependentDrag(polar: AirfoilPolar, alpha_rad: number): number {
  const cl = liftCoefficient(polar, alpha_rad);
  const alphaStall = polar.clMax / polar.liftSlope_perRad;
  const excess = Math.abs(alpha_rad - polar.zeroLiftAngle_rad) - alphaStall;
  return polar.inducedDragK * cl * cl + (excess > 0 ? polar.stallDragFactor * excess * excess : 0);
}
