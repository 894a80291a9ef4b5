// Which data becomes which session. A session starts when the bench is armed and ends when it goes back to
// safe (completed), trips (tripped) or loses the device (interrupted). A sequence run manages its own
// session instead: it prepares the context (title, tags, the sequence), and sets the outcome itself, so an
// aborted sweep is not recorded as completed because it ended disarmed.
//
// Recording never stands in the way of control: the recorder buffers and retries on its own, and its errors
// become events for the operator.

import type { BenchEvent, DeviceIdentity } from '../api/messages.js';
import type { RigSpec } from '../model/rig-types.js';
import type { MountedPart } from '../parts/types.js';
import { describeIncomplete, type RecordSummary, type SessionRecorder } from '../store/recorder.js';
import type { FinalOutcome } from '../store/types.js';
import type { SessionStore } from '../store/store.js';
import type { AtmosphereRecord, StoredEvent } from '../store/types.js';
import type { Calibration } from './calibration.js';
import { linkCounters, type LinkCounters } from '../link/link.js';
import type { LinkView } from '../api/messages.js';
import type { BenchController } from './controller.js';
import type { OperatingPoint } from './operating-point.js';
import type { Sample } from './telemetry.js';

export interface SessionIntent {
  title?: string;
  tags?: string[];
  notes?: string;
  sequence?: unknown;
  /** The caller sets the outcome with finish(); the keeper does not end the session on disarm. */
  managed?: boolean;
}

export interface RecordingContext {
  rig: RigSpec | null;
  /** The library revisions mounted, linked to the session (empty for a rig from a file alone). */
  mount?: MountedPart[];
  calibration: Calibration;
  atmosphere: AtmosphereRecord | null;
  firmware: DeviceIdentity | null;
}

export class SessionKeeper {
  private rec: SessionRecorder | null = null;
  private intent: SessionIntent | null = null;
  private managed = false;
  /** Told of every session opened; returns events to write into it first (the zero step of the run). */
  onBegin: ((id: number) => StoredEvent[]) | null = null;
  /** The link's view, when the daemon wires it: each session records its own share of the link counters. */
  linkView: (() => LinkView) | null = null;
  private linkAtBegin: LinkCounters | null = null;

  constructor(
    private readonly store: SessionStore,
    controller: BenchController,
    private readonly context: () => RecordingContext,
    private readonly tell: (event: BenchEvent) => void,
  ) {
    controller.on('transition', (tr) => {
      if (tr.to === 'armed' && tr.from === 'safe' && !this.rec) this.begin();
      else if (this.rec && !this.managed) {
        if (tr.to === 'safe') this.finish('completed');
        // The trip's own record (rule, value, limit, sample) is written right after this transition, by the
        // same call that cut the throttle: close the session only once that is in.
        else if (tr.to === 'tripped') {
          const rec = this.rec;
          setImmediate(() => {
            if (this.rec === rec) this.finish('tripped');
          });
        }
        else if (tr.to === 'disconnected') this.finish('interrupted');
      }
    });
    controller.on('event', (e) => this.rec?.addEvent(e));
  }

  get sessionId(): number | null {
    return this.rec?.id ?? null;
  }

  /** Context for the next session, or, when one is already open, starts a fresh one with it now. */
  prepare(intent: SessionIntent): number | null {
    this.intent = intent;
    if (intent.managed) return this.begin();
    return null;
  }

  addSample(s: Sample): void {
    this.rec?.addSample(s);
  }

  addPoint(p: OperatingPoint): void {
    this.rec?.addPoint(p);
  }

  /** An event for the open session's record only (the caller tells the operator itself). */
  addEvent(e: BenchEvent): void {
    this.rec?.addEvent(e);
  }

  /** A trip with its rule, value, limit and the offending sample, as structured data. */
  addTrip(rule: string, value: number, limit: number, detail: string, sample: Sample | null): void {
    this.rec?.addEvent({ t: Date.now(), level: 'error', kind: 'trip', text: `${rule}: ${detail}`, data: { rule, value, limit, sample } });
  }

  /** Ends the open session; what it holds against what was taken, or null when none was open. */
  finish(outcome: FinalOutcome): RecordSummary | null {
    const rec = this.rec;
    this.rec = null;
    this.managed = false;
    if (rec && this.linkView) {
      // Dropped and bad lines belong to the record: a sweep measured through a noisy cable must say so.
      const c = linkCounters(this.linkView(), this.linkAtBegin);
      rec.addEvent({
        t: Date.now(),
        level: c.lines_bad_total > 0 || c.seq_gaps > 0 || c.write_dropped > 0 ? 'warn' : 'info',
        kind: 'link',
        text: `link: ${c.lines_ok} lines, ${c.lines_bad_total} bad, ${c.seq_gaps} missing by sequence number, ${c.write_dropped} writes dropped`,
        data: c,
      });
    }
    if (!rec) return null;
    const summary = rec.finish(outcome);
    if (!summary.complete) {
      this.tell({ t: Date.now(), level: 'error', kind: 'recording', text: `session ${rec.id} ${outcome}, ${describeIncomplete(summary)} (disk full or unwritable)` });
    }
    return summary;
  }

  private begin(): number | null {
    if (this.rec) this.finish(this.managed ? 'interrupted' : 'completed');
    const intent = this.intent ?? {};
    this.intent = null;
    this.managed = intent.managed ?? false;
    const ctx = this.context();
    const when = new Date();
    this.linkAtBegin = this.linkView ? linkCounters(this.linkView()) : null;
    try {
      this.rec = this.store.record(
      {
        title: intent.title ?? `${ctx.rig?.name ?? 'bench'} ${when.toISOString().slice(0, 16).replace('T', ' ')}`,
        tags: intent.tags ?? [],
        ...(intent.notes !== undefined ? { notes: intent.notes } : {}),
        rig: ctx.rig,
        ...(ctx.mount?.length ? { mount: ctx.mount } : {}),
        calibration: ctx.calibration,
        atmosphere: ctx.atmosphere,
        firmware: ctx.firmware,
        ...(intent.sequence !== undefined ? { sequence: intent.sequence } : {}),
      },
      {
        onError: (e) =>
          this.tell({
            t: Date.now(),
            level: 'error',
            kind: 'recording',
            text: `recording session ${e.sessionId} failed (${e.code ?? 'error'}: ${e.message}); ${e.pendingSamples} samples held in memory; bench control is unaffected`,
          }),
        onRecovered: ({ dropped }) =>
          this.tell({ t: Date.now(), level: 'warn', kind: 'recording', text: `recording works again${dropped ? `; ${dropped} samples were lost` : ''}` }),
      },
      );
    } catch (err) {
      // A store that cannot even open a session (disk already full, database locked) must not stop the bench
      // from arming, and the operator must hear that this run is not being recorded.
      this.rec = null;
      this.managed = false;
      this.tell({ t: Date.now(), level: 'error', kind: 'recording', text: `this run is NOT being recorded: ${(err as Error).message}; bench control is unaffected` });
      return null;
    }
    for (const e of this.onBegin?.(this.rec.id) ?? []) this.rec.addEvent(e);
    return this.rec.id;
  }
}
