import { describe, expect, it } from 'vitest';
import { bilateralGrid, bilateralUpsample, GridReader, resizePlane, shrinkPlane, sliceRows, PlaneShrinker } from '../src/colour/index.js';
import { random } from './helpers/random.js';

/**
 * A synthetic scan: two regions, each of one L* (plus film grain), split by a sharp edge, with a true
 * colour per region; the model's colour is simulated as the true colour averaged over quarter-size cells.
 */
function twoRegions(shape: 'line' | 'circle') {
  const W = 512,
    H = 384;
  const L = new Float32Array(W * H),
    A = new Float32Array(W * H),
    B = new Float32Array(W * H),
    dist = new Float32Array(W * H);
  const rnd = random(7);
  for (let y = 0; y < H; y++) {
    for (let x = 0; x < W; x++) {
      const r = shape === 'circle' ? Math.hypot(x - 250.3, y - 190.7) - 120 : (x - 250.5 - 0.2 * y) / Math.hypot(1, 0.2);
      const i = y * W + x;
      const inside = r < 0;
      dist[i] = Math.abs(r);
      L[i] = (inside ? 45 : 60) + (rnd() - 0.5) * 8;
      A[i] = inside ? 50 : -20;
      B[i] = inside ? 30 : -30;
    }
  }
  return { W, H, L, A, B, dist, step: Math.hypot(70, 60) };
}

/** The pipeline's two stages: quarter-size colour -> working size (1/4) -> full size (grid cells of 2). */
function twoStage(s: ReturnType<typeof twoRegions>) {
  const { W, H, L } = s;
  const q = 16,
    f = 4;
  const Lw = shrinkPlane(L, W, H, W / f, H / f);
  const Lq = shrinkPlane(L, W, H, W / q, H / q);
  const Aq = shrinkPlane(s.A, W, H, W / q, H / q);
  const Bq = shrinkPlane(s.B, W, H, W / q, H / q);
  const work = bilateralUpsample(Lq, Aq, Bq, W / q, H / q, Lw, W / f, H / f, { rangeStep: 4 });
  const full = bilateralUpsample(Lw, work.a, work.b, W / f, H / f, L, W, H, { rangeStep: 4, cell: 2 });
  const naive = { a: resizePlane(Aq, W / q, H / q, W, H), b: resizePlane(Bq, W / q, H / q, W, H) };
  return { full, naive };
}

/** Largest and mean colour error (CIELAB a*b* distance) among pixels farther than `d` pixels from the edge. */
function errorBeyond(s: ReturnType<typeof twoRegions>, a: Float32Array, b: Float32Array, d: number) {
  let worst = 0,
    sum = 0,
    n = 0;
  for (let i = 0; i < a.length; i++) {
    if (s.dist[i]! <= d) continue;
    const e = Math.hypot(a[i]! - s.A[i]!, b[i]! - s.B[i]!);
    worst = Math.max(worst, e);
    sum += e;
    n++;
  }
  return { worst: worst / s.step, mean: sum / n / s.step };
}

describe('edge-aware upsampling (joint bilateral upsampling, Kopf et al. 2007, on a bilateral grid, Chen et al. 2007)', () => {
  for (const shape of ['line', 'circle'] as const) {
    it(`keeps colour from crossing a sharp L* edge by more than a few pixels (${shape})`, () => {
      const s = twoRegions(shape);
      const { full, naive } = twoStage(s);
      // Our tolerances (no published figure): beyond 4 px of the edge no pixel carries more than 20% of the
      // other region's colour, and on average under 3%; beyond 12 px, under 10% at worst.
      const near = errorBeyond(s, full.a, full.b, 4);
      expect(near.worst).toBeLessThan(0.2);
      expect(near.mean).toBeLessThan(0.03);
      expect(errorBeyond(s, full.a, full.b, 12).worst).toBeLessThan(0.1);
      // The check can fail: plain bilinear upsampling of the same colour carries 30% or more past 4 px.
      expect(errorBeyond(s, naive.a, naive.b, 4).worst).toBeGreaterThan(0.3);
    });
  }

  it('returns a flat colour unchanged whatever the lightness (the result is a weighted mean of predictions)', () => {
    const w = 16,
      h = 12,
      W = 64,
      H = 48;
    const lowL = new Float32Array(w * h).map((_, i) => (i * 7) % 100);
    const fullL = new Float32Array(W * H).map((_, i) => (i * 13) % 100);
    const { a, b } = bilateralUpsample(lowL, new Float32Array(w * h).fill(12.5), new Float32Array(w * h).fill(-30), w, h, fullL, W, H);
    for (let i = 0; i < W * H; i++) {
      expect(a[i]).toBeCloseTo(12.5, 4);
      expect(b[i]).toBeCloseTo(-30, 4);
    }
  });

  it('gives the same result strip by strip as all at once', () => {
    const s = twoRegions('circle');
    const lw = 128,
      lh = 96;
    const Lw = shrinkPlane(s.L, s.W, s.H, lw, lh);
    const grid = bilateralGrid(Lw, shrinkPlane(s.A, s.W, s.H, lw, lh), shrinkPlane(s.B, s.W, s.H, lw, lh), lw, lh, { cell: 2 });
    const whole = { a: new Float32Array(s.W * s.H), b: new Float32Array(s.W * s.H) };
    sliceRows(grid, s.L, s.W, s.H, 0, s.H, whole.a, whole.b);
    const rows = 37;
    for (let y = 0; y < s.H; y += rows) {
      const n = Math.min(rows, s.H - y);
      const a = new Float32Array(n * s.W),
        b = new Float32Array(n * s.W);
      sliceRows(grid, s.L.subarray(y * s.W, (y + n) * s.W), s.W, s.H, y, n, a, b);
      let differ = 0;
      for (let i = 0; i < n * s.W; i++) if (a[i] !== whole.a[y * s.W + i] || b[i] !== whole.b[y * s.W + i]) differ++;
      expect(differ).toBe(0);
    }
    // One reader for the whole image, read in bands of a few rows (as restore's render does).
    const reader = new GridReader(grid, s.W, s.H);
    const banded = { a: new Float32Array(s.W * s.H), b: new Float32Array(s.W * s.H) };
    for (let y = 0; y < s.H; y += 3) {
      const n = Math.min(3, s.H - y);
      const part = (p: Float32Array) => p.subarray(y * s.W, (y + n) * s.W);
      reader.read(part(s.L), y, n, part(banded.a), part(banded.b));
    }
    expect(banded.a).toEqual(whole.a);
    expect(banded.b).toEqual(whole.b);
  });
});

describe('plane resampling', () => {
  it('area-averages exact blocks (mean of each 2 x 2 block, by hand)', () => {
    const p = new Float32Array([1, 3, 5, 7, 2, 4, 6, 8]);
    expect(Array.from(shrinkPlane(p, 4, 2, 2, 1))).toEqual([2.5, 6.5]);
    const s = new PlaneShrinker(4, 2, 2, 1);
    s.addRows(p.subarray(0, 4), 0, 1);
    s.addRows(p.subarray(4), 1, 1);
    expect(Array.from(s.result())).toEqual([2.5, 6.5]);
  });

  it('resizes bilinearly with pixel centres aligned (common practice: output x maps to (x + 0.5) * in / out - 0.5)', () => {
    // 2 -> 4 samples: positions -0.25 (clamped to 0), 0.25, 0.75, 1.25 (clamped to 1).
    expect(Array.from(resizePlane(new Float32Array([0, 8]), 2, 1, 4, 1))).toEqual([0, 2, 6, 8]);
  });
});
