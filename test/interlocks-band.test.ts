// The prediction-deviation rule judges against the prediction's band: the same 18 % deviation warns against
// a narrow (calibrated) band and passes inside a wide one; a trip never fires inside the band, whatever the
// trip limit; a prediction without a band keeps the fixed percentage.

import { describe, expect, it } from 'vitest';
import { BAND_K } from '../server/model/band.js';
import { DEFAULT_LIMITS } from '../server/interlocks/limits.js';
import { LIVE_GPW_SPREAD_PCT, RULES, type RuleContext } from '../server/interlocks/rules.js';

const rule = RULES.find((r) => r.name === 'prediction_deviation')!;
const ctx = (over: Partial<RuleContext>): RuleContext => ({
  limits: { ...DEFAULT_LIMITS },
  now: 0,
  mayTurn: true,
  output: 0.5,
  outputZeroSince: null,
  outputSteadyForMs: 5000,
  diameterM: 0.254,
  speedOfSound: 340,
  cells: 4,
  thrustDetrendedStd: null,
  gpwMeasured: 8.2,
  gpwPredicted: 10,
  gpwBandPct: null,
  lastFrameAt: 0,
  lastThrustAt: 0,
  badLinesLastSecond: 0,
  ...over,
});
const judge = (c: RuleContext) => rule.sample!({} as never, c);

describe('prediction_deviation against the band', () => {
  it('warns outside a narrow band and passes inside a wide one', () => {
    expect(judge(ctx({ gpwBandPct: 8 }))).toMatchObject({ level: 'warn', detail: expect.stringMatching(/outside its band of ±8\.5 %/) });
    expect(judge(ctx({ gpwBandPct: 20 }))).toBe('ok');
  });

  it('adds the live figure\'s own spread, so a very narrow band does not warn on noise', () => {
    // 2 % off, band 1 %: inside hypot(1, 3) = 3.2 %.
    expect(judge(ctx({ gpwMeasured: 9.8, gpwBandPct: 1 }))).toBe('ok');
    expect(LIVE_GPW_SPREAD_PCT).toBeGreaterThan(2);
  });

  it('never trips inside the band, and trips beyond both the band and the trip limit', () => {
    const limits = { ...DEFAULT_LIMITS, deviation_trip_pct: 10 };
    expect(judge(ctx({ limits, gpwMeasured: 7.8, gpwBandPct: 30 }))).toBe('ok');
    expect(judge(ctx({ limits, gpwMeasured: 6, gpwBandPct: 30 }))).toMatchObject({ level: 'trip', limit: Math.hypot(30, LIVE_GPW_SPREAD_PCT) });
    expect(judge(ctx({ limits, gpwMeasured: 5, gpwBandPct: 5 }))).toMatchObject({ level: 'trip', limit: 10 });
  });

  it('without a band keeps the fixed warning percentage', () => {
    expect(judge(ctx({ gpwMeasured: 8.2 }))).toMatchObject({ level: 'warn', limit: DEFAULT_LIMITS.deviation_warn_pct });
    expect(judge(ctx({ gpwMeasured: 9 }))).toBe('ok');
    expect(BAND_K).toBe(2);
  });
});
