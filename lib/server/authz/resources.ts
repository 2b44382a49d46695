/**
 * Which team owns a resource. The wrapper resolves the resource an action names to its team,
 * then checks the caller's membership of that team; an unknown id and another team's id look
 * the same to the caller (404), so ids do not leak.
 *
 * To make a new kind of resource addressable, add it to ResourceRef and to teamOfResource.
 */
import type { Db, DbTx } from '../db';

export type ResourceRef =
  | { teamId: string }
  | { projectId: string }
  | { invitationId: string }
  | { membershipId: string }
  | { tokenId: string };

export async function teamOfResource(client: Db | DbTx, ref: ResourceRef): Promise<string | null> {
  if ('teamId' in ref) {
    const team = await client.team.findUnique({ where: { id: ref.teamId }, select: { id: true } });
    return team?.id ?? null;
  }
  if ('projectId' in ref) {
    const p = await client.project.findUnique({ where: { id: ref.projectId }, select: { teamId: true } });
    return p?.teamId ?? null;
  }
  if ('invitationId' in ref) {
    const i = await client.invitation.findUnique({ where: { id: ref.invitationId }, select: { teamId: true } });
    return i?.teamId ?? null;
  }
  if ('tokenId' in ref) {
    const t = await client.pipelineToken.findUnique({ where: { id: ref.tokenId }, select: { project: { select: { teamId: true } } } });
    return t?.project.teamId ?? null;
  }
  const m = await client.membership.findUnique({ where: { id: ref.membershipId }, select: { teamId: true } });
  return m?.teamId ?? null;
}
