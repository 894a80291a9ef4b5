// A very small context: an element asks up the tree (through shadow roots) for the dashboard's shared state
// by dispatching one event; the nearest provider answers synchronously. Saves handing the client to every
// element as a property, without pulling in a context library.

import type { ReactiveController, ReactiveControllerHost } from 'lit';
import type { BenchClient, ClientChange } from './client.js';
import type { Preferences } from './units.js';
import type { SessionsApi } from './api.js';

export interface Dashboard {
  client: BenchClient;
  prefs: Preferences;
  /** The sessions HTTP API (null without a token). */
  api?: SessionsApi | null;
}

const REQUEST = 'db-context-request';

interface RequestDetail {
  answer: ((d: Dashboard) => void) | null;
}

export function provideDashboard(host: HTMLElement, dashboard: Dashboard): () => void {
  const onRequest = (e: Event) => {
    const detail = (e as CustomEvent<RequestDetail>).detail;
    if (!detail?.answer) return;
    e.stopPropagation();
    detail.answer(dashboard);
    detail.answer = null;
  };
  host.addEventListener(REQUEST, onRequest);
  return () => host.removeEventListener(REQUEST, onRequest);
}

export function requestDashboard(el: HTMLElement): Dashboard | null {
  let found: Dashboard | null = null;
  const detail: RequestDetail = { answer: (d) => (found = d) };
  el.dispatchEvent(new CustomEvent<RequestDetail>(REQUEST, { detail, bubbles: true, composed: true }));
  return found;
}

/**
 * Connects an element to the dashboard while it is in the page: finds the provider, re-renders the host on
 * the listed client changes (and on preference changes), and lets go of both subscriptions when the element
 * leaves the page.
 */
export class DashboardController implements ReactiveController {
  dashboard: Dashboard | null = null;
  private _release: (() => void)[] = [];

  constructor(
    private readonly _host: ReactiveControllerHost & HTMLElement,
    private readonly _changes: readonly ClientChange[],
    private readonly _onChange?: (change: ClientChange | 'prefs') => void,
  ) {
    _host.addController(this);
  }

  get client(): BenchClient | null {
    return this.dashboard?.client ?? null;
  }
  get prefs(): Preferences | null {
    return this.dashboard?.prefs ?? null;
  }

  hostConnected(): void {
    this.dashboard = requestDashboard(this._host);
    const d = this.dashboard;
    if (!d) return;
    const wanted = new Set<ClientChange>(this._changes);
    this._release.push(
      d.client.subscribe((c) => {
        if (!wanted.has(c)) return;
        if (this._onChange) this._onChange(c);
        else this._host.requestUpdate();
      }),
      d.prefs.subscribe(() => {
        if (this._onChange) this._onChange('prefs');
        else this._host.requestUpdate();
      }),
    );
  }

  hostDisconnected(): void {
    for (const r of this._release.splice(0)) r();
    this.dashboard = null;
  }
}
