// The daemon prints http://127.0.0.1:PORT/?token=TOKEN. The token is taken from the query string once, kept
// in sessionStorage (a reload still works, another tab or a restarted browser does not inherit it) and wiped
// from the visible URL so it does not end up in screenshots, history or a pasted link.

const KEY = 'ductbench.token';

export interface TokenPlace {
  href: string;
}
export interface TokenHistory {
  replaceState(data: unknown, unused: string, url?: string | URL | null): void;
}

export function takeToken(location: TokenPlace, history: TokenHistory | null, store: Pick<Storage, 'getItem' | 'setItem'> | null): string | null {
  const url = new URL(location.href);
  const fromUrl = url.searchParams.get('token');
  if (fromUrl) {
    try {
      store?.setItem(KEY, fromUrl);
    } catch {
      // sessionStorage refused: the token still works until the page is reloaded.
    }
    url.searchParams.delete('token');
    history?.replaceState(null, '', url.pathname + url.search + url.hash);
    return fromUrl;
  }
  try {
    return store?.getItem(KEY) || null;
  } catch {
    return null;
  }
}

/** WebSocket address on the page's own origin (the daemon serves both). */
export function socketUrl(pageHref: string, token: string): string {
  const page = new URL(pageHref);
  const scheme = page.protocol === 'https:' ? 'wss:' : 'ws:';
  return `${scheme}//${page.host}/ws?token=${encodeURIComponent(token)}`;
}
