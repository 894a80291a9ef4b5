// Thrust units and the user's display preferences. Values travel and are stored in SI (newtons); only the
// screen converts. Pure apart from the Storage handed in, so tests give it a Map-backed fake.

/** 1 gram-force in newtons (standard gravity 9.80665 m/s^2, CGPM 1901). */
export const GRAM_FORCE_N = 9.80665e-3;

export type ThrustUnit = 'N' | 'gf';
export const THRUST_UNITS: readonly ThrustUnit[] = ['N', 'gf'];

/** Factor from newtons to the unit shown. */
export function thrustFactor(unit: ThrustUnit): number {
  return unit === 'gf' ? 1 / GRAM_FORCE_N : 1;
}

export function thrustFromNewtons(newtons: number, unit: ThrustUnit): number {
  return newtons * thrustFactor(unit);
}

/** Label of thrust per watt in the unit shown (gf/W is the trade's usual figure). */
export function efficiencyUnit(unit: ThrustUnit): string {
  return unit === 'gf' ? 'gf/W' : 'N/W';
}

/** Decimals that keep a readout steady without hiding a load cell's resolution. */
export function thrustDecimals(unit: ThrustUnit): number {
  return unit === 'gf' ? 1 : 3;
}

export const TIME_WINDOWS_S = [30, 60, 300] as const;
export type TimeWindowS = (typeof TIME_WINDOWS_S)[number];

export interface PreferencesState {
  thrustUnit: ThrustUnit;
  windowS: TimeWindowS;
}

const KEY = 'ductbench.prefs.v1';
const DEFAULTS: PreferencesState = { thrustUnit: 'N', windowS: 60 };

/** The parts of Storage we use, so tests and private-mode browsers (which throw) both fit. */
export type KeyValueStore = Pick<Storage, 'getItem' | 'setItem'>;

export class Preferences {
  private _state: PreferencesState;
  private readonly _listeners = new Set<() => void>();

  constructor(private readonly _store: KeyValueStore | null) {
    this._state = { ...DEFAULTS, ...readStored(_store) };
  }

  get thrustUnit(): ThrustUnit {
    return this._state.thrustUnit;
  }
  get windowS(): TimeWindowS {
    return this._state.windowS;
  }

  set(patch: Partial<PreferencesState>): void {
    const next = { ...this._state, ...sanitize(patch) };
    if (next.thrustUnit === this._state.thrustUnit && next.windowS === this._state.windowS) return;
    this._state = next;
    try {
      this._store?.setItem(KEY, JSON.stringify(next));
    } catch {
      // Storage full or refused: the choice still holds for this page.
    }
    for (const l of this._listeners) l();
  }

  subscribe(listener: () => void): () => void {
    this._listeners.add(listener);
    return () => this._listeners.delete(listener);
  }
}

function readStored(store: KeyValueStore | null): Partial<PreferencesState> {
  try {
    const text = store?.getItem(KEY);
    return text ? sanitize(JSON.parse(text) as Record<string, unknown>) : {};
  } catch {
    return {};
  }
}

function sanitize(raw: Partial<Record<keyof PreferencesState, unknown>>): Partial<PreferencesState> {
  const out: Partial<PreferencesState> = {};
  if (THRUST_UNITS.includes(raw.thrustUnit as ThrustUnit)) out.thrustUnit = raw.thrustUnit as ThrustUnit;
  if (TIME_WINDOWS_S.includes(raw.windowS as TimeWindowS)) out.windowS = raw.windowS as TimeWindowS;
  return out;
}
