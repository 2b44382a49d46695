-- Migration 0002_audit_append_only (PostgreSQL).
-- Hand-written: the schema did not change (`npm run db:migration:new -- <name> --empty`).
-- Runs inside one transaction with any other pending migration. Once applied anywhere, never
-- edit it: its checksum is recorded; make a new migration instead.

-- The audit log is append-only: refuse UPDATE, DELETE and TRUNCATE of AuditEvent.

CREATE FUNCTION "borderline_audit_event_append_only"() RETURNS trigger
LANGUAGE plpgsql AS $$
BEGIN
    RAISE EXCEPTION 'AuditEvent is append-only: % is not allowed', TG_OP;
END;
$$;

CREATE TRIGGER "AuditEvent_refuse_update_delete" BEFORE UPDATE OR DELETE ON "AuditEvent"
    FOR EACH ROW EXECUTE FUNCTION "borderline_audit_event_append_only"();

CREATE TRIGGER "AuditEvent_refuse_truncate" BEFORE TRUNCATE ON "AuditEvent"
    FOR EACH STATEMENT EXECUTE FUNCTION "borderline_audit_event_append_only"();
