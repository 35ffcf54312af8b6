import { describe, expect, it } from 'vitest';
import type { Pixels } from '../src/image/index.js';
import {
  addGrain,
  changeFigures,
  closing,
  detectDamage,
  detectionFigures,
  drawDamage,
  keepUnmasked,
  MASK_DELTA,
  maskedSquaredError,
  medianFill,
  opening,
  psnrOf,
  repairScan,
  softScene,
  squareFilter,
} from '../src/repair/index.js';
import { onnxRuntimeVersion } from '../src/model/onnx-runtime.js';
import { openingAndClosingOnRuntime } from '../src/repair/onnx-morphology.js';
import { Random } from '../src/training/index.js';

describe('damage generator', () => {
  it('draws the same damage from the same seed, and other damage from another', () => {
    const L = softScene(160, 120);
    const a = drawDamage(L, 160, 120, new Random(4));
    const b = drawDamage(L, 160, 120, new Random(4));
    const c = drawDamage(L, 160, 120, new Random(5));
    expect(Buffer.from(a.L.buffer).equals(Buffer.from(b.L.buffer))).toBe(true);
    expect(Buffer.from(a.mask).equals(Buffer.from(b.mask))).toBe(true);
    expect(Buffer.from(a.mask).equals(Buffer.from(c.mask))).toBe(false);
  });

  it('marks exactly the pixels the damage moved by more than MASK_DELTA, never the grain', () => {
    const L = softScene(200, 150);
    const { L: damaged, clean, mask } = drawDamage(L, 200, 150, new Random(9), { perMegapixel: 400, grain: 3 });
    let marked = 0;
    let grainMoved = 0;
    for (let i = 0; i < mask.length; i++) {
      expect(mask[i]).toBe(Math.abs(damaged[i]! - clean[i]!) > MASK_DELTA ? 1 : 0);
      marked += mask[i]!;
      if (clean[i] !== L[i]) grainMoved++;
    }
    expect(marked).toBeGreaterThan(0);
    // Grain moves nearly every pixel of the clean plane, and none of that is in the mask.
    expect(grainMoved / mask.length).toBeGreaterThan(0.9);
    expect(marked / mask.length).toBeLessThan(0.5);
  });

  it('draws specks, hairs and scratches, each on its own when asked', () => {
    const L = softScene(256, 256);
    const only = (mix: [number, number, number]) => drawDamage(L, 256, 256, new Random(2), { perMegapixel: 150, grain: 0, mix }).mask;
    const longest = (mask: Uint8Array): number => {
      // The widest extent, in pixels, of the marked pixels along a row or a column.
      let best = 0;
      for (let y = 0; y < 256; y++) {
        let lo = 256,
          hi = -1;
        for (let x = 0; x < 256; x++)
          if (mask[y * 256 + x]) {
            lo = Math.min(lo, x);
            hi = Math.max(hi, x);
          }
        best = Math.max(best, hi - lo + 1);
      }
      return best;
    };
    const specks = only([1, 0, 0]);
    const scratches = only([0, 0, 1]);
    expect(specks.some(Boolean)).toBe(true);
    expect(scratches.some(Boolean)).toBe(true);
    expect(only([0, 1, 0]).some(Boolean)).toBe(true);
    // A scratch runs across at least 30% of the picture's long side (the generator's shortest); specks are at most 14 px across.
    expect(Math.max(longest(scratches), longest(transpose(scratches, 256)))).toBeGreaterThan(0.3 * 256 * 0.9);
  });
});

describe('mask-only replacement', () => {
  it('keeps every unmasked sample bit for bit, in each sample type', () => {
    const rng = new Random(11);
    const mask = Uint8Array.from({ length: 1000 }, () => (rng.next() < 0.1 ? 1 : 0));
    const repaired = Float32Array.from({ length: 1000 }, () => rng.uniform(0, 100));
    for (const original of [
      Float32Array.from({ length: 1000 }, () => rng.uniform(0, 100)),
      Uint8Array.from({ length: 1000 }, () => rng.int(256)),
      Uint16Array.from({ length: 1000 }, () => rng.int(65536)),
    ]) {
      const out = keepUnmasked(original, repaired, mask);
      expect(out.constructor).toBe(original.constructor);
      for (let i = 0; i < mask.length; i++) {
        if (!mask[i]) expect(out[i]).toBe(original[i]);
      }
    }
    expect(() => keepUnmasked(new Float32Array(3), new Float32Array(3), new Uint8Array(2))).toThrow(RangeError);
  });

  it('median fill changes only masked pixels and fills a hole in a flat area with its surroundings', () => {
    const w = 40,
      h = 30;
    const L = new Float32Array(w * h).fill(42);
    const mask = new Uint8Array(w * h);
    for (let y = 10; y < 18; y++)
      for (let x = 12; x < 20; x++) {
        mask[y * w + x] = 1;
        L[y * w + x] = 95;
      }
    L[0] = 7;
    const out = medianFill(L, w, h, mask);
    for (let i = 0; i < L.length; i++) expect(out[i]).toBe(mask[i] ? 42 : L[i]);
  });
});

describe('repair of whole scans', () => {
  it('finds and repairs damage on soft, grainy scans, and beats leaving it', () => {
    const w = 384,
      h = 256;
    const figures = [];
    let damagedError = { sum: 0, count: 0 };
    let repairedError = { sum: 0, count: 0 };
    for (const seed of [21, 22, 23]) {
      const { L, clean, mask } = drawDamage(softScene(w, h), w, h, new Random(seed), { perMegapixel: 150 });
      const found = detectDamage(L, w, h).mask;
      figures.push(detectionFigures(found, mask, w, h, 2));
      const filled = medianFill(L, w, h, found);
      const add = (a: { sum: number; count: number }, b: { sum: number; count: number }) => ({
        sum: a.sum + b.sum,
        count: a.count + b.count,
      });
      damagedError = add(damagedError, maskedSquaredError(L, clean, mask));
      repairedError = add(repairedError, maskedSquaredError(filled, clean, mask));
    }
    // The detection goals (recall 0.9, precision 0.8 at 2 px), here on soft synthetic scenes.
    for (const f of figures) {
      expect(f.recall).toBeGreaterThanOrEqual(0.9);
      expect(f.precision).toBeGreaterThanOrEqual(0.8);
    }
    // Repair must bring the damaged pixels much closer to the undamaged scan (10 dB: our own margin).
    expect(psnrOf(repairedError) - psnrOf(damagedError)).toBeGreaterThan(10);
  });

  it('leaves an undamaged grainy or soft scan all but untouched (the issue: at most 0.1% of pixels, mean |dL*| under 0.2)', () => {
    const w = 384,
      h = 256;
    for (const grain of [0, 1.5, 3]) {
      const L = softScene(w, h);
      addGrain(L, new Random(30 + grain), grain);
      const found = detectDamage(L, w, h).mask;
      const change = changeFigures(L, medianFill(L, w, h, found));
      expect(change.changedShare).toBeLessThanOrEqual(0.001);
      expect(change.meanAbsDelta).toBeLessThan(0.2);
    }
  });

  it('repairScan keeps unmasked samples bit for bit at 8 and 16 bits, grey and RGB, and replaces only what its mask marks', () => {
    const w = 300,
      h = 200;
    const { L } = drawDamage(softScene(w, h), w, h, new Random(40), { perMegapixel: 300 });
    for (const [depth, channels] of [
      [8, 1],
      [16, 1],
      [8, 3],
      [16, 4],
    ] as const) {
      const max = depth === 8 ? 255 : 65535;
      const data = depth === 8 ? new Uint8Array(w * h * channels) : new Uint16Array(w * h * channels);
      for (let i = 0; i < w * h; i++) {
        // L* to a grey code by its inverse (common practice: Y = ((L + 16) / 116)^3, then the sRGB curve).
        const y = Math.min(1, ((L[i]! + 16) / 116) ** 3);
        const code = Math.round(max * (y <= 0.0031308 ? 12.92 * y : 1.055 * y ** (1 / 2.4) - 0.055));
        for (let c = 0; c < channels; c++) data[i * channels + c] = c === 3 ? max - (i % 7) : code;
      }
      const px = { width: w, height: h, channels, depth, data } as Pixels;
      const before = data.slice();
      const { pixels, mask, repaired } = repairScan(px);
      expect(Buffer.from(data.buffer).equals(Buffer.from(before.buffer))).toBe(true);
      expect(repaired).toBe(mask.reduce((s, m) => s + m, 0));
      expect(repaired).toBeGreaterThan(0);
      let changed = 0;
      for (let i = 0; i < w * h; i++) {
        for (let c = 0; c < channels; c++) {
          const k = i * channels + c;
          if (!mask[i] || c === 3) expect(pixels.data[k]).toBe(data[k]);
          else if (pixels.data[k] !== data[k]) changed++;
        }
      }
      expect(changed).toBeGreaterThan(0);
    }
  });
});

describe('morphology', () => {
  it('squareFilter equals a direct minimum and maximum over the window', () => {
    const rng = new Random(3);
    const w = 23,
      h = 17,
      r = 3;
    const src = Float32Array.from({ length: w * h }, () => rng.next());
    for (const op of ['min', 'max'] as const) {
      const out = squareFilter(src, w, h, r, op);
      for (let y = 0; y < h; y++) {
        for (let x = 0; x < w; x++) {
          let best = op === 'min' ? Infinity : -Infinity;
          for (let dy = -r; dy <= r; dy++) {
            for (let dx = -r; dx <= r; dx++) {
              const v = src[Math.min(h - 1, Math.max(0, y + dy)) * w + Math.min(w - 1, Math.max(0, x + dx))]!;
              best = op === 'min' ? Math.min(best, v) : Math.max(best, v);
            }
          }
          expect(out[y * w + x]).toBe(best);
        }
      }
    }
  });

  it.runIf(onnxRuntimeVersion() !== undefined)(
    'the opening and closing on ONNX Runtime equal those in JavaScript bit for bit, edges included',
    () => {
      const rng = new Random(5);
      // Planes narrower and shorter than the window, and a wide one, so windows reach past every edge.
      for (const [w, h, r] of [
        [41, 29, 5],
        [7, 4, 5],
        [1, 12, 2],
        [300, 3, 4],
      ] as const) {
        const src = Float32Array.from({ length: w * h }, () => 100 * rng.next());
        const { open, close } = openingAndClosingOnRuntime(src, w, h, r);
        expect(Array.from(open)).toEqual(Array.from(opening(src, w, h, r)));
        expect(Array.from(close)).toEqual(Array.from(closing(src, w, h, r)));
      }
    },
  );
});

function transpose(mask: Uint8Array, n: number): Uint8Array {
  const out = new Uint8Array(n * n);
  for (let y = 0; y < n; y++) for (let x = 0; x < n; x++) out[x * n + y] = mask[y * n + x]!;
  return out;
}
