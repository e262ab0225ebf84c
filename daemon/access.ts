import { createHash, timingSafeEqual } from 'node:crypto';
import type { IncomingMessage } from 'node:http';
import { matchesStreamPattern } from '../protocol/index.js';

/**
 * Access tokens with roles and stream-name patterns. With no tokens configured access is open
 * (every connection may do everything). Tokens are compared in constant time through their
 * SHA-256 digests and never logged; a grant is named in logs by its `name` or its position.
 */

export type Role = 'produce' | 'watch' | 'admin';
export const ROLES: readonly Role[] = ['produce', 'watch', 'admin'];

export interface TokenGrant {
  token: string;
  roles: Role[];
  /** Stream-name patterns ('*' = any run of characters); default: every stream. */
  streams?: string[];
  /** How logs and metrics refer to this grant (never the token itself). */
  name?: string;
}

export interface Principal {
  /** Stable, loggable identity of the grant ('open' without tokens). */
  id: string;
  roles: ReadonlySet<Role>;
  streams: readonly string[];
}

export type AuthOutcome =
  | { ok: true; principal: Principal }
  | { ok: false; reason: 'token_missing' | 'token_unknown'; detail: string };

const digest = (s: string) => createHash('sha256').update(s, 'utf8').digest();

const OPEN: Principal = { id: 'open', roles: new Set(ROLES), streams: ['*'] };

export class AccessControl {
  private readonly grants: Array<{ digest: Buffer; principal: Principal }>;

  constructor(grants: TokenGrant[] | undefined) {
    this.grants = (grants ?? []).map((g, i) => ({
      digest: digest(g.token),
      principal: { id: g.name ?? `token#${i + 1}`, roles: new Set(g.roles), streams: g.streams ?? ['*'] },
    }));
  }

  get open(): boolean {
    return this.grants.length === 0;
  }

  authenticate(presented: string | undefined): AuthOutcome {
    if (this.open) return { ok: true, principal: OPEN };
    if (presented === undefined || presented === '') {
      return { ok: false, reason: 'token_missing', detail: 'an access token is required (Authorization: Bearer <token> or ?token=<token>)' };
    }
    const d = digest(presented);
    let found: Principal | undefined;
    // Compare against every grant (no early exit) so timing says nothing about which matched.
    for (const g of this.grants) {
      if (timingSafeEqual(d, g.digest) && found === undefined) found = g.principal;
    }
    return found ? { ok: true, principal: found } : { ok: false, reason: 'token_unknown', detail: 'the access token is not recognised' };
  }
}

/** Whether `principal` may act in `role` on the stream `name` (admin may do everything). */
export function mayAct(principal: Principal, role: Role, name: string): boolean {
  if (principal.roles.has('admin')) return true;
  return principal.roles.has(role) && principal.streams.some((p) => matchesStreamPattern(p, name));
}

/** Whether `principal` holds `role` for at least one stream (or is admin). */
export function hasRole(principal: Principal, role: Role): boolean {
  return principal.roles.has('admin') || principal.roles.has(role);
}

/** The token a request presents: `Authorization: Bearer <token>` first, else `?token=`. */
export function presentedToken(req: IncomingMessage, url: URL): string | undefined {
  const header = req.headers.authorization;
  if (typeof header === 'string') {
    const m = /^Bearer\s+(.+)$/i.exec(header.trim());
    if (m) return m[1]!.trim();
  }
  return url.searchParams.get('token') ?? undefined;
}
