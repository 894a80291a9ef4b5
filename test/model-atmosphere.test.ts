import { describe, expect, it } from 'vitest';
import { airFromDensity, dynamicViscosity, geopotentialHeight, humidAirDensity, isaAtmosphere, saturationVapourPressure } from '../server/model/index.js';

describe('ISA troposphere', () => {
  // Geometric altitude z (m) -> temperature K, pressure Pa, density kg/m^3 of the U.S. Standard Atmosphere
  // 1976, as computed by the general-purpose Python library fluids (fluids.atmosphere.ATMOSPHERE_1976,
  // version 1.x from the Python registry, run once by hand; it implements the 1976 standard with the
  // geometric-to-geopotential conversion). The 5-digit densities agree with the published 1976 tables
  // (0 m 1.2250, 1000 m 1.1117, 2000 m 1.0066, 3000 m 0.9093, 11000 m 0.3648; ../shared/CHECKS.md).
  const table: [number, number, number, number][] = [
    [-1000, 294.6510226934094, 113931.16143967435, 1.347014816673514],
    [0, 288.15, 101325.0, 1.2249991558877125],
    [500, 284.9002556130261, 95461.28949694506, 1.1672725123243854],
    [1000, 281.6510223716947, 89876.28518727123, 1.1116589850558272],
    [2000, 275.15408884365297, 79501.42464166698, 1.0065532169786469],
    [3000, 268.65919845164115, 70121.16223642998, 0.9092539408451479],
    [5000, 255.67554322180348, 54048.28614576141, 0.7364284207799743],
    [8000, 236.21535982626853, 35651.628335824986, 0.5257860233001964],
    [11000, 216.77351270445553, 22699.960739233353, 0.3648015641865601],
  ];
  const rel = (a: number, b: number): number => Math.abs(a - b) / b;
  for (const [z, T, p, rho] of table) {
    it(`temperature, pressure and density at ${z} m geometric match the 1976 standard within 0.01 %`, () => {
      const s = isaAtmosphere(z);
      expect(rel(s.temperature_K, T)).toBeLessThan(1e-4);
      expect(rel(s.pressure_Pa, p)).toBeLessThan(1e-4);
      expect(rel(s.density_kg_m3, rho)).toBeLessThan(1e-4);
    });
  }

  it('converts geometric to geopotential height (H = r0 z / (r0 + z), r0 = 6,356,766 m)', () => {
    // U.S. Standard Atmosphere 1976: 11,000 m geometric is 10,981 m geopotential (fluids gives 10980.998).
    expect(geopotentialHeight(11000)).toBeCloseTo(10980.998, 2);
    expect(geopotentialHeight(0)).toBe(0);
    expect(geopotentialHeight(-1000)).toBeCloseTo(-1000.157, 2);
    // Taking the geometric altitude as geopotential (what the model did before) puts the density at 11 km
    // 0.24 % high (../shared/CHECKS.md); the conversion is what brings it within 0.01 %.
    const T = 288.15 - 0.0065 * 11000;
    const p = 101325 * Math.pow(T / 288.15, 9.80665 / (287.05287 * 0.0065));
    const unconverted = p / (287.05287 * T);
    expect(rel(unconverted, 0.3648015641865601)).toBeGreaterThan(2e-3);
  });

  it('has the sea-level temperature and pressure of the standard', () => {
    // ISO 2533:1975 sea-level values.
    const s = isaAtmosphere(0);
    expect(s.temperature_K).toBeCloseTo(288.15, 10);
    expect(s.pressure_Pa).toBeCloseTo(101325, 6);
    // Lapse rate 6.5 K/km (ISO 2533:1975).
    expect(isaAtmosphere(3000).temperature_K).toBeCloseTo(288.15 - 0.0065 * geopotentialHeight(3000), 10);
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
