import { describe, expect, it } from 'vitest';
import { nextState, mayTurn, type BenchInput } from '../server/bench/state.js';
import type { BenchState } from '../server/api/messages.js';

const ALL: BenchState[] = ['disconnected', 'connecting', 'safe', 'armed', 'running', 'tripped'];
const status = (armed: boolean, output: number, fault: 'none' | 'estop' | 'heartbeat' = 'none'): BenchInput => ({ kind: 'device_status', armed, output, fault });

function run(start: BenchState, inputs: BenchInput[]): BenchState {
  let s = start;
  for (const i of inputs) s = nextState(s, i)?.to ?? s;
  return s;
}

describe('bench state machine', () => {
  it('walks the normal life cycle with a reason on every transition', () => {
    const steps: BenchInput[] = [
      { kind: 'link_opening', source: 'virtual bench' },
      { kind: 'link_ready', firmware: 'fw 1' },
      status(true, 0),
      status(true, 0.3),
      status(true, 0),
      status(false, 0),
    ];
    let s: BenchState = 'disconnected';
    const seen: string[] = [];
    for (const i of steps) {
      const tr = nextState(s, i);
      expect(tr).not.toBeNull();
      expect(tr!.from).toBe(s);
      expect(tr!.reason.length).toBeGreaterThan(3);
      s = tr!.to;
      seen.push(s);
    }
    expect(seen).toEqual(['connecting', 'safe', 'armed', 'running', 'armed', 'safe']);
  });

  it('a device fault trips from any connected state, and only acknowledgement leaves tripped', () => {
    for (const s of ['safe', 'armed', 'running'] as BenchState[]) {
      expect(nextState(s, status(false, 0, 'heartbeat'))?.to).toBe('tripped');
    }
    // while tripped, good status lines, link churn and arming reports do not leave it
    const stuck = run('tripped', [status(true, 0.5), status(false, 0), { kind: 'link_lost', why: 'unplug' }, { kind: 'link_ready', firmware: 'x' }]);
    expect(stuck).toBe('tripped');
    // acknowledgement is refused while the device still has its latch
    expect(nextState('tripped', { kind: 'acknowledge', linkReady: true, deviceFault: 'estop' })).toBeNull();
    expect(nextState('tripped', { kind: 'acknowledge', linkReady: true, deviceFault: 'none' })?.to).toBe('safe');
    expect(nextState('tripped', { kind: 'acknowledge', linkReady: false, deviceFault: 'none' })?.to).toBe('disconnected');
  });

  it('host trips apply to every connected state but not to a bench with no device', () => {
    for (const s of ALL) {
      const tr = nextState(s, { kind: 'host_trip', rule: 'max_current', detail: '41 A > 40 A' });
      if (s === 'disconnected' || s === 'tripped') expect(tr).toBeNull();
      else expect(tr?.to).toBe('tripped');
    }
  });

  it('losing the link from any untripped state lands in disconnected', () => {
    for (const s of ALL) {
      const tr = nextState(s, { kind: 'link_lost', why: 'unplugged' });
      if (s === 'tripped' || s === 'disconnected') expect(tr).toBeNull();
      else expect(tr?.to).toBe('disconnected');
    }
  });

  it('only armed and running may turn the motor', () => {
    expect(ALL.filter(mayTurn)).toEqual(['armed', 'running']);
  });

  it('device status before the handshake is ignored', () => {
    expect(nextState('connecting', status(true, 0.5))).toBeNull();
    expect(nextState('disconnected', status(true, 0.5))).toBeNull();
  });
});
