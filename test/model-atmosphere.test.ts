import { describe, expect, it } from 'vitest';
import { airFromDensity, dynamicViscosity, humidAirDensity, isaAtmosphere, saturationVapourPressure } from '../server/model/index.js';

describe('ISA troposphere', () => {
  // Published ISA table densities (ISO 2533:1975; U.S. Standard Atmosphere 1976), via ../shared/CHECKS.md.
  const table: [number, number][] = [
    [0, 1.225],
    [1000, 1.1117],
    [2000, 1.0066],
    [3000, 0.9093],
  ];
  for (const [h, rho] of table) {
    it(`density at ${h} m matches the ISA table within 2e-4`, () => {
      expect(Math.abs(isaAtmosphere(h).density_kg_m3 - rho)).toBeLessThan(2e-4);
    });
  }

  it('has the sea-level temperature and pressure of the standard', () => {
    // ISO 2533:1975 sea-level values.
    const s = isaAtmosphere(0);
    expect(s.temperature_K).toBeCloseTo(288.15, 10);
    expect(s.pressure_Pa).toBeCloseTo(101325, 6);
    // Lapse rate 6.5 K/km (ISO 2533:1975).
    expect(isaAtmosphere(3000).temperature_K).toBeCloseTo(288.15 - 19.5, 10);
  });

  it('refuses altitudes outside the troposphere', () => {
    expect(() => isaAtmosphere(12000)).toThrow(/altitude_m/);
    expect(() => isaAtmosphere(Number.NaN)).toThrow(/altitude_m/);
  });
});

describe('humid air', () => {
  it('20 degC, 101325 Pa, 50 % RH is about 1.199 kg/m^3', () => {
    // Ideal-gas mixture with Magnus saturation pressure, value from ../shared/CHECKS.md (derived there).
    expect(humidAirDensity(20, 101325, 0.5)).toBeCloseTo(1.199, 3);
  });

  it('Magnus saturation pressure at 20 degC is about 2338 Pa', () => {
    // Magnus form es = 6.1078 hPa * 10^(7.5 t / (t + 237.3)) (../shared/CHECKS.md); 23.38 hPa is the
    // commonly tabulated value at 20 degC (from memory).
    expect(saturationVapourPressure(20)).toBeGreaterThan(2330);
    expect(saturationVapourPressure(20)).toBeLessThan(2345);
  });

  it('moist air is lighter than dry air at the same temperature and pressure', () => {
    // Water vapour (18 g/mol) is lighter than dry air (29 g/mol): textbook physics.
    const dry = humidAirDensity(25, 95000, 0);
    expect(humidAirDensity(25, 95000, 0.9)).toBeLessThan(dry);
    expect(dry).toBeCloseTo(95000 / (287.058 * 298.15), 10);
  });

  it('refuses a relative humidity given in percent', () => {
    expect(() => humidAirDensity(20, 101325, 50)).toThrow(/relativeHumidity/);
  });
});

describe('viscosity', () => {
  it('Sutherland gives 1.789e-5 Pa s at 288.15 K', () => {
    // U.S. Standard Atmosphere 1976 sea-level viscosity 1.7894e-5 Pa s.
    expect(dynamicViscosity(288.15)).toBeCloseTo(1.7894e-5, 8);
    expect(airFromDensity(1.1).viscosity_Pa_s).toBeCloseTo(1.7894e-5, 8);
  });
});
