// Small formatting helpers shared by the panels.
import type { BenchState, LinkStatus } from '../../../server/api/messages.js';
import type { ConnectionState } from '../data/connection.js';

export function fmt(v: number | null | undefined, decimals: number): string {
  return typeof v === 'number' && Number.isFinite(v) ? v.toFixed(decimals) : '—';
}

export function fmtPercent(fraction: number | null | undefined, decimals = 1): string {
  return typeof fraction === 'number' && Number.isFinite(fraction) ? `${(fraction * 100).toFixed(decimals)} %` : '—';
}

export function fmtAgo(thenMs: number, nowMs: number): string {
  const s = Math.max(0, Math.round((nowMs - thenMs) / 1000));
  if (s < 60) return `${s} s ago`;
  if (s < 3600) return `${Math.floor(s / 60)} min ${s % 60} s ago`;
  return `${Math.floor(s / 3600)} h ${Math.floor((s % 3600) / 60)} min ago`;
}

export function fmtClock(ms: number): string {
  const d = new Date(ms);
  return d.toLocaleTimeString(undefined, { hour12: false });
}

export type Tone = 'good' | 'warn' | 'bad' | '';

export function benchTone(s: BenchState | undefined): Tone {
  switch (s) {
    case 'safe':
      return 'good';
    case 'armed':
    case 'running':
      return 'warn';
    case 'tripped':
      return 'bad';
    default:
      return '';
  }
}

export function linkTone(s: LinkStatus | undefined): Tone {
  if (s === 'ready') return 'good';
  if (s === 'reconnecting' || s === 'opening' || s === 'handshaking') return 'warn';
  if (s === 'closed') return 'bad';
  return '';
}

export function connectionTone(s: ConnectionState): Tone {
  if (s === 'live') return 'good';
  if (s === 'connecting' || s === 'syncing' || s === 'waiting') return 'warn';
  if (s === 'refused' || s === 'no_token') return 'bad';
  return '';
}
