import { describe, expect, it } from 'vitest';
import { Backoff } from '../backoff.js';
import { endpointUrl } from '../connection.js';

describe('reconnect backoff', () => {
  it('grows geometrically to the cap and starts over after reset (definition of the schedule)', () => {
    const b = new Backoff({ initialMs: 100, maxMs: 1000, factor: 2, jitter: 0 });
    expect([b.next(), b.next(), b.next(), b.next(), b.next(), b.next()]).toEqual([100, 200, 400, 800, 1000, 1000]);
    b.reset();
    expect(b.next()).toBe(100);
  });

  it('spreads delays by at most ± jitter', () => {
    const low = new Backoff({ initialMs: 100, maxMs: 1000, factor: 2, jitter: 0.25 }, () => 0);
    const high = new Backoff({ initialMs: 100, maxMs: 1000, factor: 2, jitter: 0.25 }, () => 1);
    expect(low.next()).toBe(75);
    expect(high.next()).toBe(125);
  });
});

describe('endpoint addresses', () => {
  it('maps http/https daemon addresses to ws/wss endpoints', () => {
    expect(endpointUrl('http://127.0.0.1:8080', '/v1/produce')).toBe('ws://127.0.0.1:8080/v1/produce');
    expect(endpointUrl('https://example.test', '/v1/watch')).toBe('wss://example.test/v1/watch');
    expect(endpointUrl('ws://127.0.0.1:9/', '/v1/watch')).toBe('ws://127.0.0.1:9/v1/watch');
    expect(() => endpointUrl('ftp://x', '/v1/watch')).toThrow(/unsupported address/);
  });
});
