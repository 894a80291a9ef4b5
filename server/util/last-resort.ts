// The process-level policy for an exception that escapes every handler (a bug, by definition: request
// handlers are total and answer 500 on their own failures). The daemon's state after it is unknown, so it does
// not carry on as if nothing happened: the throttle is cut first (STOP on the wire, synchronously), the cause is
// written into the session being recorded and the session ends as aborted, then the daemon closes and the
// process exits with EXIT_INTERNAL. Should closing hang, the process exits anyway after a grace period; the
// firmware's heartbeat time-out covers whatever the host did not manage to say.

/** sysexits.h EX_SOFTWARE: an internal software error. */
export const EXIT_INTERNAL = 70;
/** How long the orderly close may take before the process exits regardless. */
export const LAST_RESORT_GRACE_MS = 2000;

export interface LastResortTarget {
  /** Cuts the throttle and records the cause in the open session; must not throw, must not wait. */
  fatal(reason: string): void;
  close(): Promise<void>;
}

export interface LastResortOptions {
  log?: (line: string) => void;
  exit?: (code: number) => void;
}

/** Installs the policy; returns a function that removes it (for an orderly shutdown). */
export function installLastResort(target: LastResortTarget, opts: LastResortOptions = {}): () => void {
  const log = opts.log ?? ((l: string) => process.stderr.write(l + '\n'));
  const exit = opts.exit ?? ((code: number) => process.exit(code));
  let handling = false;
  const onEscape = (what: string) => (err: unknown) => {
    const text = err instanceof Error ? `${err.name}: ${err.message}` : String(err);
    if (handling) {
      log(`ductbench: a further ${what} while stopping: ${text}`);
      return;
    }
    handling = true;
    try {
      target.fatal(`internal error (${what}): ${text}`);
    } catch {
      // The cut is attempted before anything else; if even that failed, the heartbeat time-out stops the motor.
    }
    log(`ductbench: internal error (${what}): ${text}; throttle cut, session closed, exiting`);
    if (err instanceof Error && err.stack) log(err.stack);
    const timer = setTimeout(() => exit(EXIT_INTERNAL), LAST_RESORT_GRACE_MS);
    timer.unref();
    target.close().then(
      () => exit(EXIT_INTERNAL),
      () => exit(EXIT_INTERNAL),
    );
  };
  const onException = onEscape('uncaught exception');
  const onRejection = onEscape('unhandled rejection');
  process.on('uncaughtException', onException);
  process.on('unhandledRejection', onRejection);
  return () => {
    process.off('uncaughtException', onException);
    process.off('unhandledRejection', onRejection);
  };
}
