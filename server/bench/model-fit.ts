// The model calibrated on an open sweep: once a sequence on an open rig (no duct) completes with enough
// settled points, the model's free factors are fitted to them (server/model/calibrate.ts), and the prediction
// uses the fitted values, with the band from the fit's covariance (server/model/band.ts), for that propeller
// and motor: a duct mounted later on the same propeller and motor is predicted from the same fit. A fit the
// points cannot pin down (degenerate, not converged) is reported and not used.
//
// With a data folder the fits are kept in it (model-fits.json, written to a temporary file and renamed, so a
// crash leaves the old file or the new one), one per propeller and motor, and the daemon starts on them.

import { readFileSync, renameSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { calibrate, CalibrationError, type CalibrationResult, type FitParameter } from '../model/calibrate.js';
import type { MeasuredPoint, ModelOptions } from '../model/predict.js';
import type { RigSpec } from '../model/rig-types.js';
import type { OperatingPoint } from './operating-point.js';

/**
 * What an open staircase with thrust, power and rpm separates (checked per fit: degenerate fits are refused).
 * The profile-drag factor is left at 1: over a staircase's speeds it trades almost one for one with the motor's
 * no-load current (both add torque or current that grows slowly with speed), and the fit drives it to a bound.
 */
const PARAMETERS: FitParameter[] = ['liftFactor', 'inducedFactor', 'escThrottleOffset', 'motorNoLoadCurrent'];
/** With fewer points or no rpm, the aerodynamic factors alone. */
const FEWER: FitParameter[] = ['liftFactor', 'cd0Factor', 'inducedFactor'];
/** Fewest settled points of a sweep worth a fit. */
export const MIN_FIT_POINTS = 4;

export interface ModelFitView {
  session: number | null;
  at: number;
  points: number;
  parameters: Partial<Record<FitParameter, number>>;
  uncertainties: Partial<Record<FitParameter, number>>;
  rms_percent: { thrust: number; power: number | null; rpm: number | null };
  /** Propeller and motor the fit holds for. */
  for: string;
}

interface Held {
  key: string;
  result: CalibrationResult;
  view: ModelFitView;
}

/** The parts a fit is valid for: the propeller and the motor (a duct, ESC or supply change keeps it). */
function partsKey(rig: RigSpec): string {
  return JSON.stringify([rig.propeller, rig.motor]);
}

/** A sweep's operating points as the fit takes them: settled, with thrust, power and voltage. */
export function measuredPoints(points: readonly OperatingPoint[]): MeasuredPoint[] {
  const out: MeasuredPoint[] = [];
  for (const p of points) {
    const v = p.channels.voltage?.mean;
    const t = p.channels.thrust?.mean;
    const w = p.channels.power?.mean;
    if (!p.settled || v === undefined || t === undefined || w === undefined || !(t > 0) || !(w > 0) || !(p.throttle > 0)) continue;
    const rpm = p.channels.rpm?.mean;
    out.push({ throttle: p.throttle, busVoltage_V: v, thrust_N: t, power_W: w, ...(rpm !== undefined && rpm > 0 ? { rpm } : {}) });
  }
  return out;
}

/** File of the kept fits in the data folder. */
export const MODEL_FITS_FILE = 'model-fits.json';

export class ModelFitKeeper {
  private readonly held = new Map<string, Held>();

  /**
   * `dir`: the data folder to keep the fits in, or null (kept in memory only). An unreadable file is reported
   * through `log` and left alone until the next fit replaces it.
   */
  constructor(
    private readonly dir: string | null = null,
    private readonly log: (line: string) => void = () => {},
  ) {
    if (!dir) return;
    let text: string;
    try {
      text = readFileSync(join(dir, MODEL_FITS_FILE), 'utf8');
    } catch {
      return; // none kept yet
    }
    try {
      const doc = JSON.parse(text) as { version?: unknown; fits?: unknown };
      if (doc.version !== 1 || !Array.isArray(doc.fits)) throw new Error('not a version 1 file of model fits');
      for (const h of doc.fits as Held[]) {
        if (typeof h?.key !== 'string' || !h.result || !Array.isArray(h.result.names) || !h.view) throw new Error('a fit without its key, result or view');
        this.held.set(h.key, h);
      }
    } catch (err) {
      log(`ductbench: ${join(dir, MODEL_FITS_FILE)} left unused: ${(err as Error).message}`);
    }
  }

  /** The fit for this rig's propeller and motor, or null. */
  forRig(rig: RigSpec | null): CalibrationResult | null {
    return rig ? (this.held.get(partsKey(rig))?.result ?? null) : null;
  }

  view(rig: RigSpec | null): ModelFitView | null {
    return rig ? (this.held.get(partsKey(rig))?.view ?? null) : null;
  }

  /**
   * Fits the model to an open sweep's points. Throws CalibrationError with the reason when the rig is ducted,
   * the points are too few, or the fit cannot pin the parameters down; nothing is changed then.
   */
  fitOpenSweep(rig: RigSpec, points: readonly OperatingPoint[], model: ModelOptions, session: number | null): ModelFitView {
    if (rig.duct !== null) throw new CalibrationError('the model is calibrated on an open sweep (no duct mounted)');
    const pts = measuredPoints(points);
    if (pts.length < MIN_FIT_POINTS) throw new CalibrationError(`${pts.length} settled points with thrust and power; a fit needs ${MIN_FIT_POINTS}`);
    const tries = pts.length >= 5 && pts.every((p) => p.rpm !== undefined) ? [PARAMETERS, FEWER] : [FEWER];
    let why = '';
    for (const parameters of tries) {
      const r = calibrate(rig, pts, { parameters, model, maxIterations: 100 });
      if (r.converged && !r.degenerate) {
        const view: ModelFitView = {
          session,
          at: Date.now(),
          points: pts.length,
          parameters: r.parameters,
          uncertainties: r.uncertainties,
          rms_percent: r.rmsPercent,
          for: `propeller ${(rig.propeller.diameter_m / 0.0254).toFixed(1)} x ${(rig.propeller.pitch_m / 0.0254).toFixed(1)} in on a ${rig.motor.kv_rpm_per_v} rpm/V motor`,
        };
        const key = partsKey(rig);
        this.held.set(key, { key, result: r, view });
        this.save();
        return view;
      }
      why = r.degenerate ? (r.degenerateReason ?? "degenerate") : "did not converge";
    }
    throw new CalibrationError(`the fit to this sweep is not usable: ${why}`);
  }

  private save(): void {
    if (!this.dir) return;
    const file = join(this.dir, MODEL_FITS_FILE);
    const tmp = `${file}.${process.pid}.tmp`;
    try {
      writeFileSync(tmp, JSON.stringify({ version: 1, fits: [...this.held.values()] }, null, 1));
      renameSync(tmp, file);
    } catch (err) {
      // The fit is in force for this daemon session either way; only its keeping failed.
      this.log(`ductbench: the model fit was not kept in ${file}: ${(err as Error).message}`);
    }
  }
}
