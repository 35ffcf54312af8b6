import { describe, expect, it } from 'vitest';
import { averageDecay, updateAverage, type WeightAverageState } from '../src/training/index.js';

describe('weight average', () => {
  it('the decay starts at (1 + n) / (10 + n) and settles at 1 - 1/over', () => {
    expect(averageDecay(200, 0)).toBeCloseTo(0.1, 12);
    expect(averageDecay(200, 1)).toBeCloseTo(2 / 11, 12);
    expect(averageDecay(200, 10_000)).toBeCloseTo(0.995, 12);
    expect(averageDecay(3, 100)).toBeCloseTo(2 / 3, 12);
  });

  it('is the exponential moving average of the steps, worked by hand, and leaves its input alone', () => {
    // Steps bring a weight 10, 20, 30 after a start of 0; averaging over 3 steps: decays 0.1, 2/11, 0.25.
    let state: WeightAverageState = { values: [Float32Array.of(0, 1)], updates: 0 };
    const first = state;
    let expected = 0;
    for (const [k, v] of [10, 20, 30].entries()) {
      const d = [0.1, 2 / 11, 0.25][k]!;
      expected = d * expected + (1 - d) * v;
      state = updateAverage(state, [Float32Array.of(v, 1)], 3);
    }
    expect(state.updates).toBe(3);
    expect(state.values[0]![0]).toBeCloseTo(expected, 4);
    // A weight that never moves keeps its value exactly.
    expect(state.values[0]![1]).toBe(1);
    expect(Array.from(first.values[0]!)).toEqual([0, 1]);
    expect(() => updateAverage(state, [Float32Array.of(1)], 3)).toThrow(RangeError);
  });
});
