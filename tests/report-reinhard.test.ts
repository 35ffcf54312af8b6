import { describe, expect, it } from 'vitest';
import { labStatistics, reinhardTransfer } from '../src/report/reinhard.js';

// Reinhard, Ashikhmin, Gooch & Shirley (2001), "Color Transfer between Images", eq. 10-11:
// subtract the source mean, scale by sd_target / sd_source, add the target mean, per channel.

describe('Reinhard et al. 2001 statistics matching', () => {
  it('computes means and population standard deviations worked by hand', () => {
    // L* 40, 60 -> mean 50, sd 10; a* -3, 3 -> mean 0, sd 3; b* 5, 5 -> mean 5, sd 0.
    const s = labStatistics({ L: new Float32Array([40, 60]), a: new Float32Array([-3, 3]), b: new Float32Array([5, 5]) });
    expect(s.mean).toEqual([50, 0, 5]);
    expect(s.sd).toEqual([10, 3, 0]);
  });

  it('maps values as the formula says, worked by hand', () => {
    // a* -1, 1 (mean 0, sd 1) to mean 5, sd 3: (x - 0) * 3 + 5 -> 2, 8.
    // b* 10, 20 (mean 15, sd 5) to mean -4, sd 2: (x - 15) * 0.4 - 4 -> -6, -2.
    const out = reinhardTransfer(
      { L: new Float32Array([30, 70]), a: new Float32Array([-1, 1]), b: new Float32Array([10, 20]) },
      { mean: [50, 5, -4], sd: [10, 3, 2] },
      { channels: ['a', 'b'] },
    );
    expect(Array.from(out.L)).toEqual([30, 70]); // L* not in `channels`: kept
    expect(Array.from(out.a)).toEqual([2, 8]);
    expect(Array.from(out.b).map((v) => Math.round(v * 1e5) / 1e5)).toEqual([-6, -2]);
  });

  it("gives the result the target's channel means and standard deviations", () => {
    // The defining property (Reinhard et al. 2001, section 3): after transfer each channel has the target's
    // mean and sd. A deterministic 64-pixel source with spread in every channel.
    const n = 64;
    const src = { L: new Float32Array(n), a: new Float32Array(n), b: new Float32Array(n) };
    for (let i = 0; i < n; i++) {
      src.L[i] = 20 + ((i * 37) % 61);
      src.a[i] = -30 + ((i * 13) % 47);
      src.b[i] = 10 * Math.sin(i) + 3;
    }
    const target = { mean: [61.5, 3.25, 14.75] as [number, number, number], sd: [18, 9.5, 21] as [number, number, number] };
    const stats = labStatistics(reinhardTransfer(src, target));
    for (let c = 0; c < 3; c++) {
      expect(stats.mean[c]).toBeCloseTo(target.mean[c], 4);
      expect(stats.sd[c]).toBeCloseTo(target.sd[c], 4);
    }
  });

  it('turns the flat a*b* of a grey photo into the target mean and keeps its L*', () => {
    // sd_source = 0: the scale is undefined; the only value the statistics justify is the target mean.
    const grey = { L: new Float32Array([12, 48, 93]), a: new Float32Array(3), b: new Float32Array(3) };
    const out = reinhardTransfer(grey, { mean: [50, 4.5, 11], sd: [20, 8, 14] }, { channels: ['a', 'b'] });
    expect(Array.from(out.L)).toEqual([12, 48, 93]);
    expect(Array.from(out.a)).toEqual([4.5, 4.5, 4.5]);
    expect(Array.from(out.b)).toEqual([11, 11, 11]);
    // The input is never modified.
    expect(Array.from(grey.a)).toEqual([0, 0, 0]);
  });
});
