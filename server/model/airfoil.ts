// A deliberately simple section polar for the thin, cambered, low-Reynolds-number blades of small
// propellers (chord Reynolds numbers of roughly 30 000 to 200 000).
//
// Assumptions (each a knob in AirfoilPolar):
// - Lift is linear in the angle of attack measured from the zero-lift line, CL = a (alpha - alpha0), with
//   a lift slope below the thin-airfoil 2 pi (about 5 to 6 /rad at these Reynolds numbers, from memory) and
//   a negative zero-lift angle from camber.
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
  inducedDragK: 0.025,
  stallDragFactor: 2.0,
});

/** Profile drag coefficient at a chord Reynolds number. */
export function profileDrag(polar: AirfoilPolar, reynolds: number): number {
  const re = Math.min(polar.reynoldsMax, Math.max(polar.reynoldsMin, reynolds));
  return polar.reynoldsExponent === 0 ? polar.cd0 : polar.cd0 * Math.pow(polar.reynoldsRef / re, polar.reynoldsExponent);
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
