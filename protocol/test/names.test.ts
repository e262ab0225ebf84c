import { describe, expect, it } from 'vitest';
import { matchesStreamPattern, streamNameProblem, streamPatternProblem } from '../names.js';

describe('stream names and patterns', () => {
  it('accepts plain names and rejects the rest', () => {
    for (const ok of ['a', 'A9', 'stand-3.gearbox_vib', '0', 'x'.repeat(64)]) expect(streamNameProblem(ok), ok).toBeNull();
    for (const bad of ['', '-a', '.a', 'a b', 'a/b', 'a*', 'é', 'x'.repeat(65)]) expect(streamNameProblem(bad), bad).not.toBeNull();
    expect(streamPatternProblem('*')).toBeNull();
    expect(streamPatternProblem('stand-*.vib')).toBeNull();
    expect(streamPatternProblem('a?')).not.toBeNull();
  });

  it("matches globs where '*' is any run of characters (definition of a glob with one wildcard kind)", () => {
    const cases: Array<[string, string, boolean]> = [
      ['*', 'anything', true],
      ['*', '', true],
      ['stand-*', 'stand-3.vib', true],
      ['stand-*', 'stand', false],
      ['*.vib', 'stand-3.vib', true],
      ['*.vib', 'stand-3.vibx', false],
      ['a*b*c', 'aXXbYYc', true],
      ['a*b*c', 'aXXcYYb', false],
      ['a**c', 'ac', true],
      ['abc', 'abc', true],
      ['abc', 'abd', false],
      ['*a*a*a*a*b', 'aaaaaaaaaaaaaaaaaaaaaaaaaaaaaa', false],
    ];
    for (const [pattern, name, expected] of cases) expect(matchesStreamPattern(pattern, name), `${pattern} ~ ${name}`).toBe(expected);
  });
});
