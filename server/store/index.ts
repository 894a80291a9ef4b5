// The session store's public surface, for the daemon and the CLI.
export { SessionStore, DEFAULT_DATA_DIR, DB_FILE, normalizeTag, type StoreOptions } from './store.js';
export { SessionRecorder, type RecorderOptions, type RecorderWriteError, type RecorderState } from './recorder.js';
export { StoreError, SessionNotFound, SchemaTooNew, InvalidInput, ImportError, sqliteCode } from './errors.js';
export { writeCsv, writeJson, importText, exportToString, type CsvWhat, type ImportResult } from './exchange.js';
export { SCHEMA_VERSION, MIGRATIONS, migrate } from './schema.js';
export type * from './types.js';
