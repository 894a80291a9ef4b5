// The bench lifecycle as an explicit state machine: one pure transition function, a reason on every
// transition. The daemon feeds it inputs (link and device status, host trips, operator acknowledgement)
// and broadcasts and records every transition it returns.
//
//   disconnected --link_opening--> connecting --link_ready--> safe --device armed--> armed
//   armed --device output > 0--> running --output 0--> armed --device disarmed--> safe
//   any connected state --host trip / device fault--> tripped --operator acknowledges--> safe | disconnected
//   any state but tripped --link lost--> disconnected   (a trip stays latched through a lost link)

import type { FaultCode } from '../../firmware-protocol/src/messages.js';
import type { BenchState } from '../api/messages.js';

export type BenchInput =
  | { kind: 'link_opening'; source: string }
  | { kind: 'link_ready'; firmware: string }
  | { kind: 'link_lost'; why: string }
  | { kind: 'device_status'; armed: boolean; output: number; fault: FaultCode }
  | { kind: 'host_trip'; rule: string; detail: string }
  | { kind: 'acknowledge'; linkReady: boolean; deviceFault: FaultCode };

export interface Transition {
  from: BenchState;
  to: BenchState;
  reason: string;
}

/** Output above this counts as spinning (the ESC's own dead band is far larger). */
const RUNNING_OUTPUT = 0.0005;

/** Returns the transition an input causes, or null when the input leaves the state as it is. */
export function nextState(state: BenchState, input: BenchInput): Transition | null {
  const to = (next: BenchState, reason: string): Transition | null => (next === state ? null : { from: state, to: next, reason });
  switch (input.kind) {
    case 'link_opening':
      return state === 'tripped' ? null : to('connecting', `connecting to ${input.source}`);
    case 'link_ready':
      if (state === 'tripped') return null;
      return state === 'connecting' || state === 'disconnected' ? to('safe', `handshake done with ${input.firmware}; disarmed`) : null;
    case 'link_lost':
      return state === 'tripped' ? null : to('disconnected', input.why);
    case 'device_status': {
      if (state === 'disconnected' || state === 'connecting') return null;
      if (input.fault !== 'none') return state === 'tripped' ? null : to('tripped', `device latched fault ${input.fault}`);
      if (state === 'tripped') return null; // only the operator leaves tripped
      if (!input.armed) return to('safe', 'device disarmed');
      if (input.output > RUNNING_OUTPUT) return to('running', `output ${(input.output * 100).toFixed(1)} %`);
      return to('armed', state === 'running' ? 'output back to zero' : 'device armed at zero throttle');
    }
    case 'host_trip':
      if (state === 'disconnected' || state === 'tripped') return null;
      return to('tripped', `${input.rule}: ${input.detail}`);
    case 'acknowledge':
      if (state !== 'tripped') return null;
      if (input.deviceFault !== 'none') return null; // the device must clear first
      return to(input.linkReady ? 'safe' : 'disconnected', input.linkReady ? 'trip acknowledged by the operator; disarmed' : 'trip acknowledged; device not connected');
  }
}

/** States in which the motor may be energised. */
export function mayTurn(state: BenchState): boolean {
  return state === 'armed' || state === 'running';
}
