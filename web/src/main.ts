// Entry point: takes the token from the URL, builds the data layer and the page, connects.
import './styles.css';
import './components/app.js';
import { BenchClient, type SocketLike } from './data/client.js';
import { takeToken, socketUrl } from './data/token.js';
import { Preferences } from './data/units.js';
import { SessionsApi } from './data/api.js';
import type { DbApp } from './components/app.js';

function storage(kind: 'localStorage' | 'sessionStorage'): Storage | null {
  try {
    return window[kind];
  } catch {
    return null; // storage disabled: preferences and the token then last only as long as the page
  }
}

const token = takeToken(location, history, storage('sessionStorage'));
const client = new BenchClient({
  url: token ? socketUrl(location.href, token) : null,
  // The browser's WebSocket has the same members; its handler types are just wider than ours.
  socketFactory: (url) => new WebSocket(url) as unknown as SocketLike,
});
const prefs = new Preferences(storage('localStorage'));

const app = document.createElement('db-app') as DbApp;
const api = token ? new SessionsApi(location.origin, token, (url, init) => fetch(url, init)) : null;
app.dashboard = { client, prefs, api };
document.body.prepend(app);
client.start();

// Back/forward cache: close cleanly when the page is put away, reconnect (and re-sync) when it returns.
addEventListener('pagehide', (e) => {
  if (e.persisted) client.close();
});
addEventListener('pageshow', (e) => {
  if (e.persisted) client.start();
});
