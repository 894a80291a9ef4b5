// Interlock reaction time through the daemon's real path, over a pty: the producer plays a board streaming
// telemetry at a fixed rate; the bench arms it, the board sends one line with the bus current above the
// max_current_a limit, the max_current rule trips, the controller writes STOP why=host_trip, the board latches
// and reports host_trip, the bench acknowledges (CLEAR) and arms again. Each sample is one genuine trip.
//
// Measured per trip, host side: TripRecord.cutWrittenAt - arrivedAt (the offending line handled to the STOP
// handed to the kernel; the serial transport writes it synchronously). Cross-checks, device side, on the
// monotonic clock both processes share: the STOP's arrival at the board minus the host's arrivedAt (adds the
// pty transit back), and the board's round trip from writing the offending line to reading the STOP.
//
// debounce_ms is set to 0 here: the debounce is a deliberate wait (one noisy sample is not a fault) and
// would only add its own length; what is measured is the reaction once a rule decides.

import type { TripRecord } from '../server/bench/controller.js';
import { startDaemon } from '../server/daemon.js';
import { TRIP_LIMIT_A, perfToMonoOffset, spread, until, withProducer, type Spread } from './common.js';

export interface CutLatency {
  rate_hz: number;
  trips: number;
  /** arrivedAt -> cutWrittenAt, host clock. */
  cut: Spread;
  /** arrivedAt (host) -> STOP read by the board (device side). */
  to_device: Spread | null;
  /** Offending line written by the board -> STOP read by the board. */
  round_trip: Spread | null;
  /** Trips the board saw that the host did not record, or the other way round (should be 0). */
  unmatched: number;
}

export async function cutLatency(rateHz: number, trips: number, budgetMs: number): Promise<CutLatency> {
  return withProducer('trips', 0, rateHz, async (p) => {
    const d = await startDaemon({
      source: { kind: 'serial', path: p.path },
      httpPort: 0,
      log: () => {},
      limits: { max_current_a: TRIP_LIMIT_A, debounce_ms: 0 },
    });
    const records: TripRecord[] = [];
    d.controller.on('trip', (r) => records.push(r));
    const offset = perfToMonoOffset();
    try {
      await d.firstConnect;
      await until(() => d.controller.state === 'safe', 10_000, 'bench safe');
      const end = Date.now() + budgetMs;
      while (records.length < trips && Date.now() < end) {
        const before = records.length;
        await d.controller.arm();
        await until(() => records.length > before, 5_000, 'a trip');
        // The board latches host_trip and says so; only then is there a fault to clear.
        await until(() => d.controller.view().fault === 'host_trip', 5_000, 'the board to report host_trip');
        await d.controller.acknowledge();
        await until(() => d.controller.state === 'safe', 5_000, 'safe after acknowledge');
      }
      const rep = await p.report();
      const cut = records.filter((r) => r.cutWrittenAt !== null).map((r) => r.cutWrittenAt! - r.arrivedAt);
      const stops = rep.stopArrivedAt.filter((s) => s.why === 'host_trip');
      const matched = Math.min(stops.length, records.length, rep.offendingWrittenAt.length);
      const toDevice: number[] = [];
      const roundTrip: number[] = [];
      for (let k = 0; k < matched; k++) {
        toDevice.push(stops[k].at - (records[k].arrivedAt + offset));
        roundTrip.push(stops[k].at - rep.offendingWrittenAt[k]);
      }
      return {
        rate_hz: rateHz,
        trips: records.length,
        cut: spread(cut),
        to_device: matched ? spread(toDevice) : null,
        round_trip: matched ? spread(roundTrip) : null,
        unmatched: Math.abs(stops.length - records.length),
      };
    } finally {
      await d.close();
    }
  });
}
