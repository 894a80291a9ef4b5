// Redraw timing for the dashboard. Samples arrive in bursts (a batch every 50 ms, several messages per batch
// after a stall) and each must not cost a full chart draw; and with software raster (no GPU) six charts
// redrawn in one frame take several frames' worth of time, so the charts take turns (DrawScheduler).
// No DOM here beyond requestAnimationFrame and timers, which the tests replace.

export type FrameRequest = (cb: () => void) => number;
export type FrameCancel = (handle: number) => void;

/** Coalesces redraw requests to at most one per animation frame. */
export class FrameCoalescer {
  private _handle: number | null = null;

  constructor(
    private readonly _draw: () => void,
    private readonly _request: FrameRequest = (cb) => requestAnimationFrame(cb),
    private readonly _cancel: FrameCancel = (h) => cancelAnimationFrame(h),
  ) {}

  get pending(): boolean {
    return this._handle !== null;
  }

  schedule(): void {
    if (this._handle !== null) return;
    this._handle = this._request(() => {
      this._handle = null;
      this._draw();
    });
  }

  cancel(): void {
    if (this._handle === null) return;
    this._cancel(this._handle);
    this._handle = null;
  }
}

/** What a DrawScheduler needs of its surroundings; the defaults are the browser's. */
export interface SchedulerHost {
  requestFrame: FrameRequest;
  cancelFrame: FrameCancel;
  setTimer: (cb: () => void, ms: number) => number;
  clearTimer: (handle: number) => void;
  now: () => number;
}

const BROWSER: SchedulerHost = {
  requestFrame: (cb) => requestAnimationFrame(cb),
  cancelFrame: (h) => cancelAnimationFrame(h),
  setTimer: (cb, ms) => setTimeout(cb, ms) as unknown as number,
  clearTimer: (h) => clearTimeout(h),
  now: () => performance.now(),
};

export interface DrawJobOptions {
  /** Least time between two draws of this job, read at every decision (it may follow the chart window). */
  minIntervalMs: () => number;
  /** Share of a frame's budget one draw takes (a live chart 1, the scatter 2). */
  cost: number;
}

/** One element's place in a DrawScheduler. */
export interface DrawJob {
  /** Asks for a draw: in the next frame if the job's interval has passed and the frame has room, else later. */
  request(): void;
  /** Forgets a pending request. */
  cancel(): void;
  /** Leaves the scheduler for good (the element left the page). */
  release(): void;
  readonly pending: boolean;
}

interface Job {
  draw: () => void;
  opts: DrawJobOptions;
  dirty: boolean;
  lastDraw: number;
  live: boolean;
}

/**
 * Shares animation frames between the charts. Each frame it draws the jobs whose interval has passed, the one
 * waiting longest first, until the frame's budget is spent (the first always runs), and leaves the rest for
 * the next frames. Nothing is requested while no job is due: a timer wakes it at the next due time, so an idle
 * page asks for no frames. Each draw runs inside requestAnimationFrame, so what it changes is painted in that
 * same frame.
 */
export class DrawScheduler {
  private readonly _jobs = new Set<Job>();
  private _frame: number | null = null;
  private _timer: number | null = null;
  private _timerAt = Infinity;

  constructor(
    /** Budget of one frame, in job costs. */
    readonly budget = 2,
    private readonly _host: SchedulerHost = BROWSER,
  ) {}

  add(draw: () => void, opts: DrawJobOptions): DrawJob {
    const job: Job = { draw, opts, dirty: false, lastDraw: -Infinity, live: true };
    this._jobs.add(job);
    return {
      request: () => {
        if (!job.live) return;
        job.dirty = true;
        this._plan();
      },
      cancel: () => {
        job.dirty = false;
      },
      release: () => {
        job.live = false;
        job.dirty = false;
        this._jobs.delete(job);
        if (this._jobs.size === 0) this._stop();
      },
      get pending() {
        return job.dirty;
      },
    };
  }

  private _due(job: Job): number {
    return job.lastDraw + job.opts.minIntervalMs();
  }

  /** Makes sure a frame or a timer is coming for the earliest due job. */
  private _plan(): void {
    if (this._frame !== null) return; // the frame will plan again after it has drawn
    let at = Infinity;
    for (const j of this._jobs) if (j.dirty) at = Math.min(at, this._due(j));
    if (at === Infinity) return;
    const now = this._host.now();
    if (at <= now) {
      this._clearTimer();
      this._frame = this._host.requestFrame(() => this._run());
      return;
    }
    if (this._timer !== null && this._timerAt <= at) return;
    this._clearTimer();
    this._timerAt = at;
    this._timer = this._host.setTimer(() => {
      this._timer = null;
      this._timerAt = Infinity;
      this._plan();
    }, at - now);
  }

  private _run(): void {
    this._frame = null;
    const now = this._host.now();
    const ready: Job[] = [];
    for (const j of this._jobs) if (j.dirty && this._due(j) <= now) ready.push(j);
    ready.sort((a, b) => a.lastDraw - b.lastDraw);
    let spent = 0;
    let failure: unknown = null;
    for (const j of ready) {
      if (spent > 0 && spent + j.opts.cost > this.budget) break;
      spent += j.opts.cost;
      j.dirty = false;
      j.lastDraw = now;
      try {
        j.draw();
      } catch (err) {
        failure ??= err; // one chart's failure must not stop the others drawing
      }
    }
    this._plan();
    if (failure !== null) throw failure;
  }

  private _clearTimer(): void {
    if (this._timer === null) return;
    this._host.clearTimer(this._timer);
    this._timer = null;
    this._timerAt = Infinity;
  }

  private _stop(): void {
    this._clearTimer();
    if (this._frame !== null) this._host.cancelFrame(this._frame);
    this._frame = null;
  }
}

/** The page's one scheduler: every chart and the readouts take turns in it. */
let shared: DrawScheduler | null = null;
export function pageScheduler(): DrawScheduler {
  shared ??= new DrawScheduler();
  return shared;
}
