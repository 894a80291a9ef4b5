// Air properties for the model: the International Standard Atmosphere troposphere (ISO 2533:1975,
// U.S. Standard Atmosphere 1976), humid-air density from the ideal-gas mixture of dry air and water vapour
// with a Magnus-form saturation pressure, and Sutherland's law for viscosity (also US Std Atm 1976).
// Bench work happens from sea level to high plateaus, so only the troposphere is modelled; outside it the
// functions refuse rather than extrapolate.

import { G0 } from './constants.js';

/** Specific gas constant of dry air used by the standard atmosphere, J/(kg K). */
export const R_AIR_ISA = 287.05287;
/** Gas constants for the humid-air mixture, J/(kg K). */
export const R_DRY = 287.058;
export const R_VAPOUR = 461.495;

const T0 = 288.15;
const P0 = 101325;
const LAPSE = 0.0065;
const TROPOPAUSE_M = 11000;
const LOWEST_M = -1000;
/** Effective Earth radius of the geopotential conversion, m (U.S. Standard Atmosphere 1976). */
export const EARTH_RADIUS_GEOPOTENTIAL_M = 6356766;

export interface AtmosphereState {
  temperature_K: number;
  pressure_Pa: number;
  density_kg_m3: number;
}

/** The air the rotor works in: what the aerodynamic model needs and nothing more. */
export interface AirState {
  density_kg_m3: number;
  /** Dynamic viscosity, Pa s; sets the blade Reynolds number and therefore profile drag. */
  viscosity_Pa_s: number;
}

function requireFinite(name: string, value: number): void {
  if (!Number.isFinite(value)) throw new RangeError(`${name}: must be a finite number`);
}

/**
 * Geopotential height H of a geometric altitude z, m: H = r0 z / (r0 + z) (U.S. Standard Atmosphere 1976).
 * The standard's temperature profile is linear in H, not z; gravity falls with z, so the same pressure drop
 * takes a little more geometric height. At 11 km the two differ by 19 m, 0.24 % in density.
 */
export function geopotentialHeight(altitude_m: number): number {
  return (EARTH_RADIUS_GEOPOTENTIAL_M * altitude_m) / (EARTH_RADIUS_GEOPOTENTIAL_M + altitude_m);
}

/** ISA troposphere at a geometric altitude (metres above mean sea level, -1000..11000). */
export function isaAtmosphere(altitude_m: number): AtmosphereState {
  requireFinite('altitude_m', altitude_m);
  if (altitude_m < LOWEST_M || altitude_m > TROPOPAUSE_M) {
    throw new RangeError(`altitude_m: must be within ${LOWEST_M}..${TROPOPAUSE_M} m (troposphere only)`);
  }
  // The geometric 11 km limit is geopotential 10,981 m: still inside the troposphere (H < 11,000 m).
  const T = T0 - LAPSE * geopotentialHeight(altitude_m);
  const p = P0 * Math.pow(T / T0, G0 / (R_AIR_ISA * LAPSE));
  return { temperature_K: T, pressure_Pa: p, density_kg_m3: p / (R_AIR_ISA * T) };
}

/** Saturation vapour pressure over water, Pa, Magnus form es = 6.1078 hPa * 10^(7.5 t / (t + 237.3)). */
export function saturationVapourPressure(temperature_C: number): number {
  requireFinite('temperature_C', temperature_C);
  if (temperature_C <= -60 || temperature_C >= 80) {
    throw new RangeError('temperature_C: must be within -60..80 degC for the Magnus form');
  }
  return 610.78 * Math.pow(10, (7.5 * temperature_C) / (temperature_C + 237.3));
}

/**
 * Density of humid air, kg/m^3: rho = (p - pv) / (Rd T) + pv / (Rv T), pv = RH * es(t).
 * relativeHumidity is a fraction 0..1 (0.5 for 50 %).
 */
export function humidAirDensity(temperature_C: number, pressure_Pa: number, relativeHumidity: number): number {
  requireFinite('pressure_Pa', pressure_Pa);
  requireFinite('relativeHumidity', relativeHumidity);
  if (pressure_Pa <= 0) throw new RangeError('pressure_Pa: must be positive');
  if (relativeHumidity < 0 || relativeHumidity > 1) {
    throw new RangeError('relativeHumidity: must be a fraction within 0..1');
  }
  const T = temperature_C + 273.15;
  const pv = relativeHumidity * saturationVapourPressure(temperature_C);
  return (pressure_Pa - pv) / (R_DRY * T) + pv / (R_VAPOUR * T);
}

/** Dynamic viscosity of air by Sutherland's law (US Std Atm 1976 constants), Pa s. */
export function dynamicViscosity(temperature_K: number): number {
  requireFinite('temperature_K', temperature_K);
  if (temperature_K <= 0) throw new RangeError('temperature_K: must be positive');
  return (1.458e-6 * Math.pow(temperature_K, 1.5)) / (temperature_K + 110.4);
}

/** AirState for the ISA at an altitude. */
export function isaAir(altitude_m: number): AirState {
  const s = isaAtmosphere(altitude_m);
  return { density_kg_m3: s.density_kg_m3, viscosity_Pa_s: dynamicViscosity(s.temperature_K) };
}

/**
 * AirState for a given density. Viscosity depends on temperature only; when the temperature is unknown the
 * ISA sea-level value is used (the Reynolds-number effect on drag is weak, so this costs little).
 */
export function airFromDensity(density_kg_m3: number, temperature_K = T0): AirState {
  requireFinite('density_kg_m3', density_kg_m3);
  if (density_kg_m3 <= 0 || density_kg_m3 > 2) {
    throw new RangeError('density_kg_m3: must be within 0..2 kg/m^3');
  }
  return { density_kg_m3, viscosity_Pa_s: dynamicViscosity(temperature_K) };
}

/** ISA sea-level air. */
export const SEA_LEVEL_AIR: AirState = Object.freeze(isaAir(0));
