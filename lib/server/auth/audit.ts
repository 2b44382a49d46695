/**
 * Audit log helpers. AuditEvent is append-only (the migrations refuse UPDATE and DELETE), so
 * these only insert. Pass the transaction client when the event belongs to a change, so the
 * change and its record commit together.
 *
 * Never put secrets in `detail`: no passwords, tokens, token hashes or session cookies.
 */
import type { AuditAction } from '../../domain';
import type { Db, DbTx } from '../db';

export type AuditEventInput = {
  action: AuditAction;
  teamId?: string | null;
  userId?: string | null;
  targetType?: string;
  targetId?: string;
  detail?: Record<string, string | number | boolean | null>;
  address?: string | null;
};

export async function recordAudit(client: Db | DbTx, event: AuditEventInput): Promise<void> {
  await client.auditEvent.create({
    data: {
      action: event.action,
      teamId: event.teamId ?? null,
      userId: event.userId ?? null,
      targetType: event.targetType ?? '',
      targetId: event.targetId ?? '',
      detail: JSON.stringify(event.detail ?? {}),
      address: event.address ?? null,
    },
  });
}
