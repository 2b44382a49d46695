/**
 * Team scope: the required first argument of every team-owned data-access function.
 *
 * A scope is minted only after membership of that team was checked against the database in
 * this request (lib/server/authz/define.ts and page.ts), or for a team being created in the same
 * transaction. The brand keeps a bare `{ teamId }` object literal from type-checking as a scope,
 * so a data-access call cannot be written with an unchecked id by accident.
 */
declare const scopeBrand: unique symbol;

export type TeamScope = { readonly teamId: string; readonly [scopeBrand]: true };

/** Per-user (not team-owned) data, e.g. the list of a user's own teams. */
export type UserScope = { readonly userId: string };

/**
 * For the authorization layer only (and team creation): wraps a team id whose membership check
 * has just passed. Do not call from actions, pages or components.
 */
export function mintTeamScope(teamId: string): TeamScope {
  return { teamId } as TeamScope;
}
