// The air the bench runs in, from what the operator gives: nothing (standard sea level), an altitude (the
// standard atmosphere), a measured temperature, pressure and humidity (humid-air density), or a density.
// One description travels with the prediction, the interlocks (speed of sound) and every recorded session.

import { dynamicViscosity, humidAirDensity, isaAtmosphere, type AirState } from '../model/atmosphere.js';

export interface AtmosphereInput {
  altitude_m?: number;
  temperature_C?: number;
  pressure_Pa?: number;
  /** Relative humidity, percent (0..100). */
  humidity_pct?: number;
  density_kg_m3?: number;
}

export interface Atmosphere {
  air: AirState;
  temperature_K: number;
  density_kg_m3: number;
  pressure_Pa: number | null;
  relative_humidity: number | null;
  /** For people: where the density came from. */
  source: string;
}

export class AtmosphereError extends Error {
  override name = 'AtmosphereError';
}

export function resolveAtmosphere(a: AtmosphereInput = {}): Atmosphere {
  const measured = a.temperature_C !== undefined || a.pressure_Pa !== undefined || a.humidity_pct !== undefined;
  const given = [a.altitude_m !== undefined, measured, a.density_kg_m3 !== undefined].filter(Boolean).length;
  if (given > 1) throw new AtmosphereError('give one of: an altitude, measured temperature and pressure (and humidity), or a density');
  if (a.density_kg_m3 !== undefined) {
    if (!(a.density_kg_m3 >= 0.3 && a.density_kg_m3 <= 1.6)) throw new AtmosphereError(`density ${a.density_kg_m3} kg/m^3 is outside 0.3..1.6`);
    const T = 288.15;
    return { air: { density_kg_m3: a.density_kg_m3, viscosity_Pa_s: dynamicViscosity(T) }, temperature_K: T, density_kg_m3: a.density_kg_m3, pressure_Pa: null, relative_humidity: null, source: 'given density' };
  }
  if (measured) {
    if (a.temperature_C === undefined || a.pressure_Pa === undefined) throw new AtmosphereError('measured air needs both the temperature and the pressure');
    if (!(a.temperature_C >= -40 && a.temperature_C <= 60)) throw new AtmosphereError(`air temperature ${a.temperature_C} degC is outside -40..60`);
    if (!(a.pressure_Pa >= 50_000 && a.pressure_Pa <= 110_000)) throw new AtmosphereError(`air pressure ${a.pressure_Pa} Pa is outside 50000..110000`);
    const rh = a.humidity_pct ?? 0;
    if (!(rh >= 0 && rh <= 100)) throw new AtmosphereError(`humidity ${rh} % is outside 0..100`);
    const rho = humidAirDensity(a.temperature_C, a.pressure_Pa, rh / 100);
    const T = a.temperature_C + 273.15;
    return {
      air: { density_kg_m3: rho, viscosity_Pa_s: dynamicViscosity(T) },
      temperature_K: T,
      density_kg_m3: rho,
      pressure_Pa: a.pressure_Pa,
      relative_humidity: rh / 100,
      source: `measured ${a.temperature_C} degC, ${a.pressure_Pa} Pa, ${rh} % RH`,
    };
  }
  const h = a.altitude_m ?? 0;
  if (!(h >= -500 && h <= 6000)) throw new AtmosphereError(`altitude ${h} m is outside -500..6000`);
  const isa = isaAtmosphere(h);
  return {
    air: { density_kg_m3: isa.density_kg_m3, viscosity_Pa_s: dynamicViscosity(isa.temperature_K) },
    temperature_K: isa.temperature_K,
    density_kg_m3: isa.density_kg_m3,
    pressure_Pa: isa.pressure_Pa,
    relative_humidity: null,
    source: `standard atmosphere at ${h} m`,
  };
}
