// The daemon: one device link, one bench controller, the telemetry pipeline and the HTTP/WebSocket surface,
// wired so data flows one way (bytes -> frames -> samples -> checks -> history/broadcast) and commands flow
// back through the controller alone.

import { fileURLToPath } from 'node:url';
import {
  API_VERSION,
  CHECKLIST_IDS,
  emptyBatch,
  type BenchEvent,
  type ChecklistView,
  type ClientMessage,
  type ServerMessage,
} from './api/messages.js';
import { BenchController, ControlError } from './bench/controller.js';
import { TelemetryPipeline, type Sample } from './bench/telemetry.js';
import { WebSide } from './web/side.js';
import type { ClientRef, WebConfig } from './web/bridge.js';
import { newToken } from './http/access.js';
import { DeviceLink, type LinkOptions } from './link/link.js';
import { SerialTransport } from './link/serial-transport.js';
import type { Transport } from './link/transport.js';
import type { VirtualBench } from './sim/index.js';
import { Interlocks } from './interlocks/engine.js';
import { mayTurn } from './bench/state.js';
import { SessionKeeper } from './bench/recording.js';
import { SessionStore } from './store/store.js';
import { LoopMonitor } from './util/loop-monitor.js';
import { CalibrationHistory, calibrationWarnings } from './calibration/history.js';
import { resolveAtmosphere, type Atmosphere, type AtmosphereInput } from './bench/atmosphere.js';
import { parseLimits, type Limits } from './interlocks/limits.js';
import type { RigSpec } from './model/rig-types.js';
import { defaultSupplyVoltage, predictAtThrottle, predictCurve, rigGeometry, withSupplyVoltage, type RigModel } from './model/index.js';
import { SupplyEstimate } from './bench/supply-estimate.js';
import { BAND_K, bandEdges, bandModel, CALIBRATED_CURRENT_ZERO_A, UNCALIBRATED_ZEROS, type BandSource } from './model/band.js';
import { ModelFitKeeper, type ModelFitView } from './bench/model-fit.js';
import type { Calibration } from './bench/calibration.js';
import { SequenceService, loadExamples } from './bench/sequence-service.js';
import { CalibrationService, type CalibrationServiceDeps } from './bench/calibration-service.js';
import { ZeroService, ZERO_DRIFT_TAG } from './bench/zero-service.js';
import type { ZeroRules } from './bench/zero.js';
import type { PredictFn, RunnerOptions } from './sequence/index.js';
import { PartsLibrary } from './parts/library.js';
import { MountService, type MountSource, type MountState } from './parts/mount.js';

export const DEFAULT_HTTP_PORT = 8470;
/** A heartbeating controller silent this long while the motor may turn is taken as lost (ms). */
export const CONTROLLER_SILENCE_MS = 4000;
/** How often sample batches go out to dashboards. */
export const BATCH_INTERVAL_MS = 50;
/** Rows the web side keeps for snapshots: at 1 kHz the newest 200 s. */
export const HISTORY_CAPACITY = 200_000;
const SNAPSHOT_WINDOW_MS = 120_000;
const SNAPSHOT_MAX_POINTS = 6000;
const EVENT_LOG_CAP = 200;
/** Rows per live batch at most (5 kHz at 50 ms batches): beyond that a chart gains nothing and JSON costs a lot. */
const LIVE_ROWS_PER_BATCH = 250;
/** How often the web side reports that it is alive, with its view of the controlling dashboard. */
const WEB_ALIVE_INTERVAL_MS = 200;

export type DeviceSource =
  | { kind: 'sim'; rigFile?: string; seed?: number }
  | { kind: 'serial'; path: string; baud?: number }
  | { kind: 'custom'; transport: () => Transport };

export interface DaemonOptions {
  source: DeviceSource;
  host?: string;
  httpPort?: number;
  token?: string;
  dataDir?: string;
  /** Built dashboard folder; defaults to dist/web beside the compiled server. */
  webRoot?: string;
  link?: Partial<Omit<LinkOptions, 'transport'>>;
  /**
   * The first mount (a validated rig), for the prediction and the limits; defaults to the virtual bench's rig.
   * With a data folder its parts go into the parts library, and dashboards may mount others while disarmed.
   */
  rig?: RigSpec | null;
  /** Size cap of the session database (tests of a full disk); none by default. */
  maxDatabaseBytes?: number;
  /** The air the bench runs in (standard sea level by default). */
  atmosphere?: AtmosphereInput;
  /** Limit overrides on top of the rig's `limits` section (validated the same way). */
  limits?: Record<string, number>;
  /** Folder of the example sequences a dashboard may run by name; defaults to examples/sequences of the project. */
  examplesDir?: string;
  /** Runner overrides for sequences started from a dashboard (tests). */
  sequenceRunner?: Partial<RunnerOptions>;
  /** Measurement windows of calibrations from a dashboard (tests use short ones). */
  calibrationWorkflow?: CalibrationServiceDeps['workflow'];
  /** Rules of the zero step before every run (tests: shorter windows, a tighter drift limit). */
  zeroRules?: Partial<ZeroRules>;
  log?: (line: string) => void;
  /** A web side silent this long while the motor may turn is taken as every dashboard lost (ms; tests shorten it). */
  webSilenceMs?: number;
}

/** The prediction the dashboard overlays on its thrust-per-watt plot (snapshot.extras.prediction). */
export interface LivePrediction {
  rig: string;
  density_kg_m3: number;
  /** Where the density came from (standard atmosphere at an altitude, measured air, given). */
  atmosphere: string;
  sigma: number | null;
  tip_clearance_mm: number | null;
  throttle: number[];
  thrust_N: number[];
  grams_per_watt: number[];
  ideal_open_gpw: number[];
  ideal_ducted_gpw: (number | null)[];
  /** The prediction's uncertainty band (BAND_K standard uncertainties), gram-force per watt, per throttle. */
  band_lo_gpw: number[];
  band_hi_gpw: number[];
  band_k: number;
  band_source: BandSource;
  /** The calibration on an open sweep the prediction uses, or null (then the band is the stated spread). */
  fit: ModelFitView | null;
  /** Supply resting voltage the curve is drawn for, V: measured on the bench once it reports, else the rig's. */
  supply_v: number;
  supply_source: 'measured' | 'rig';
}

/** The model of the mount and its band: the fitted one when the propeller and motor were calibrated on an open sweep. */
type Banded = ReturnType<typeof bandModel>;

/**
 * The live curve, for the supply voltage measured on the bench (measuredSupply_v, see
 * server/bench/supply-estimate.ts) or, before it reports, the rig's default; the band is evaluated at each
 * point's predicted bus voltage so that it stays around the curve.
 */
function livePrediction(
  banded: Banded,
  ceiling: number,
  atmosphere: Atmosphere,
  fit: ModelFitView | null,
  measuredSupply_v: number | null = null,
): LivePrediction {
  const model = banded.model;
  const throttles = Array.from({ length: 30 }, (_, i) => Math.round(((i + 1) / 30) * ceiling * 1000) / 1000);
  const curve = predictCurve(measuredSupply_v === null ? model : withSupplyVoltage(model, measuredSupply_v), { throttles });
  const geo = rigGeometry(model.rig);
  return {
    supply_v: measuredSupply_v ?? defaultSupplyVoltage(model.rig),
    supply_source: measuredSupply_v === null ? 'rig' : 'measured',
    rig: model.rig.name,
    density_kg_m3: curve.density_kg_m3,
    atmosphere: atmosphere.source,
    sigma: geo.sigma,
    tip_clearance_mm: geo.tipClearance_mm,
    throttle: throttles,
    thrust_N: curve.points.map((p) => p.thrust_N),
    grams_per_watt: curve.points.map((p) => p.gramsPerWatt),
    ideal_open_gpw: curve.points.map((p) => p.idealGramsPerWattOpen),
    ideal_ducted_gpw: curve.points.map((p) => p.idealGramsPerWattDucted),
    ...bandArrays(banded, throttles, curve.points.map((p) => p.busVoltage_V)),
    band_k: BAND_K,
    band_source: banded.source,
    fit,
  };
}

function bandArrays(banded: Banded, throttles: readonly number[], busVoltages: readonly number[]): { band_lo_gpw: number[]; band_hi_gpw: number[] } {
  const e = throttles.map((t, i) => bandEdges(banded.at(t, busVoltages[i] > 0 ? busVoltages[i] : undefined)));
  return { band_lo_gpw: e.map((x) => x.lo), band_hi_gpw: e.map((x) => x.hi) };
}

export interface RunningDaemon {
  url: string;
  port: number;
  token: string;
  link: DeviceLink;
  controller: BenchController;
  interlocks: Interlocks;
  /** The web side (HTTP, WebSocket hub, snapshots, sessions API) on its own worker thread (server/web/). */
  web: WebSide;
  /** The zero step before every run and the zero's drift over it. */
  zero: ZeroService;
  /** The prediction of the mount in force, with its band (what sequences from a dashboard use). */
  predict(): PredictFn | null;
  /** Session recording, when a data folder was given. */
  sessions: SessionKeeper | null;
  /** Sequences started from a dashboard (one at a time). */
  sequences: SequenceService;
  /** Calibrations from a dashboard (refused without a data folder). */
  calibration: CalibrationService;
  /** What is on the stand, and the parts library behind it (none without a data folder). */
  mounts: MountService;
  /** The in-process virtual bench, when that is the device (tests and fault injection reach it here). */
  sim: VirtualBench | null;
  /** Resolves once the first connection attempt has finished (ready or failed). */
  firstConnect: Promise<void>;
  /** Cuts the throttle, then closes everything. */
  close(): Promise<void>;
  /**
   * For the process-level last resort (server/util/last-resort.ts): STOP on the wire at once, the reason in the
   * open session, the session ended as aborted. Never throws, never waits.
   */
  fatal(reason: string): void;
  /** Subscribe to every calibrated sample (tests, benchmarks, the store). */
  onSample(fn: (s: Sample, arrivedAt: number) => void): () => void;
}

function defaultWebRoot(): string {
  // dist/server/daemon.js -> dist/web ; server/daemon.ts (vitest) -> dist/web
  const here = fileURLToPath(new URL('.', import.meta.url));
  return here.includes(`${'/'}dist${'/'}`) ? fileURLToPath(new URL('../web/', import.meta.url)) : fileURLToPath(new URL('../dist/web/', import.meta.url));
}

function defaultExamplesDir(): string {
  const here = fileURLToPath(new URL('.', import.meta.url));
  return here.includes(`${'/'}dist${'/'}`) ? fileURLToPath(new URL('../../examples/sequences/', import.meta.url)) : fileURLToPath(new URL('../examples/sequences/', import.meta.url));
}

/** The device transport factory, and for the virtual bench the one bench that outlives reconnections. */
async function transportFor(source: DeviceSource): Promise<{ make: () => Transport; sim: VirtualBench | null }> {
  switch (source.kind) {
    case 'serial':
      return { make: () => new SerialTransport(source.path, source.baud ?? 115200), sim: null };
    case 'custom':
      return { make: source.transport, sim: null };
    case 'sim': {
      const sim = await import('./sim/index.js');
      const rig = source.rigFile ? sim.loadSimRig(source.rigFile) : undefined;
      // One bench for every reconnection: after a cable "unplug" it is still the same board, still latched.
      const bench = new sim.VirtualBench({ ...(rig ? { rig } : {}), ...(source.seed !== undefined ? { seed: source.seed } : {}) });
      return { make: () => new sim.SimTransport({ bench }), sim: bench };
    }
  }
}

export async function startDaemon(opts: DaemonOptions): Promise<RunningDaemon> {
  const log = opts.log ?? ((l: string) => process.stderr.write(l + '\n'));
  const host = opts.host ?? '127.0.0.1';
  const token = opts.token ?? newToken();
  const { make: makeTransport, sim } = await transportFor(opts.source);
  const link = new DeviceLink({ ...opts.link, transport: makeTransport });
  const controller = new BenchController(link);
  // The first mount: the rig given, else the virtual bench's rig minus its truth constants (the model never
  // sees the bench's own physics).
  let initialRig: RigSpec | null = opts.rig ?? null;
  if (opts.rig === undefined && sim) {
    const { sim: _truth, ...described } = sim.rig;
    initialRig = described;
  }
  const initialSource: MountSource = opts.rig ? 'rig file' : sim ? 'virtual bench' : 'none';
  // Sessions are recorded when a data folder is given (the CLI always gives one; tests mostly do not).
  // A store that cannot be opened for writing (a full disk, a read-only folder) leaves the bench usable with
  // recording off, said plainly; the web side still lists what is there, read-only.
  let store: SessionStore | null = null;
  let storeWarning: string | null = null;
  if (opts.dataDir) {
    try {
      store = SessionStore.open(opts.dataDir, { busyTimeoutMs: 20, ...(opts.maxDatabaseBytes ? { maxDatabaseBytes: opts.maxDatabaseBytes } : {}) });
    } catch (err) {
      const code = (err as { code?: string }).code;
      storeWarning = `recording is OFF: the session store in ${opts.dataDir} cannot be written (${code ? `${code}: ` : ''}${(err as Error).message})${code === 'SQLITE_FULL' || code === 'ENOSPC' ? '; the disk is full' : ''}. The bench works; nothing is recorded until the daemon is restarted with space free`;
      log(`ductbench: WARNING: ${storeWarning}`);
    }
  }
  const mounts = new MountService({
    library: store ? new PartsLibrary(store.db) : null,
    // The first rig's limits section and the command line's limits are the bench's, for every later mount too.
    benchLimits: { ...(initialRig?.limits ?? {}), ...(opts.limits ?? {}) },
    refusal: () => mountRefusal(),
  });
  mounts.setInitial(initialRig, initialSource);
  // What follows the mount; reassigned by applyMount() when a dashboard mounts other parts.
  let rig: RigSpec | null = mounts.state.rig;
  let limits: Limits = mounts.state.limits;
  controller.maxSlewPerS = limits.max_slew_per_s;
  controller.maxThrottle = limits.max_throttle;
  const atmosphere = resolveAtmosphere(opts.atmosphere);
  // Calibrations of the model on open sweeps (per propeller and motor), and the banded model of the mount.
  const fits = new ModelFitKeeper(opts.dataDir ?? null, log);
  // A current zero in the calibration in force narrows the measured side's share of the band (set below).
  let measuredZeros = UNCALIBRATED_ZEROS;
  const zerosOf = (c: Calibration) => (c.current.offset !== 0 ? { ...UNCALIBRATED_ZEROS, current_A: CALIBRATED_CURRENT_ZERO_A } : UNCALIBRATED_ZEROS);
  const bandedFor = (r: RigSpec | null): Banded | null => {
    if (!r) return null;
    try {
      const fit = fits.forRig(r);
      return bandModel(r, { ...(fit?.modelOptions ?? {}), air: atmosphere.air }, fit, measuredZeros);
    } catch (err) {
      log(`ductbench: no prediction for rig ${r.name}: ${(err as Error).message}`);
      return null;
    }
  };
  let banded = bandedFor(rig);
  let model: RigModel | null = banded?.model ?? null;
  // The supply's resting voltage as measured, for the live curve (server/bench/supply-estimate.ts).
  let supply: SupplyEstimate | null = rig ? new SupplyEstimate(rig.supply.internal_resistance_ohm) : null;
  // What the interlocks judge by for the mount in force: the band of the prediction in force (it narrows once
  // calibrated on an open sweep).
  const interlockMount = () => ({
    limits,
    diameterM: rig?.propeller.diameter_m ?? null,
    cells: rig?.supply.cells ?? null,
    predictor: banded
      ? (throttle: number, voltage: number) => {
          const p = predictAtThrottle(banded!.model, throttle, voltage);
          const b = banded!.at(throttle, voltage);
          return { gramsPerWatt: p.gramsPerWatt, thrust_N: p.thrust_N, bandPct: BAND_K * b.rel_model * 100, zeros: b.zeros };
        }
      : null,
    // a fifth of the thrust the rig is predicted to make at full throttle
    deviationMinThrustN: model ? 0.2 * predictAtThrottle(model, 1).thrust_N : 0,
  });
  const interlocks = new Interlocks(controller, {
    ...interlockMount(),
    airTemperatureK: atmosphere.temperature_K,
    badLineCount: () => Object.values(link.view().linesBad).reduce((a, b) => a + b, 0),
  });
  let prediction: LivePrediction | null = null;
  // Until the web side is up, events are only kept (its first mirror carries them).
  let web: WebSide | null = null;
  const broadcast = (msg: ServerMessage) => web?.broadcast(msg);
  const tell = (event: BenchEvent) => {
    events.push(event);
    broadcast({ type: 'event', event });
    log(`[${event.level}] ${event.text}`);
  };
  const pipeline = new TelemetryPipeline();
  // The calibration in force: the latest of the data folder's history (made with `ductbench calibrate`).
  let calibrationWarningsText: string[] = [];
  let calibrationHistory: CalibrationHistory | null = null;
  let calibrationUnavailable = 'this daemon keeps no calibration history (started without a data folder): calibrate with a data folder (--data-dir)';
  if (opts.dataDir) {
    try {
      calibrationHistory = new CalibrationHistory(opts.dataDir);
      pipeline.calibration = calibrationHistory.current();
      calibrationWarningsText = calibrationWarnings(calibrationHistory, new Date(), null);
      measuredZeros = zerosOf(pipeline.calibration);
      banded = bandedFor(rig);
      model = banded?.model ?? null;
    } catch (err) {
      // A broken history must not start the bench on a calibration nobody chose: say so, run uncalibrated.
      calibrationWarningsText = [`calibration history unreadable, running uncalibrated: ${(err as Error).message}`];
      calibrationUnavailable = `the calibration history is unreadable (${(err as Error).message}); nothing is written over it`;
    }
  }
  const sessions = store
    ? new SessionKeeper(store, controller, () => ({
        rig,
        mount: mounts.sessionParts(),
        calibration: pipeline.calibration,
        atmosphere: {
          density_kg_m3: atmosphere.density_kg_m3,
          temperature_C: atmosphere.temperature_K - 273.15,
          ...(atmosphere.pressure_Pa !== null ? { pressure_Pa: atmosphere.pressure_Pa } : {}),
          ...(atmosphere.relative_humidity !== null ? { relative_humidity: atmosphere.relative_humidity } : {}),
          source: atmosphere.source,
        },
        firmware: link.identity,
      }), (e) => tell(e))
    : null;
  if (sessions) sessions.linkView = () => link.view();
  interlocks.on('trip', ({ rule, finding, sample }) => sessions?.addTrip(rule, finding.value, finding.limit, finding.detail, sample));
  // The same prediction `ductbench run` gives its runner, at the bench's own air.
  const predictFor = (b: Banded | null): PredictFn | null =>
    b
      ? (throttle, voltage) => {
          const p = predictAtThrottle(b.model, throttle, voltage);
          const e = bandEdges(b.at(throttle, voltage));
          return { thrust_N: p.thrust_N, power_W: p.powerElectrical_W, grams_per_watt: p.gramsPerWatt, grams_per_watt_lo: e.lo, grams_per_watt_hi: e.hi };
        }
      : null;
  let predict = predictFor(banded);
  const sequences = new SequenceService({
    controller,
    onSample: (fn) => {
      sampleListeners.add(fn);
      return () => sampleListeners.delete(fn);
    },
    identity: () => link.identity,
    sessions,
    // Read at every check and start: a run uses the mount in force when it starts.
    get rig() {
      return rig;
    },
    get limits() {
      return limits;
    },
    get predict() {
      return predict;
    },
    airDensity_kg_m3: atmosphere.density_kg_m3,
    examples: loadExamples(opts.examplesDir ?? defaultExamplesDir(), log),
    tell: (e) => tell(e),
    ...(opts.sequenceRunner ? { runner: opts.sequenceRunner } : {}),
  });
  sequences.on('run', (run) => {
    broadcast({ type: 'run', run });
    web?.mirror({ run: sequences.view(true) });
    if (run.outcome !== null) zero.afterRun();
    if (run.outcome === 'completed' && rig && rig.duct === null) calibrateModel(run.session);
  });
  // A completed open sweep calibrates the model for its propeller and motor: the prediction and its band follow.
  function calibrateModel(session: number | null): void {
    const points = sequences.view(true)?.points ?? [];
    try {
      const f = fits.fitOpenSweep(rig!, points, { air: atmosphere.air }, session);
      banded = bandedFor(rig);
      model = banded?.model ?? null;
      predict = predictFor(banded);
      if (banded && link.identity) prediction = livePrediction(banded, link.identity.throttleCeiling, atmosphere, fits.view(rig), supply?.inUse ?? null);
      const pct = (banded && link.identity ? prediction?.band_hi_gpw.map((hi, i) => (hi / prediction!.grams_per_watt[i] - 1) * 100) : []) ?? [];
      tell({
        t: Date.now(),
        level: 'info',
        kind: 'model',
        text: `model calibrated on the open sweep${session !== null ? ` of session ${session}` : ''} (${f.points} points; ${Object.entries(f.parameters).map(([k, v]) => `${k} ${v!.toFixed(3)} ± ${f.uncertainties[k as keyof typeof f.uncertainties]!.toFixed(3)}`).join(', ')}): band now ±${pct.length ? Math.min(...pct).toFixed(1) : '?'} to ${pct.length ? Math.max(...pct).toFixed(1) : '?'} %`,
      });
      broadcast({ type: 'extras', extras: { prediction } });
    } catch (err) {
      tell({ t: Date.now(), level: 'info', kind: 'model', text: `model not calibrated on this sweep: ${(err as Error).message}` });
    }
  }
  sequences.on('point', ({ run, point }) => {
    broadcast({ type: 'run_point', run, point });
    web?.mirror({ run: sequences.view(true) });
  });
  // The pre-arm checklist is confirmed once per daemon session, by a controlling dashboard. The CLI and
  // in-process callers of controller.arm() are not dashboards and have their own acknowledgement.
  let checklistAt: number | null = null;
  const checklistView = (): ChecklistView => ({ confirmed: checklistAt !== null, at: checklistAt, items: CHECKLIST_IDS });
  const requireChecklist = (what: string) => {
    if (checklistAt === null) throw new ControlError(`${what} refused: complete the pre-arm checklist first (stand and propeller secured, rotor plane clear, eye protection, battery supervised, limits reviewed)`);
  };
  const extras = (): Record<string, unknown> => ({
    prediction,
    limits,
    rig: rig ? { name: rig.name, ducted: rig.duct !== null } : null,
    mount: mounts.view(),
    parts: mounts.partsView(),
    atmosphere: { density_kg_m3: atmosphere.density_kg_m3, temperature_K: atmosphere.temperature_K, source: atmosphere.source },
    checklist: checklistView(),
    sequences: sequences.examples(),
    ...calibration.extras(),
    zero: zero.view(),
  });
  const events: BenchEvent[] = [];
  if (storeWarning) events.push({ t: Date.now(), level: 'error', kind: 'recording', text: storeWarning });
  const sampleListeners = new Set<(s: Sample, arrivedAt: number) => void>();

  const webHandlers = {
    onDisconnect: (client: ClientRef) => {
      if (client.role !== 'controller') return;
      // A paused run is disarmed already: end it quietly. Nobody is left to resume it.
      if (sequences.live && sequences.view(false)?.state === 'paused') {
        sequences.abort();
        return;
      }
      // Losing the controlling dashboard while the motor may turn stops the motor: nobody is watching it.
      if (sequences.cut('controlling dashboard disconnected')) return;
      if (controller.state === 'armed' || controller.state === 'running') {
        controller.stop('controlling dashboard disconnected');
      }
    },
    onMessage: (client: ClientRef, msg: ClientMessage) => handleClient(client, msg),
    onHandlerError: (message: string) => log(`ductbench: a web request failed (answered 500): ${message}`),
    recordingId: () => sessions?.sessionId ?? null,
  };

  // Calibration results are in force at once: the pipeline calibrates every following sample, and the
  // session context reads pipeline.calibration for every new session.
  const calibration = new CalibrationService({
    link,
    controller,
    history: calibrationHistory,
    unavailable: calibrationHistory ? null : calibrationUnavailable,
    setCalibration: (c) => {
      pipeline.calibration = c;
      zero.resetOffset('a new calibration is in force (it carries its own offset)');
      if (zerosOf(c).current_A !== measuredZeros.current_A) {
        measuredZeros = zerosOf(c);
        banded = bandedFor(rig);
        model = banded?.model ?? null;
        predict = predictFor(banded);
        if (banded && link.identity) {
          prediction = livePrediction(banded, link.identity.throttleCeiling, atmosphere, fits.view(rig), supply?.inUse ?? null);
          broadcast({ type: 'extras', extras: { prediction } });
        }
      }
    },
    onSample: (fn) => {
      sampleListeners.add(fn);
      return () => sampleListeners.delete(fn);
    },
    tell: (e) => tell(e),
    ...(opts.calibrationWorkflow ? { workflow: opts.calibrationWorkflow } : {}),
  });
  calibration.on('status', (v) => broadcast({ type: 'extras', extras: { calibration: v } }));
  calibration.on('history', (v) => broadcast({ type: 'extras', extras: { calibration_history: v } }));

  // Zero before every run: the pipeline takes the offset off every calibrated thrust reading.
  const zero = new ZeroService({
    controller,
    onSample: (fn) => {
      sampleListeners.add(fn);
      return () => sampleListeners.delete(fn);
    },
    getOffset: () => pipeline.thrustZero,
    setOffset: (n) => {
      pipeline.thrustZero = n;
    },
    tell: (e) => tell(e),
    // Read at every zero step: the mount in force's predicted full-throttle thrust.
    get scale_N() {
      return model ? predictAtThrottle(model, 1).thrust_N : null;
    },
    ...(opts.zeroRules ? { rules: opts.zeroRules } : {}),
  });
  if (sessions) sessions.onBegin = (id) => zero.sessionOpened(id);
  zero.on('status', (v) => broadcast({ type: 'extras', extras: { zero: v } }));
  zero.on('drift', ({ session, view, event }) => {
    if (!store || session === null) return;
    try {
      // Usually after the session was closed (the post-run reading waits for the rotor to stop).
      store.writeBatch(session, [], [], [event]);
      if (view.warned) store.update(session, { addTags: [ZERO_DRIFT_TAG] });
    } catch (err) {
      tell({ t: Date.now(), level: 'error', kind: 'recording', text: `the zero drift of session ${session} was not recorded: ${(err as Error).message}` });
    }
  });

  function mountRefusal(): string | null {
    const st = controller.state;
    if (st === 'armed' || st === 'running') return `the bench is ${st}: disarm first (the parts must not change while the rotor may turn)`;
    if (sequences.live) return 'a sequence is in progress: let it finish or abort it first';
    try {
      calibration.requireIdle('mounting');
    } catch (err) {
      return (err as Error).message;
    }
    return null;
  }

  // A new mount is in force at once: the prediction, the interlocks, the next run and the next session follow
  // it, and every dashboard hears of it. On the virtual bench the simulated hardware changes with it.
  function applyMount(st: MountState): void {
    rig = st.rig;
    limits = st.limits;
    controller.maxSlewPerS = limits.max_slew_per_s;
    controller.maxThrottle = limits.max_throttle;
    banded = bandedFor(rig);
    model = banded?.model ?? null;
    // A new mount may be on another pack: its voltage is measured afresh.
    supply = rig ? new SupplyEstimate(rig.supply.internal_resistance_ohm) : null;
    predict = predictFor(banded);
    interlocks.remount(interlockMount());
    if (sim && rig) {
      try {
        sim.remount(rig);
      } catch (err) {
        // Disarmed by the mount's own check; a board still turning keeps its old hardware and says so.
        tell({ t: Date.now(), level: 'warn', kind: 'mount', text: `the virtual bench kept its hardware: ${(err as Error).message}` });
      }
    }
    prediction = null;
    if (banded && link.identity) {
      try {
        prediction = livePrediction(banded, link.identity.throttleCeiling, atmosphere, fits.view(rig), supply?.inUse ?? null);
      } catch (err) {
        log(`ductbench: prediction failed: ${(err as Error).message}`);
      }
    }
    const parts = mounts.view().slots.filter((x) => x.part_id !== null).map((x) => `${x.slot} ${x.name} r${x.revision}`);
    tell({ t: Date.now(), level: 'info', kind: 'mount', text: `mounted ${rig?.name ?? 'nothing'}${parts.length ? ` (${parts.join(', ')})` : ''}` });
    // New hardware on the stand: its propeller nut, the rotor plane and the limits in force are worth a fresh
    // look, so the pre-arm checklist is asked for again before the next arm.
    if (checklistAt !== null) {
      checklistAt = null;
      tell({ t: Date.now(), level: 'info', kind: 'checklist', text: 'the mount changed: the pre-arm checklist is asked for again before the next arm' });
    }
    broadcast({ type: 'extras', extras: extras() });
  }
  mounts.on('mount', (st) => applyMount(st));
  mounts.on('parts', (parts) => broadcast({ type: 'extras', extras: { parts } }));
  // Whether a mount is accepted follows the bench state: keep every dashboard's view of it current.
  const mountChanged = () => broadcast({ type: 'extras', extras: { mount: mounts.view() } });
  controller.on('transition', mountChanged);
  sequences.on('run', (run) => {
    if (run.outcome !== null) mountChanged();
  });

  async function handleClient(_client: ClientRef, msg: ClientMessage): Promise<unknown> {
    switch (msg.type) {
      case 'stop':
        // During a run the runner cuts (STOP first) so the run ends as aborted rather than as a mystery trip.
        if (!sequences.cut('dashboard stop')) controller.stop('dashboard');
        return;
      case 'checklist': {
        const missing = CHECKLIST_IDS.filter((id) => !msg.items.includes(id));
        if (missing.length) throw new ControlError(`checklist incomplete: not ticked: ${missing.join(', ')}`);
        checklistAt = Date.now();
        tell({ t: checklistAt, level: 'info', kind: 'checklist', text: 'pre-arm checklist confirmed by the controlling dashboard' });
        broadcast({ type: 'extras', extras: { checklist: checklistView() } });
        return;
      }
      case 'arm':
        requireChecklist('arm');
        calibration.requireIdle('arm');
        if (sequences.live) throw new ControlError('a sequence is running: it arms and disarms the bench itself');
        // Not safe: arm() refuses with the state, as it always did.
        if (controller.state === 'safe') await zero.beforeRun('arming', { keep: msg.keep_zero === true });
        return controller.arm();
      case 'sequence_start': {
        requireChecklist('sequence');
        if (msg.check_only) return sequences.check(msg.source);
        calibration.requireIdle('sequence');
        // The plan's checks first (a refused plan needs no zero), then the zero step, then the start.
        if (!sequences.live) {
          sequences.check(msg.source);
          await zero.beforeRun('the sequence', { keep: msg.keep_zero === true, managed: true });
        }
        return sequences.start({ source: msg.source, ...(msg.title !== undefined ? { title: msg.title } : {}), ...(msg.tags !== undefined ? { tags: msg.tags } : {}) });
      }
      case 'sequence_pause':
        return sequences.pause();
      case 'sequence_resume':
        return sequences.resume();
      case 'sequence_abort':
        return sequences.abort();
      case 'disarm':
        return controller.disarm();
      case 'throttle':
        return controller.setThrottle(msg.value);
      case 'clear':
        return controller.acknowledge();
      case 'tare':
        // Through the calibration history when there is one: a firmware tare also resets the host's thrust
        // offset, which a span made before it would otherwise apply twice.
        if (zero.busy) throw new ControlError('tare refused: the zero step of a run is in progress');
        return calibration.available ? calibration.handle({ type: 'calibration_tare' }).then(() => undefined) : controller.tare().then(() => zero.resetOffset('the load cell was tared in the firmware'));
      case 'calibration_tare':
      case 'calibration_span_start':
      case 'calibration_span_placed':
      case 'calibration_cancel':
      case 'calibration_current_zero':
      case 'calibration_reference':
      case 'calibration_rpm_pulses':
        if (zero.busy) throw new ControlError('calibration refused: the zero step of a run is in progress');
        return calibration.handle(msg);
      case 'mount':
        mounts.mount(msg.parts, msg.name);
        return mounts.view();
      case 'part_create': {
        const p = mounts.createPart(msg.kind, msg.name, msg.document);
        return { id: p.id, kind: p.kind, name: p.name, revision: p.revision };
      }
      case 'ping':
        return;
      default:
        throw new ControlError('unsupported message');
    }
  }

  link.on('frame', (f) => {
    if (f.tag !== 'TEL') {
      // An IDENT while connected means the controller restarted: its clock starts again from zero.
      if (f.tag === 'IDENT') pipeline.reset();
      return;
    }
    const arrivedAt = performance.now();
    const s = pipeline.toSample(f, Date.now());
    // Interlocks first: a trip writes the cut before the sample is stored or shown.
    interlocks.onSample(s, arrivedAt);
    sessions?.addSample(s);
    for (const fn of sampleListeners) fn(s, arrivedAt);
    web?.addSample(s);
    // The live curve follows the pack as it drains: redrawn for the measured supply voltage when it moves.
    supply?.add(s.t, s.voltage, s.current);
    const measured = banded && link.identity ? (supply?.take(s.t) ?? null) : null;
    if (measured !== null) {
      try {
        prediction = livePrediction(banded!, link.identity!.throttleCeiling, atmosphere, fits.view(rig), measured);
        broadcast({ type: 'extras', extras: { prediction } });
      } catch (err) {
        log(`ductbench: prediction failed: ${(err as Error).message}`);
      }
    }
  });
  link.on('ready', (id) => {
    pipeline.reset();
    for (const text of calibrationWarningsText) {
      const event: BenchEvent = { t: Date.now(), level: 'warn', kind: 'calibration', text };
      events.push(event);
      broadcast({ type: 'event', event });
    }
    interlocks.reset();
    interlocks.setDeclaredRates(id.channels);
    if (banded) {
      try {
        prediction = livePrediction(banded, id.throttleCeiling, atmosphere, fits.view(rig), supply?.inUse ?? null);
        broadcast({ type: 'extras', extras: extras() });
      } catch (err) {
        log(`ductbench: prediction failed: ${(err as Error).message}`);
      }
    }
  });
  interlocks.on('warning', ({ rule, finding }) => {
    const event: BenchEvent = { t: Date.now(), level: 'warn', kind: 'warning', text: `${rule}: ${finding.detail}` };
    events.push(event);
    broadcast({ type: 'event', event });
  });
  link.on('identity', (identity) => broadcast({ type: 'identity', identity }));
  link.on('status', (view) => broadcast({ type: 'link', link: view }));
  controller.on('bench', (bench) => broadcast({ type: 'bench', bench }));
  controller.on('event', (event) => {
    events.push(event);
    if (events.length > EVENT_LOG_CAP) events.splice(0, events.length - EVENT_LOG_CAP);
    broadcast({ type: 'event', event });
    // Once closing, the STOP we send on the way out latches the device; that is not news for the operator.
    if (!closed && (event.level !== 'info' || event.kind === 'state')) log(`[${event.level}] ${event.text}`);
  });

  // A controlling dashboard that sends heartbeats and then falls silent (a frozen tab) while the motor may
  // turn is treated like a lost one. The browser answers WebSocket protocol pings from its network process
  // even when the page's JavaScript is stuck, so only the page's own heartbeat tells.
  // The web side's own silence counts the same: while it does not answer, no dashboard can see the bench or
  // stop it (the bench's thread keeps its timing meanwhile: that is what the split is for).
  const liveness = setInterval(() => {
    if (controller.state !== 'armed' && controller.state !== 'running') return;
    const webSilent = web ? web.silentForMs() : 0;
    const c = web?.controller ?? null;
    let why: string | null = null;
    if (webSilent >= (opts.webSilenceMs ?? CONTROLLER_SILENCE_MS)) why = `the dashboards' side of the daemon unresponsive for ${(webSilent / 1000).toFixed(1)} s`;
    else if (c && c.heartbeats && Date.now() - c.lastHeardAt >= CONTROLLER_SILENCE_MS) why = `controlling dashboard silent for ${((Date.now() - c.lastHeardAt) / 1000).toFixed(1)} s`;
    if (why && !sequences.cut(why)) controller.stop(why);
  }, 500);
  liveness.unref();
  // A stalled event loop is worth telling: beyond the firmware's heartbeat time-out it has already cut.
  const loop = new LoopMonitor({ thresholdMs: 100 });
  let lastStallWarn = 0;
  loop.on('stall', (st) => {
    if (Date.now() - lastStallWarn < 5000) return;
    lastStallWarn = Date.now();
    tell({
      t: Date.now(),
      level: 'warn',
      kind: 'loop_stall',
      text: `the daemon stalled for ${Math.round(st.stall_ms)} ms (the firmware cuts after ${link.identity?.heartbeatTimeoutMs ?? 300} ms without a heartbeat)`,
    });
  });
  loop.start();

  // Counters move all the time; send them once a second rather than on every line.
  const linkTick = setInterval(() => broadcast({ type: 'link', link: link.view() }), 1000);

  let closed = false;
  const webConfig: WebConfig = {
    host,
    port: opts.httpPort ?? DEFAULT_HTTP_PORT,
    token,
    webRoot: opts.webRoot ?? defaultWebRoot(),
    dataDir: opts.dataDir ?? null,
    storeUnavailable: null,
    historyCapacity: HISTORY_CAPACITY,
    snapshotWindowMs: SNAPSHOT_WINDOW_MS,
    snapshotMaxPoints: SNAPSHOT_MAX_POINTS,
    liveRowsPerBatch: LIVE_ROWS_PER_BATCH,
    batchIntervalMs: BATCH_INTERVAL_MS,
    aliveIntervalMs: WEB_ALIVE_INTERVAL_MS,
  };
  try {
    web = await WebSide.start(
      webConfig,
      { bench: controller.view(), link: link.view(), identity: link.identity, events: events.slice(-200), extras: extras(), run: sequences.view(true), recordingId: sessions?.sessionId ?? null },
      webHandlers,
    );
  } catch (err) {
    clearInterval(linkTick);
    clearInterval(liveness);
    loop.stop();
    interlocks.close();
    store?.close();
    throw err;
  }
  const webSide = web;

  // The caller decides what a failed first connection means (the CLI exits with one line; tests inspect it).
  const firstConnect = link.start().then(
    () => undefined,
    () => undefined,
  );

  const urlHost = host === '0.0.0.0' || host === '::' ? '127.0.0.1' : host.includes(':') ? `[${host}]` : host;
  return {
    url: `http://${urlHost}:${webSide.port}/?token=${encodeURIComponent(token)}`,
    port: webSide.port,
    token,
    link,
    controller,
    interlocks,
    web: webSide,
    zero,
    predict: () => predict,
    sim,
    sessions,
    sequences,
    calibration,
    mounts,
    firstConnect,
    onSample(fn) {
      sampleListeners.add(fn);
      return () => sampleListeners.delete(fn);
    },
    fatal(reason: string) {
      try {
        link.sendUrgent('estop');
      } catch {
        // the firmware's heartbeat time-out is the layer below
      }
      try {
        sessions?.addEvent({ t: Date.now(), level: 'error', kind: 'internal_error', text: reason });
        sessions?.finish('aborted');
      } catch {
        // a store that cannot take the note must not hold up the exit
      }
    },
    async close() {
      if (closed) return;
      closed = true;
      // A run in progress is cut through its runner (STOP first) so it ends as aborted.
      sequences.cut('daemon stopping');
      calibration.close();
      zero.close();
      // A bench that may be turning is cut with STOP first (waiting briefly for its ACK so the STOP is on the wire
      // before the port closes), which latches estop for the next host to see. A bench at rest is left as it is.
      // Either way the session then ends with BYE, so the device does not latch heartbeat loss once the port
      // closes: a completed sweep leaves the board disarmed with no fault (PROTOCOL.md, Ending a session).
      if (mayTurn(controller.state) || controller.view().armed) {
        const sent = link.sendUrgent('estop');
        if (sent) await Promise.race([sent.acked.catch(() => {}), new Promise((r) => setTimeout(r, 300))]);
      }
      await link.bye();
      clearInterval(linkTick);
      clearInterval(liveness);
      loop.stop();
      interlocks.close();
      // A session still open when the daemon is stopped was ended by the operator.
      sessions?.finish('aborted');
      store?.close();
      await webSide.close();
      await link.close();
    },
  };
}
