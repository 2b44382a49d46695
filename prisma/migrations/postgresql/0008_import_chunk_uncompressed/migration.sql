-- Migration 0008_import_chunk_uncompressed (PostgreSQL).
-- Hand-written: the schema did not change (`npm run db:migration:new -- <name> --empty`).
-- Runs inside one transaction with any other pending migration. Once applied anywhere, never
-- edit it: its checksum is recorded; make a new migration instead.

-- Staged upload chunks are stored uncompressed (out of line, no pglz): they live only until a
-- worker has applied the import, and compressing each 4 MB chunk took PostgreSQL about 200 ms of a
-- core per chunk while reviewers' requests waited for it (uncompressed: 25-50 ms; bench:team and a
-- measurement of the three ways, DEVELOPERS.md "Imports on the job system"). Existing rows keep
-- their form; only new chunks are affected.
ALTER TABLE "ImportChunk" ALTER COLUMN "data" SET STORAGE EXTERNAL;
