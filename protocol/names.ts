import { MAX_STREAM_NAME_LENGTH } from './limits.js';

/**
 * Stream names: letters, digits, '.', '_' and '-', starting with a letter or digit, at most
 * MAX_STREAM_NAME_LENGTH characters. Plain enough for file names, metrics, URLs and shells.
 */
export const STREAM_NAME_RE = /^[A-Za-z0-9][A-Za-z0-9._-]*$/;
/** Stream patterns: the same characters plus '*', which matches any run of characters (also none). */
export const STREAM_PATTERN_RE = /^[A-Za-z0-9.*_-]+$/;

/** Returns why `name` is not a valid stream name, or null when it is. */
export function streamNameProblem(name: string): string | null {
  if (name.length === 0) return 'stream name is empty';
  if (name.length > MAX_STREAM_NAME_LENGTH) return `stream name longer than ${MAX_STREAM_NAME_LENGTH} characters`;
  if (!STREAM_NAME_RE.test(name)) {
    return "stream name must start with a letter or digit and contain only letters, digits, '.', '_' and '-'";
  }
  return null;
}

/** Returns why `pattern` is not a valid stream pattern, or null when it is. */
export function streamPatternProblem(pattern: string): string | null {
  if (pattern.length === 0) return 'stream pattern is empty';
  if (pattern.length > MAX_STREAM_NAME_LENGTH) return `stream pattern longer than ${MAX_STREAM_NAME_LENGTH} characters`;
  if (!STREAM_PATTERN_RE.test(pattern)) {
    return "stream pattern may contain only letters, digits, '.', '_', '-' and '*'";
  }
  return null;
}

/** True when `name` matches the glob `pattern` ('*' = any run of characters, everything else literal). */
export function matchesStreamPattern(pattern: string, name: string): boolean {
  // Iterative wildcard match with single backtracking point: linear in practice, no regex built
  // from user input.
  let p = 0;
  let n = 0;
  let starP = -1;
  let starN = 0;
  while (n < name.length) {
    if (p < pattern.length && pattern[p] !== '*' && pattern[p] === name[n]) {
      p++;
      n++;
    } else if (p < pattern.length && pattern[p] === '*') {
      starP = p++;
      starN = n;
    } else if (starP >= 0) {
      p = starP + 1;
      n = ++starN;
    } else {
      return false;
    }
  }
  while (p < pattern.length && pattern[p] === '*') p++;
  return p === pattern.length;
}
