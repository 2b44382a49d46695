-- Migration 0008_import_chunk_uncompressed (SQLite).
-- Hand-written: the schema did not change (`npm run db:migration:new -- <name> --empty`).
-- Runs inside one transaction with any other pending migration. Once applied anywhere, never
-- edit it: its checksum is recorded; make a new migration instead.

-- Nothing to do on SQLite: it stores blobs as they are. (On PostgreSQL this migration turns off
-- the compression of staged upload chunks; both databases keep the same list of migrations.)
SELECT 1;
