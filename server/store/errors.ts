// Typed errors of the session store. A missing session, a malformed import and a database the code is too old
// for are different problems with different remedies; callers tell them apart by class, not by message text.

export class StoreError extends Error {
  constructor(message: string, options?: { cause?: unknown }) {
    super(message, options);
    this.name = 'StoreError';
  }
}

export class SessionNotFound extends StoreError {
  constructor(readonly id: number) {
    super(`no session with id ${id}`);
    this.name = 'SessionNotFound';
  }
}

/** The database was written by a newer ductbench (its schema version is above what this code knows). */
export class SchemaTooNew extends StoreError {
  constructor(readonly found: number, readonly known: number) {
    super(`the session database has schema version ${found}, this ductbench knows up to ${known}: upgrade ductbench`);
    this.name = 'SchemaTooNew';
  }
}

export class InvalidInput extends StoreError {
  constructor(message: string) {
    super(message);
    this.name = 'InvalidInput';
  }
}

/** A file offered for import is not a ductbench export, or is damaged; `line` is 1-based. */
export class ImportError extends StoreError {
  constructor(readonly line: number | null, readonly problem: string) {
    super(line === null ? problem : `line ${line}: ${problem}`);
    this.name = 'ImportError';
  }
}

/** The SQLite result code of an error thrown by better-sqlite3, e.g. "SQLITE_FULL", or null. */
export function sqliteCode(err: unknown): string | null {
  const code = (err as { code?: unknown } | null)?.code;
  return typeof code === 'string' && code.startsWith('SQLITE_') ? code : null;
}
