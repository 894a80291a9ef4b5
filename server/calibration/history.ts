// The calibration history: every calibration made, with its date, the readings behind it and the
// temperature it was made at, in one JSON file in the data folder (written to a temporary file, then renamed,
// so a crash mid-write never leaves half a file). The calibration in force is the latest entry per channel.

import { existsSync, mkdirSync, readFileSync, renameSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { identityCalibration, type Calibration, type CalibratedChannel, type ChannelCal } from '../bench/calibration.js';

export const HISTORY_FILE = 'calibration.json';

export type CalibrationKind = 'tare' | 'span' | 'zero' | 'scale' | 'pulses_per_rev';

export interface CalibrationEntry {
  /** ISO date-time the calibration was made. */
  at: string;
  channel: CalibratedChannel;
  kind: CalibrationKind;
  /** Channel calibration after this entry (value = scale * raw + offset). */
  result: ChannelCal;
  /** The readings it was made from: raw reading and reference. */
  points?: { raw: number; reference: number }[];
  residuals?: number[];
  nonLinearityPct?: number;
  /** Motor / ambient temperature at the time, when the bench reports one. */
  temperatureC?: number | null;
  note?: string;
}

interface HistoryFile {
  version: 1;
  entries: CalibrationEntry[];
}

export class HistoryError extends Error {
  override name = 'HistoryError';
}

export class CalibrationHistory {
  private entries: CalibrationEntry[] = [];
  private readonly file: string;

  constructor(readonly dataDir: string) {
    this.file = join(dataDir, HISTORY_FILE);
    if (existsSync(this.file)) {
      let doc: HistoryFile;
      try {
        doc = JSON.parse(readFileSync(this.file, 'utf8')) as HistoryFile;
      } catch (err) {
        throw new HistoryError(`${this.file} is not valid JSON (${(err as Error).message}); move it aside to start a new history`);
      }
      if (doc.version !== 1 || !Array.isArray(doc.entries)) throw new HistoryError(`${this.file}: not a ductbench calibration history (version 1)`);
      this.entries = doc.entries;
    }
  }

  get all(): readonly CalibrationEntry[] {
    return this.entries;
  }

  add(entry: CalibrationEntry): void {
    this.entries.push(entry);
    mkdirSync(this.dataDir, { recursive: true });
    const tmp = `${this.file}.${process.pid}.tmp`;
    writeFileSync(tmp, JSON.stringify({ version: 1, entries: this.entries } satisfies HistoryFile, null, 2) + '\n');
    renameSync(tmp, this.file);
  }

  /** The latest calibration per channel; identity where none was made. */
  current(): Calibration {
    const c = identityCalibration();
    for (const e of this.entries) c[e.channel] = { ...e.result };
    return c;
  }

  latest(channel: CalibratedChannel): CalibrationEntry | null {
    for (let i = this.entries.length - 1; i >= 0; i--) if (this.entries[i].channel === channel) return this.entries[i];
    return null;
  }
}

export interface StalenessRules {
  maxAgeDays: number;
  /** Temperature change since the span calibration beyond which it is flagged (degC). */
  maxTemperatureShiftC: number;
}

export const DEFAULT_STALENESS: StalenessRules = { maxAgeDays: 30, maxTemperatureShiftC: 10 };

/** Warnings about the calibration in force: a thrust span never made, too old, or made at another temperature. */
export function calibrationWarnings(h: CalibrationHistory, now: Date, temperatureC: number | null, rules: StalenessRules = DEFAULT_STALENESS): string[] {
  const out: string[] = [];
  const span = [...h.all].reverse().find((e) => e.channel === 'thrust' && e.kind === 'span') ?? null;
  if (!span) {
    out.push('the load cell has no span calibration: thrust readings are the firmware\'s own scale');
    return out;
  }
  const ageDays = (now.getTime() - new Date(span.at).getTime()) / 86_400_000;
  if (ageDays > rules.maxAgeDays) out.push(`the load-cell span calibration is ${Math.floor(ageDays)} days old (made ${span.at.slice(0, 10)}); re-span it`);
  if (temperatureC !== null && span.temperatureC !== null && span.temperatureC !== undefined) {
    const shift = Math.abs(temperatureC - span.temperatureC);
    if (shift > rules.maxTemperatureShiftC) out.push(`the temperature has moved ${shift.toFixed(1)} °C since the load cell was spanned (at ${span.temperatureC.toFixed(1)} °C)`);
  }
  return out;
}
