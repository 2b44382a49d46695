-- Migration 0002_audit_append_only (SQLite).
-- Hand-written: the schema did not change (`npm run db:migration:new -- <name> --empty`).
-- Runs inside one transaction with any other pending migration. Once applied anywhere, never
-- edit it: its checksum is recorded; make a new migration instead.

-- The audit log is append-only: refuse UPDATE and DELETE of AuditEvent rows.
-- Note: a future migration that rebuilds the AuditEvent table (create, copy, drop, rename) drops
-- these triggers with the old table and must create them again.

CREATE TRIGGER "AuditEvent_refuse_update" BEFORE UPDATE ON "AuditEvent"
BEGIN
    SELECT RAISE(ABORT, 'AuditEvent is append-only: UPDATE is not allowed');
END;

CREATE TRIGGER "AuditEvent_refuse_delete" BEFORE DELETE ON "AuditEvent"
BEGIN
    SELECT RAISE(ABORT, 'AuditEvent is append-only: DELETE is not allowed');
END;
