import { describe, expect, it } from 'vitest';
import type { IncomingMessage } from 'node:http';
import { AccessControl, hasRole, mayAct, presentedToken } from '../access.js';

// Checked against the access rules of docs/daemon.md ("Access").
describe('access control', () => {
  const ac = new AccessControl([
    { token: 'alpha', roles: ['produce'], streams: ['line-*', 'spare'] },
    { token: 'beta', roles: ['watch', 'produce'], name: 'dash' },
    { token: 'gamma', roles: ['admin'] },
  ]);

  it('recognises tokens and names grants without revealing the token', () => {
    const a = ac.authenticate('alpha');
    expect(a).toMatchObject({ ok: true, principal: { id: 'token#1' } });
    expect(ac.authenticate('beta')).toMatchObject({ ok: true, principal: { id: 'dash' } });
    expect(ac.authenticate('alph')).toMatchObject({ ok: false, reason: 'token_unknown' });
    expect(ac.authenticate(undefined)).toMatchObject({ ok: false, reason: 'token_missing' });
    expect(JSON.stringify(a)).not.toContain('alpha');
  });

  it('checks roles and stream patterns; admin may do everything', () => {
    const p = (t: string) => {
      const r = ac.authenticate(t);
      if (!r.ok) throw new Error('unknown');
      return r.principal;
    };
    expect(mayAct(p('alpha'), 'produce', 'line-7')).toBe(true);
    expect(mayAct(p('alpha'), 'produce', 'spare')).toBe(true);
    expect(mayAct(p('alpha'), 'produce', 'spare-2')).toBe(false);
    expect(mayAct(p('alpha'), 'watch', 'line-7')).toBe(false);
    expect(mayAct(p('beta'), 'watch', 'anything')).toBe(true); // no patterns = every stream
    expect(mayAct(p('gamma'), 'produce', 'x')).toBe(true);
    expect(hasRole(p('gamma'), 'watch')).toBe(true);
    expect(hasRole(p('alpha'), 'watch')).toBe(false);
  });

  it('is open with no tokens', () => {
    const open = new AccessControl([]);
    expect(open.open).toBe(true);
    const r = open.authenticate(undefined);
    expect(r.ok && mayAct(r.principal, 'produce', 'any')).toBe(true);
  });

  it('reads the token from the Authorization header first, else the query', () => {
    const req = (authorization?: string) => ({ headers: authorization ? { authorization } : {} }) as IncomingMessage;
    expect(presentedToken(req('Bearer  abc '), new URL('http://h/?token=q'))).toBe('abc');
    expect(presentedToken(req(), new URL('http://h/?token=q%20r'))).toBe('q r');
    expect(presentedToken(req('Basic x'), new URL('http://h/'))).toBeUndefined();
  });
});
