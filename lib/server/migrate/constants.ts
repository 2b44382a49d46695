/** The migration runner's bookkeeping table (name, checksum, applied_at, execution_ms). */
export const MIGRATIONS_TABLE = '_borderline_migrations';

/** Migration folder names: four-digit sequence, underscore, lower-case words. */
export const MIGRATION_NAME = /^(\d{4})_([a-z0-9]+(?:_[a-z0-9]+)*)$/;

/** Key of the PostgreSQL advisory lock held while migrating (any fixed 64-bit number). */
export const PG_MIGRATION_LOCK_KEY = 4_736_281_930_117n;

/** How long a second starter waits for the first to finish migrating. */
export const MIGRATION_LOCK_WAIT_MS = 60_000;
