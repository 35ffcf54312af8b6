import * as tf from '@tensorflow/tfjs';
import { beforeAll, describe, expect, it } from 'vitest';
import { ciede2000 } from '../src/colour/ciede2000.js';
import { initBackend } from '../src/model/backend.js';
import { abBins } from '../src/model/bins.js';
import { CANDIDATE_CHROMA, decodingTable, decodingWeights, leastCiede2000 } from '../src/model/decoding.js';
import { parseMetadata } from '../src/model/metadata.js';
import { createNetwork } from '../src/model/network.js';
import { predict } from '../src/model/predict.js';
import { random } from './helpers/random.js';

// Least expected CIEDE2000 decoding (src/model/decoding.ts) checked against a plain computation with
// the CIEDE2000 formula of Sharma et al. 2005 (tested against their data in colour-ciede2000.test.ts).

const bins = abBins();
const Q = bins.count;

beforeAll(async () => {
  await initBackend({ prefer: 'cpu' });
});

function decode(logits: Float32Array, weights: ArrayLike<number> = []): Float32Array {
  return tf.tidy(() => leastCiede2000(tf.tensor2d(logits, [logits.length / Q, Q]), bins, weights).dataSync() as Float32Array);
}

/** Logits whose softmax is `probs` (given per bin; zero probability -> very unlikely). */
function logitsOf(probs: Map<number, number>, weights?: ArrayLike<number>): Float32Array {
  const out = new Float32Array(Q).fill(-30);
  for (const [q, p] of probs) out[q] = Math.log(p * (weights ? weights[q] : 1));
  return out;
}

function nearestBin(a: number, b: number): number {
  let best = 0;
  for (let q = 1; q < Q; q++) if ((bins.a[q] - a) ** 2 + (bins.b[q] - b) ** 2 < (bins.a[best] - a) ** 2 + (bins.b[best] - b) ** 2) best = q;
  return best;
}

describe('least expected CIEDE2000 decoding', () => {
  it('rests on CIEDE2000 at equal L* not depending on L*', () => {
    const r = random(7);
    for (let i = 0; i < 200; i++) {
      const [a1, b1, a2, b2] = [r() * 160 - 80, r() * 160 - 80, r() * 160 - 80, r() * 160 - 80];
      expect(ciede2000(15, a1, b1, 15, a2, b2)).toBeCloseTo(ciede2000(85, a1, b1, 85, a2, b2), 9);
    }
  });

  it('offers grey and every bin at each candidate chroma', () => {
    const t = decodingTable(bins);
    expect(t.count).toBe(1 + CANDIDATE_CHROMA.length * Q);
    expect([t.a[0], t.b[0]]).toEqual([0, 0]);
    const last = 1 + (CANDIDATE_CHROMA.length - 1) * Q;
    expect(Array.from(t.a.subarray(last))).toEqual(Array.from(bins.a));
  });

  it('chooses the candidate of least expected difference, as a plain computation does', () => {
    const r = random(11);
    const t = decodingTable(bins);
    const n = 24;
    // Peaked random distributions (as a trained network gives), and random rebalancing weights.
    const logits = Float32Array.from({ length: n * Q }, () => (r() < 0.05 ? 4 : 0) + r() * 3);
    const weights = Float32Array.from({ length: Q }, () => 0.2 + r() * 3);
    const got = decode(logits, weights);
    for (let p = 0; p < n; p++) {
      const raw = Array.from({ length: Q }, (_, q) => Math.exp(logits[p * Q + q]) / weights[q]);
      const total = raw.reduce((s, v) => s + v, 0);
      const risk = (a: number, b: number): number =>
        raw.reduce((s, v, q) => s + (v / total) * ciede2000(50, bins.a[q], bins.b[q], 50, a, b), 0);
      let least = Infinity;
      for (let c = 0; c < t.count; c++) least = Math.min(least, risk(t.a[c], t.b[c]));
      // float32 sums may pick a candidate that ties within rounding (tolerance: common practice).
      expect(risk(got[2 * p], got[2 * p + 1])).toBeLessThanOrEqual(least + 1e-3);
    }
  });

  it('gives a bin its own colour when the distribution is sure of it', () => {
    const q = nearestBin(40, 50);
    const got = decode(logitsOf(new Map([[q, 1]])));
    expect(got[0]).toBeCloseTo(bins.a[q], 4);
    expect(got[1]).toBeCloseTo(bins.b[q], 4);
  });

  it('mutes the colour when two opposite hues are equally likely', () => {
    const orange = nearestBin(30, 40);
    const blue = nearestBin(-20, -40);
    const got = decode(
      logitsOf(
        new Map([
          [orange, 0.5],
          [blue, 0.5],
        ]),
      ),
    );
    expect(Math.hypot(got[0], got[1])).toBeLessThan(Math.hypot(bins.a[orange], bins.b[orange]) / 2);
  });

  it('undoes class rebalancing: a rare colour favoured in training does not win on its weight alone', () => {
    const orange = nearestBin(30, 40);
    const blue = nearestBin(-20, -40);
    const weights = new Float32Array(Q).fill(1);
    weights[blue] = 10; // blue was rare in training, so its pixels counted ten times
    // True odds 70:30 for orange; the network, trained with the weights, learnt them as 70:300.
    const logits = logitsOf(
      new Map([
        [orange, 0.7],
        [blue, 0.3],
      ]),
      weights,
    );
    const towardsOrange = (ab: Float32Array): number => ab[0] * bins.a[orange] + ab[1] * bins.b[orange];
    expect(towardsOrange(decode(logits))).toBeLessThan(0);
    expect(towardsOrange(decode(logits, weights))).toBeGreaterThan(0);
  });
});

describe('vividness: how much of the rebalancing is left in', () => {
  it('divides by the weights to the power 1 - vividness, and by the weights themselves at 0', () => {
    const weights = Float32Array.from([4, 0.25, 1, 9]);
    expect(Array.from(decodingWeights(weights, 0))).toEqual(Array.from(weights));
    expect(Array.from(decodingWeights(weights, 0.5))).toEqual([2, 0.5, 1, 3]);
    expect(Array.from(decodingWeights(weights, 1))).toEqual([1, 1, 1, 1]);
  });

  it('moves the choice from the cautious colour to the favoured rare one as it rises, never the other way', () => {
    const orange = nearestBin(30, 40);
    const blue = nearestBin(-20, -40);
    const grey = nearestBin(0, 0);
    const weights = new Float32Array(Q).fill(1);
    weights[blue] = 10;
    // True odds: mostly grey, some blue; training's weights made blue look ten times as likely.
    const logits = logitsOf(
      new Map([
        [grey, 0.6],
        [blue, 0.3],
        [orange, 0.1],
      ]),
      weights,
    );
    const chroma = (ab: Float32Array): number => Math.hypot(ab[0], ab[1]);
    const towardsBlue = (ab: Float32Array): number => ab[0] * bins.a[blue] + ab[1] * bins.b[blue];
    const chosen = [0, 0.25, 0.5, 0.75, 1].map((v) => decode(logits, decodingWeights(weights, v)));
    for (let k = 1; k < chosen.length; k++) expect(chroma(chosen[k])).toBeGreaterThanOrEqual(chroma(chosen[k - 1]) - 1e-4);
    expect(chroma(chosen[0])).toBeLessThan(chroma(chosen[4]));
    expect(towardsBlue(chosen[4])).toBeGreaterThan(0);
    expect(Array.from(chosen[4])).toEqual(Array.from(decode(logits)));
  });

  it("reaches predict's decoding, and is refused outside 0 to 1", () => {
    const net = createNetwork({ bins: Q, width: 4, seed: 3 });
    const L = Float32Array.from({ length: 32 * 32 }, (_, i) => (i * 37) % 100);
    // An orange that training counted a thousandth: undone, it dominates the untrained network's flat distribution.
    const weights = new Float32Array(Q).fill(1);
    weights[nearestBin(30, 40)] = 1e-3;
    const cautious = predict(net, L, 32, 32, { classWeights: weights });
    const bold = predict(net, L, 32, 32, { classWeights: weights, vividness: 1 });
    const none = predict(net, L, 32, 32);
    expect(Array.from(bold.a)).toEqual(Array.from(none.a));
    expect(Array.from(cautious.a)).not.toEqual(Array.from(bold.a));
    expect(() => predict(net, L, 32, 32, { vividness: 1.5 })).toThrow(/vividness must be from 0 to 1/);
    net.dispose();
  });
});

describe('choosing a decoding', () => {
  it('uses annealed mean when only a temperature is given, and the least-difference colour by default', () => {
    const net = createNetwork({ bins: Q, width: 4, seed: 3 });
    const L = Float32Array.from({ length: 32 * 32 }, (_, i) => (i * 37) % 100);
    const byDefault = predict(net, L, 32, 32);
    const annealed = predict(net, L, 32, 32, { temperature: 0.38 });
    const named = predict(net, L, 32, 32, { decoding: 'annealed-mean', temperature: 0.38 });
    const least = predict(net, L, 32, 32, { decoding: 'least-ciede2000' });
    expect(Array.from(annealed.a)).toEqual(Array.from(named.a));
    expect(Array.from(byDefault.a)).toEqual(Array.from(least.a));
    expect(Array.from(byDefault.a)).not.toEqual(Array.from(annealed.a));
    net.dispose();
  });

  it('reads model folders written before the choice existed as annealed mean', () => {
    const meta = {
      format: 'kinhue-model',
      formatVersion: 1,
      name: 'older',
      bins: { grid: bins.grid, count: Q, a: Array.from(bins.a), b: Array.from(bins.b) },
      temperature: 0.38,
      workingSize: 512,
      network: { input: 'L/100-0.5', multiple: 16, outputStride: 4 },
      classWeights: [],
      training: null,
      weightsSha256: '0'.repeat(64),
    };
    expect(parseMetadata(meta, 'older').decoding).toBe('annealed-mean');
    expect(parseMetadata({ ...meta, decoding: 'least-ciede2000' }, 'newer').decoding).toBe('least-ciede2000');
    expect(() => parseMetadata({ ...meta, decoding: 'brightest' }, 'odd')).toThrow(/unknown decoding/);
    // Folders from before vividness was recorded undid the rebalancing wholly.
    expect(parseMetadata(meta, 'older').vividness).toBe(0);
    expect(parseMetadata({ ...meta, vividness: 0.3 }, 'newer').vividness).toBe(0.3);
    expect(() => parseMetadata({ ...meta, vividness: 2 }, 'odd')).toThrow(/vividness outside 0 to 1/);
  });
});
