import { describe, expect, it } from 'vitest';
import { abBins } from '../src/model/bins.js';
import { annealedMean, binHistogram, confidence, rebalanceWeights, softEncode } from '../src/model/encoding.js';
import { batchTargets, downsamplePlane } from '../src/model/loss.js';

// Reference: Zhang, Isola & Efros (2016), "Colorful Image Colorization", ECCV: section 2.1 (soft
// encoding: 5 nearest neighbours, Gaussian sigma = 5), eq. 3-4 (rebalancing: w ∝ ((1-λ)p~ + λ/Q)^-1,
// E[w] = 1, λ = 1/2), eq. 5 (annealed mean f_T(z) = exp(log z / T) / Σ exp(log z / T), T = 0.38).
// Expected values below are computed from those definitions by brute force in the test itself.

const bins = abBins();

function rng(seed: number): () => number {
  let s = seed >>> 0;
  return () => (s = (Math.imul(s, 1664525) + 1013904223) >>> 0) / 4294967296;
}

describe('soft encoding', () => {
  it('puts Gaussian weights (sigma 5) on the 5 nearest bins, found by brute force', () => {
    const next = rng(1);
    const n = 500;
    // Values over the whole gamut and a little beyond (out-of-gamut a*b* still encode).
    const a = Float32Array.from({ length: n }, () => next() * 240 - 120);
    const b = Float32Array.from({ length: n }, () => next() * 240 - 120);
    const t = softEncode(a, b, bins);
    expect(t.neighbours).toBe(5);
    for (let p = 0; p < n; p++) {
      const d = Array.from(bins.a, (ba, q) => ({ q, d2: (ba - a[p]) ** 2 + (bins.b[q] - b[p]) ** 2 })).sort((x, y) => x.d2 - y.d2);
      const nearest = d.slice(0, 5);
      const z = nearest.reduce((s, e) => s + Math.exp(-e.d2 / 50), 0);
      let sum = 0;
      for (let j = 0; j < 5; j++) {
        const q = t.index[p * 5 + j];
        // Same distances as brute force (ties may swap equal-distance bins).
        expect((bins.a[q] - a[p]) ** 2 + (bins.b[q] - b[p]) ** 2).toBeCloseTo(nearest[j].d2, 6);
        expect(t.weight[p * 5 + j]).toBeCloseTo(Math.exp(-nearest[j].d2 / 50) / z, 5);
        sum += t.weight[p * 5 + j];
      }
      expect(sum).toBeCloseTo(1, 6);
    }
  });

  it("builds dense batch targets at quarter resolution with the nearest bin's weight", () => {
    const h = 8;
    const w = 12;
    const ab = new Float32Array(2 * h * w);
    for (let i = 0; i < h * w; i++) {
      ab[i] = 20 + (i % 4); // a*: mean 21.5 over each 4 x 4 block
      ab[h * w + i] = -33; // b*
    }
    const classWeights = Float32Array.from({ length: bins.count }, (_, q) => q + 1);
    const t = batchTargets(ab, 1, h, w, 4, bins, classWeights);
    expect([t.width, t.height]).toEqual([3, 2]);
    const near = softEncode(Float32Array.of(21.5), Float32Array.of(-33), bins);
    for (let p = 0; p < 6; p++) {
      let sum = 0;
      for (let q = 0; q < bins.count; q++) sum += t.target[p * bins.count + q];
      expect(sum).toBeCloseTo(1, 6);
      expect(t.target[p * bins.count + near.index[0]]).toBeCloseTo(near.weight[0], 6);
      expect(t.weight[p]).toBe(classWeights[near.index[0]]);
    }
  });

  it('area-averages planes', () => {
    const plane = Float32Array.from({ length: 16 }, (_, i) => i);
    expect(Array.from(downsamplePlane(plane, 4, 4, 2))).toEqual([2.5, 4.5, 10.5, 12.5]);
  });
});

describe('class rebalancing', () => {
  const next = rng(2);
  const counts = new Float64Array(bins.count);
  // Skewed, like photographs: mostly greyish, rarely saturated.
  const a = Float32Array.from({ length: 20000 }, () => (next() - 0.5) * 40 * next() ** 3);
  const b = Float32Array.from({ length: 20000 }, () => (next() - 0.5) * 60 * next() ** 3);
  binHistogram(a, b, bins, counts);

  it('counts each value in its nearest bin', () => {
    expect(counts.reduce((s, c) => s + c, 0)).toBe(20000);
    const zero = bins.a.findIndex((v, q) => v === 0 && bins.b[q] === 0);
    expect(counts[zero]).toBe(Math.max(...counts));
  });

  it('matches eq. 3-4 computed by brute force, with expected weight 1 under the smoothed distribution', () => {
    const w = rebalanceWeights(counts, 0.5, 5);
    const total = counts.reduce((s, c) => s + c, 0);
    const smooth = Array.from(bins.a, (_, i) =>
      Array.from(
        bins.a,
        (_, j) => (counts[j] / total) * Math.exp(-((bins.a[i] - bins.a[j]) ** 2 + (bins.b[i] - bins.b[j]) ** 2) / 50),
      ).reduce((s, v) => s + v, 0),
    );
    const z = smooth.reduce((s, v) => s + v, 0);
    const p = smooth.map((v) => v / z);
    const raw = p.map((v) => 1 / (0.5 * v + 0.5 / bins.count));
    const scale = p.reduce((s, v, i) => s + v * raw[i], 0);
    for (let q = 0; q < bins.count; q++) expect(w[q]).toBeCloseTo(raw[q] / scale, 4);
    expect(p.reduce((s, v, i) => s + v * w[i], 0)).toBeCloseTo(1, 5);
    // Rare bins weigh more than the common grey one.
    const zero = bins.a.findIndex((v, q) => v === 0 && bins.b[q] === 0);
    expect(Math.min(...w)).toBe(w[zero]);
  });

  it('gives equal weights when lambda is 1 (uniform prior only)', () => {
    const w = rebalanceWeights(counts, 1, 5);
    for (const v of w) expect(v).toBeCloseTo(1, 6);
  });

  it('rejects empty counts and mismatched lengths', () => {
    expect(() => rebalanceWeights(new Float64Array(bins.count))).toThrow(RangeError);
    expect(() => rebalanceWeights(new Float64Array(5))).toThrow(RangeError);
  });
});

describe('annealed mean and confidence', () => {
  function logitsFrom(probs: number[][]): Float32Array {
    // Logits = log z: the network's softmax gives back z.
    return Float32Array.from(probs.flatMap((z) => z.map((v) => Math.log(Math.max(v, 1e-30)))));
  }

  it('decodes by eq. 5: T = 1 the mean, T = 0.38 between mean and mode, T -> 0 the mode', () => {
    const z = new Array<number>(bins.count).fill(0);
    const q1 = 10;
    const q2 = 200;
    z[q1] = 0.7;
    z[q2] = 0.3;
    const logits = logitsFrom([z]);
    const mean = annealedMean(logits, bins, 1);
    expect(mean.a[0]).toBeCloseTo(0.7 * bins.a[q1] + 0.3 * bins.a[q2], 3);
    expect(mean.b[0]).toBeCloseTo(0.7 * bins.b[q1] + 0.3 * bins.b[q2], 3);
    const f1 = 0.7 ** (1 / 0.38);
    const f2 = 0.3 ** (1 / 0.38);
    const t = annealedMean(logits, bins, 0.38);
    expect(t.a[0]).toBeCloseTo((f1 * bins.a[q1] + f2 * bins.a[q2]) / (f1 + f2), 3);
    expect(t.b[0]).toBeCloseTo((f1 * bins.b[q1] + f2 * bins.b[q2]) / (f1 + f2), 3);
    const mode = annealedMean(logits, bins, 0.01);
    expect(mode.a[0]).toBeCloseTo(bins.a[q1], 3);
    expect(mode.b[0]).toBeCloseTo(bins.b[q1], 3);
  });

  it('gives confidence 1 for one bin, 0 for the uniform distribution, 1 - H/log Q between', () => {
    const one = new Array<number>(bins.count).fill(0);
    one[3] = 1;
    const uniform = new Array<number>(bins.count).fill(1 / bins.count);
    const two = new Array<number>(bins.count).fill(0);
    two[3] = 0.5;
    two[4] = 0.5;
    const c = confidence(logitsFrom([one, uniform, two]), bins.count, 1);
    expect(c[0]).toBeCloseTo(1, 6);
    expect(c[1]).toBeCloseTo(0, 6);
    expect(c[2]).toBeCloseTo(1 - Math.log(2) / Math.log(bins.count), 6);
  });

  it('rejects a bad temperature or a ragged logits array', () => {
    expect(() => annealedMean(new Float32Array(bins.count), bins, 0)).toThrow(RangeError);
    expect(() => annealedMean(new Float32Array(bins.count + 1), bins)).toThrow(RangeError);
  });
});
