// The operator's description of the air, resolved to one density for the prediction, the interlocks and
// the session record.

import { describe, expect, it } from 'vitest';
import { AtmosphereError, resolveAtmosphere } from '../server/bench/atmosphere.js';

describe('bench atmosphere', () => {
  it('defaults to standard sea level: 1.2250 kg/m^3, 288.15 K', () => {
    // ISA sea level (ISO 2533:1975; U.S. Standard Atmosphere 1976)
    const a = resolveAtmosphere();
    expect(a.density_kg_m3).toBeCloseTo(1.225, 3);
    expect(a.temperature_K).toBeCloseTo(288.15, 6);
    expect(a.source).toMatch(/standard atmosphere at 0 m/);
  });
  it('an altitude gives the standard-atmosphere table density', () => {
    // ISA table: 1000 m 1.1117 kg/m^3, 2000 m 1.0066 kg/m^3 (published ISA tables, via CHECKS.md)
    expect(resolveAtmosphere({ altitude_m: 1000 }).density_kg_m3).toBeCloseTo(1.1117, 3);
    expect(resolveAtmosphere({ altitude_m: 2000 }).density_kg_m3).toBeCloseTo(1.0066, 3);
  });
  it('measured air gives humid-air density', () => {
    // 20 degC, 101325 Pa, 50 % RH: about 1.199 kg/m^3 (Magnus saturation pressure; CHECKS.md)
    const a = resolveAtmosphere({ temperature_C: 20, pressure_Pa: 101325, humidity_pct: 50 });
    expect(a.density_kg_m3).toBeCloseTo(1.199, 3);
    expect(a.temperature_K).toBeCloseTo(293.15, 6);
  });
  it('refuses mixed or half descriptions and impossible values, never guessing', () => {
    expect(() => resolveAtmosphere({ altitude_m: 500, density_kg_m3: 1.2 })).toThrow(AtmosphereError);
    expect(() => resolveAtmosphere({ temperature_C: 20 })).toThrow(/both the temperature and the pressure/);
    expect(() => resolveAtmosphere({ temperature_C: 20, pressure_Pa: 2000 })).toThrow(/pressure/);
    expect(() => resolveAtmosphere({ density_kg_m3: 12 })).toThrow(/density/);
    expect(() => resolveAtmosphere({ altitude_m: 20000 })).toThrow(/altitude/);
  });
});
