import { describe, expect, it } from 'vitest';
import { buildOperator, gaborWindow, parseOperatorDescription, sampleIndices } from '../../../operators/index.js';
import { decode, encode } from '../../../protocol/index.js';
import { parseSolverSettings, solve } from '../../../solvers/index.js';
import { createFeed, FEED_KINDS, GearboxFeed, RangeFeed, RESIDUAL_ALERT, TelemetryFeed, type Feed } from '../index.js';

/** y minus the noiseless measurements of the feed's own truth, recomputed from the declaration. */
function noiseOf(feed: Feed, y: Float64Array): Float64Array {
  const A = buildOperator(parseOperatorDescription(feed.declaration.operator));
  const c = new Float64Array(2 * A.cols);
  const t = feed.truth();
  t.indices.forEach((j, i) => ((c[2 * j] = t.values[2 * i]!), (c[2 * j + 1] = t.values[2 * i + 1]!)));
  const clean = new Float64Array(2 * A.rows);
  A.apply(c, clean);
  return y.map((v, i) => v - clean[i]!);
}

/** Root-mean-square magnitude per complex entry: the noise level σ with E|eᵢ|² = σ². */
const rms = (v: Float64Array) => Math.sqrt(v.reduce((s, x) => s + x * x, 0) / (v.length / 2));
const norm = (v: Float64Array) => Math.sqrt(v.reduce((s, x) => s + x * x, 0));

describe('synthetic feeds', () => {
  it('declare streams the protocol and the operator parser accept', () => {
    for (const kind of FEED_KINDS) {
      const feed = createFeed(kind);
      const msg = decode(encode({ v: 1, type: 'declare', ref: 'r', stream: feed.declaration }));
      expect(msg.type).toBe('declare');
      expect(() => parseOperatorDescription(feed.declaration.operator)).not.toThrow();
      expect(() => parseSolverSettings(feed.declaration.solver)).not.toThrow();
      expect(feed.next()).toHaveLength(2 * feed.operator.rows);
    }
  });

  it('gearbox: y are time samples of the inverse unitary DFT of the tones (definition of the DFT)', () => {
    const feed = new GearboxFeed({ seed: 4 });
    for (let f = 0; f < 3; f++) feed.next();
    const y = Float64Array.from(feed.next());
    const desc = parseOperatorDescription(feed.declaration.operator);
    if (desc.kind !== 'sampling') throw new Error('gearbox must be a sampling operator');
    const times = sampleIndices(desc.samples, desc.n);
    const { indices, values } = feed.truth();
    expect(Array.from(indices)).toEqual([...feed.toneBins()].sort((a, b) => a - b));
    const noise = new Float64Array(y.length);
    times.forEach((t, i) => {
      // x[t] = n^{-1/2} Σ_k c_k e^{+2πi k t / n}
      let re = 0;
      let im = 0;
      indices.forEach((k, j) => {
        const angle = (2 * Math.PI * k * t) / desc.n;
        re += values[2 * j]! * Math.cos(angle) - values[2 * j + 1]! * Math.sin(angle);
        im += values[2 * j]! * Math.sin(angle) + values[2 * j + 1]! * Math.cos(angle);
      });
      noise[2 * i] = y[2 * i]! - re / Math.sqrt(desc.n);
      noise[2 * i + 1] = y[2 * i + 1]! - im / Math.sqrt(desc.n);
    });
    // What is left is the declared noise: rms per measurement near σ (96 complex draws: within ±30%).
    expect(rms(noise) / feed.declaration.noise_sigma!).toBeGreaterThan(0.7);
    expect(rms(noise) / feed.declaration.noise_sigma!).toBeLessThan(1.3);
  });

  it('range: y is the sum of time-frequency shifts of the probe at the reflectors (Gabor definition)', () => {
    const feed = new RangeFeed({ seed: 6 });
    for (let f = 0; f < 70; f++) feed.next(); // past the first reflector's move at frame 60
    const y = Float64Array.from(feed.next());
    const desc = parseOperatorDescription(feed.declaration.operator);
    if (desc.kind !== 'gabor') throw new Error('range must be a Gabor operator');
    const n = desc.n;
    const g = gaborWindow(desc.window, n);
    const reflectors = feed.reflectors();
    expect(reflectors[0]!.delay).toBe(1); // started at delay 2 with negative Doppler: one bin closer after 60 frames
    const L = feed.dopplerTo - feed.dopplerFrom + 1;
    const clean = new Float64Array(2 * n);
    for (const r of reflectors) {
      expect(r.column).toBe(r.delay * L + (r.doppler - feed.dopplerFrom));
      for (let t = 0; t < n; t++) {
        // a[t] = e^{2πi l t/n} · g[(t − k) mod n]
        const s = (((t - r.delay) % n) + n) % n;
        const angle = (2 * Math.PI * r.doppler * t) / n;
        const aRe = Math.cos(angle) * g[2 * s]! - Math.sin(angle) * g[2 * s + 1]!;
        const aIm = Math.cos(angle) * g[2 * s + 1]! + Math.sin(angle) * g[2 * s]!;
        clean[2 * t] += r.re * aRe - r.im * aIm;
        clean[2 * t + 1] += r.re * aIm + r.im * aRe;
      }
    }
    const noise = y.map((v, i) => v - clean[i]!);
    expect(rms(noise) / feed.declaration.noise_sigma!).toBeGreaterThan(0.7);
    expect(rms(noise) / feed.declaration.noise_sigma!).toBeLessThan(1.3);
  });

  it('telemetry: projections of the Haar coefficients equal projections of the signal itself', () => {
    const feed = new TelemetryFeed({ seed: 8 });
    for (let f = 0; f < 30; f++) feed.next();
    const y = Float64Array.from(feed.next());
    const desc = feed.declaration.operator as { rows: number; cols: number; seed: number };
    // The same Gaussian matrix without a basis, applied to the piecewise-constant signal.
    const G = buildOperator(parseOperatorDescription({ kind: 'gaussian', rows: desc.rows, cols: desc.cols, seed: desc.seed }));
    const clean = new Float64Array(2 * G.rows);
    G.apply(feed.signal, clean);
    const noise = y.map((v, i) => v - clean[i]!);
    // Real scenario: the imaginary parts carry no noise at all.
    for (let i = 1; i < noise.length; i += 2) expect(Math.abs(noise[i]!)).toBeLessThan(1e-12);
    expect(rms(noise) / feed.declaration.noise_sigma!).toBeGreaterThan(0.6);
    expect(rms(noise) / feed.declaration.noise_sigma!).toBeLessThan(1.4);
    // Piecewise constant on 16-sample segments of 128: at most 1 + 1 + 2 + 4 nonzero Haar coefficients.
    expect(feed.truth().indices.length).toBeLessThanOrEqual(8);
  });

  it('a burst raises the noise by its factor for exactly the frames asked, then the noise returns', () => {
    const feed = new GearboxFeed({ seed: 10 });
    feed.next();
    feed.burst(3, 40);
    const levels: number[] = [];
    for (let f = 0; f < 5; f++) levels.push(rms(noiseOf(feed, Float64Array.from(feed.next()))) / feed.declaration.noise_sigma!);
    expect(levels.slice(0, 3).every((l) => l > 25 && l < 55)).toBe(true);
    expect(levels.slice(3).every((l) => l > 0.6 && l < 1.4)).toBe(true);
    expect(feed.burstRemaining).toBe(0);
  });

  it('is reproducible from its seeds', () => {
    const a = new RangeFeed({ seed: 3 });
    const b = new RangeFeed({ seed: 3 });
    for (let f = 0; f < 5; f++) expect(Array.from(a.next())).toEqual(Array.from(b.next()));
  });

  // Every scenario must be recoverable by its declared solver when clean, and its burst must push
  // the relative residual past the demo alert's limit (so alerts fire in the demo and in tests).
  for (const kind of FEED_KINDS) {
    it(`${kind}: the declared solver recovers clean frames and bursts cross the alert limit`, () => {
      const feed = createFeed(kind, { seed: 12 });
      const settings = parseSolverSettings(feed.declaration.solver);
      const sigma = feed.declaration.noise_sigma;
      for (let f = 0; f < 20; f++) {
        const y = Float64Array.from(feed.next());
        const result = solve(feed.operator, y, settings, undefined, sigma);
        const truth = feed.truth();
        const error = Float64Array.from(result.x);
        truth.indices.forEach((j, i) => ((error[2 * j]! -= truth.values[2 * i]!), (error[2 * j + 1]! -= truth.values[2 * i + 1]!)));
        expect(norm(error) / norm(truth.values)).toBeLessThan(0.05);
        expect(result.relativeResidual).toBeLessThan(RESIDUAL_ALERT.clear_below);
      }
      feed.burst(5);
      for (let f = 0; f < 5; f++) {
        const result = solve(feed.operator, Float64Array.from(feed.next()), settings, undefined, sigma);
        expect(result.relativeResidual).toBeGreaterThan(RESIDUAL_ALERT.above);
      }
    });
  }
});
