import { describe, expect, it } from 'vitest';
import { RateMeter, SequenceFollower } from '../src/health.js';

describe('RateMeter', () => {
  // Closed form: arrivals every p ms give 1000/p per second.
  it('measures a steady arrival rate exactly', () => {
    const meter = new RateMeter(5000);
    for (let t = 0; t <= 20_000; t += 40) meter.record(t);
    expect(meter.perSecond(20_000)).toBeCloseTo(25, 9);
  });

  it('is right before a full window has passed, and falls when arrivals stop', () => {
    const meter = new RateMeter(5000);
    for (let t = 0; t <= 1000; t += 100) meter.record(t);
    expect(meter.perSecond(1000)).toBeCloseTo(10, 9);
    // 3 s of silence: the 11 arrivals of (−2 s, 1 s] now span 3 s up to now.
    expect(meter.perSecond(3000)).toBeCloseTo(10 / 3, 9);
    expect(meter.perSecond(7000)).toBe(0);
  });

  it('reports 0 with fewer than two arrivals', () => {
    const meter = new RateMeter(5000);
    expect(meter.perSecond(0)).toBe(0);
    meter.record(10);
    expect(meter.perSecond(20)).toBe(0);
  });
});

describe('SequenceFollower', () => {
  it('reports the sequence numbers passed over, and none after a notice covered them', () => {
    const follower = new SequenceFollower();
    expect(follower.see(4)).toBe(0); // the first result sets the start
    expect(follower.see(5)).toBe(0);
    expect(follower.see(9)).toBe(3); // 6, 7, 8
    follower.passOver(14); // a missed notice for 10..14
    expect(follower.see(15)).toBe(0);
    expect(follower.see(15)).toBe(0); // a repeat is no gap
    expect(follower.see(2)).toBe(0); // the stream started over
    expect(follower.see(4)).toBe(1);
  });
});
