// Actuator-disk momentum theory in hover, for the open rotor and for a rotor in a duct whose exit area is
// sigma times the rotor disk area.
//
// Open rotor (Leishman, Principles of Helicopter Aerodynamics): far-wake velocity is twice the induced
// velocity v at the disk; T = 2 rho A v^2, P = T v = T^1.5 / sqrt(2 rho A).
//
// Ducted rotor (McCormick 1967; Pereira 2008): the wake leaves the duct at the exit with velocity w and
// does not contract further (the duct holds it at ambient pressure at the exit). Mass:  rho A v = rho sigma A w.
// Momentum: T = rho sigma A w^2. Energy: P = 0.5 rho sigma A w^3 = T w / 2 = T^1.5 / sqrt(4 sigma rho A).
// The rotor's pressure jump is 0.5 rho w^2, so T_rotor = 0.5 rho A w^2 = T / (2 sigma); the duct carries the
// rest as suction on its inlet lip. At sigma = 0.5 every expression reduces to the open rotor, which is the
// far-wake contraction of a free rotor.
//
// All functions take SI units: thrust N, density kg/m^3, area m^2, power W, velocity m/s.

function requirePositive(name: string, x: number): void {
  if (!(Number.isFinite(x) && x > 0)) throw new RangeError(`${name}: must be a positive finite number`);
}
function requireNonNegative(name: string, x: number): void {
  if (!(Number.isFinite(x) && x >= 0)) throw new RangeError(`${name}: must be a non-negative finite number`);
}

/** Disk area of a rotor of diameter D, m^2. */
export function diskArea(diameter_m: number): number {
  requirePositive('diameter_m', diameter_m);
  return (Math.PI * diameter_m * diameter_m) / 4;
}

/** Ideal (induced) power of an open rotor in hover, W. */
export function idealPowerOpen(thrust_N: number, density: number, area_m2: number): number {
  requireNonNegative('thrust_N', thrust_N);
  requirePositive('density', density);
  requirePositive('area_m2', area_m2);
  return Math.pow(thrust_N, 1.5) / Math.sqrt(2 * density * area_m2);
}

/** Ideal power of a ducted rotor with exit-area ratio sigma, W. */
export function idealPowerDucted(thrust_N: number, density: number, area_m2: number, sigma: number): number {
  requireNonNegative('thrust_N', thrust_N);
  requirePositive('density', density);
  requirePositive('area_m2', area_m2);
  requirePositive('sigma', sigma);
  return Math.pow(thrust_N, 1.5) / Math.sqrt(4 * sigma * density * area_m2);
}

/** Thrust an ideal open rotor makes from a given power, N (inverse of idealPowerOpen). */
export function idealThrustOpen(power_W: number, density: number, area_m2: number): number {
  requireNonNegative('power_W', power_W);
  return Math.pow(power_W * Math.sqrt(2 * density * area_m2), 2 / 3);
}

/** Thrust an ideal ducted rotor makes from a given power, N (inverse of idealPowerDucted). */
export function idealThrustDucted(power_W: number, density: number, area_m2: number, sigma: number): number {
  requireNonNegative('power_W', power_W);
  requirePositive('sigma', sigma);
  return Math.pow(power_W * Math.sqrt(4 * sigma * density * area_m2), 2 / 3);
}

/** Fraction of the total thrust carried by the rotor inside a duct: 1 / (2 sigma). */
export function rotorThrustShare(sigma: number): number {
  requirePositive('sigma', sigma);
  return 1 / (2 * sigma);
}

/** Open rotor: induced velocity at the disk and far-wake velocity, m/s. */
export function openVelocities(thrust_N: number, density: number, area_m2: number): { disk: number; wake: number } {
  requireNonNegative('thrust_N', thrust_N);
  requirePositive('density', density);
  requirePositive('area_m2', area_m2);
  const v = Math.sqrt(thrust_N / (2 * density * area_m2));
  return { disk: v, wake: 2 * v };
}

/** Ducted rotor: velocity through the rotor disk and at the duct exit, m/s. */
export function ductedVelocities(
  thrust_N: number,
  density: number,
  area_m2: number,
  sigma: number,
): { disk: number; exit: number } {
  requireNonNegative('thrust_N', thrust_N);
  requirePositive('density', density);
  requirePositive('area_m2', area_m2);
  requirePositive('sigma', sigma);
  const w = Math.sqrt(thrust_N / (density * sigma * area_m2));
  return { disk: sigma * w, exit: w };
}

/** At equal thrust, ideal ducted power over ideal open power: 1 / sqrt(2 sigma). */
export function idealPowerRatio(sigma: number): number {
  requirePositive('sigma', sigma);
  return 1 / Math.sqrt(2 * sigma);
}

/** At equal power, ideal ducted thrust over ideal open thrust: (2 sigma)^(1/3). */
export function idealThrustRatio(sigma: number): number {
  requirePositive('sigma', sigma);
  return Math.cbrt(2 * sigma);
}

/** Figure of merit, open form: ideal open power over actual power. */
export function figureOfMeritOpen(thrust_N: number, power_W: number, density: number, area_m2: number): number {
  requirePositive('power_W', power_W);
  return idealPowerOpen(thrust_N, density, area_m2) / power_W;
}

/**
 * Figure of merit, shrouded form: ideal ducted power (at the duct's sigma) over actual power. Applied to a
 * ducted rotor this stays below 1, where the open form can exceed it.
 */
export function figureOfMeritShrouded(
  thrust_N: number,
  power_W: number,
  density: number,
  area_m2: number,
  sigma: number,
): number {
  requirePositive('power_W', power_W);
  return idealPowerDucted(thrust_N, density, area_m2, sigma) / power_W;
}

/** Open-form figure of merit from propeller coefficients: FM = sqrt(2 / pi) CT^1.5 / CP. */
export function figureOfMeritFromCoefficients(ct: number, cp: number): number {
  requireNonNegative('ct', ct);
  requirePositive('cp', cp);
  return (Math.sqrt(2 / Math.PI) * Math.pow(ct, 1.5)) / cp;
}

/** Propeller thrust coefficient CT = T / (rho n^2 D^4), n in rev/s. */
export function thrustCoefficient(thrust_N: number, density: number, revPerSec: number, diameter_m: number): number {
  return thrust_N / (density * revPerSec * revPerSec * Math.pow(diameter_m, 4));
}

/** Propeller power coefficient CP = P / (rho n^3 D^5), n in rev/s. */
export function powerCoefficient(power_W: number, density: number, revPerSec: number, diameter_m: number): number {
  return power_W / (density * Math.pow(revPerSec, 3) * Math.pow(diameter_m, 5));
}
