// A typed event emitter: event names and payloads are checked by the compiler, so a misspelt event is a
// build error rather than a listener that silently never fires.

export type Listener<T> = (payload: T) => void;

export class TypedEmitter<Events extends { [K in keyof Events]: unknown }> {
  private listeners: { [K in keyof Events]?: Set<Listener<Events[K]>> } = {};

  on<K extends keyof Events>(event: K, fn: Listener<Events[K]>): () => void {
    (this.listeners[event] ??= new Set()).add(fn);
    return () => this.off(event, fn);
  }

  off<K extends keyof Events>(event: K, fn: Listener<Events[K]>): void {
    this.listeners[event]?.delete(fn);
  }

  once<K extends keyof Events>(event: K, fn: Listener<Events[K]>): () => void {
    const off = this.on(event, (p) => {
      off();
      fn(p);
    });
    return off;
  }

  protected emit<K extends keyof Events>(event: K, payload: Events[K]): void {
    const set = this.listeners[event];
    if (!set) return;
    // A listener that throws must not stop the others (one of them may be the safety path). Iterating the
    // Set itself (no copy: this is on the per-line path) is safe when a listener removes itself.
    for (const fn of set) {
      try {
        fn(payload);
      } catch (err) {
        console.error(`ductbench: listener for ${String(event)} failed:`, err);
      }
    }
  }
}
