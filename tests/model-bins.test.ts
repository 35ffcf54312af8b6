import { describe, expect, it } from 'vitest';
import { converter } from 'culori';
import { abBins, binLookup, nearestBin } from '../src/model/bins.js';

// Reference: culori 4 (a reference npm library) converts sRGB to CIELAB D65 ('lab65'), independently
// of kinhue's colour module, which abBins uses.
const toLab = converter('lab65');
const toRgb = converter('rgb');

describe('a*b* bins', () => {
  const bins = abBins(10);

  it('derives 262 bins on a grid of 10 (Zhang et al. 2016 report 313; see why below)', () => {
    // Zhang, Isola & Efros (2016) keep Q = 313 "in-gamut" bins of size 10. The sRGB gamut cannot
    // give that many: its projection onto the a*b* plane (union over all L*) touches 262 cells of
    // 10 x 10 (this derivation, checked cell by cell against culori below), and asking that the
    // cell centre itself be an sRGB colour at some L* gives fewer still (229, measured while
    // writing this module). The paper's 313 therefore comes from a wider gamut or a different
    // conversion than sRGB/D65; kinhue keeps the count its derivation gives and sizes the network
    // from it. Zhang's published bins span a* -90..100 and b* -110..90 (from memory), which is the
    // span found here.
    expect(bins.count).toBe(262);
    expect(bins.grid).toBe(10);
    expect(Math.min(...bins.a)).toBe(-90);
    expect(Math.max(...bins.a)).toBe(100);
    expect(Math.min(...bins.b)).toBe(-110);
    expect(Math.max(...bins.b)).toBe(90);
    const keys = new Set(Array.from(bins.a, (a, i) => `${a},${bins.b[i]}`));
    expect(keys.size).toBe(bins.count);
    for (let q = 0; q < bins.count; q++) {
      expect(Math.abs(bins.a[q] % 10)).toBe(0);
      expect(Math.abs(bins.b[q] % 10)).toBe(0);
    }
  });

  it('covers every sRGB colour: the cell of each one, converted by culori, is a bin', () => {
    const lookup = binLookup(bins);
    let checked = 0;
    for (let r = 0; r <= 255; r += 15) {
      for (let g = 0; g <= 255; g += 15) {
        for (let b = 0; b <= 255; b += 15) {
          const lab = toLab({ mode: 'rgb', r: r / 255, g: g / 255, b: b / 255 });
          expect(lookup.cellIndex(lab.a, lab.b), `rgb(${r},${g},${b})`).toBeGreaterThanOrEqual(0);
          checked++;
        }
      }
    }
    // The gamut's corners: the primaries and secondaries, the most saturated colours.
    for (const [r, g, b] of [
      [1, 0, 0],
      [0, 1, 0],
      [0, 0, 1],
      [1, 1, 0],
      [0, 1, 1],
      [1, 0, 1],
    ]) {
      const lab = toLab({ mode: 'rgb', r, g, b });
      expect(lookup.cellIndex(lab.a, lab.b)).toBeGreaterThanOrEqual(0);
    }
    expect(checked).toBe(18 ** 3);
  });

  it('keeps no cell without an sRGB colour: culori finds one in every bin', () => {
    // For each bin, search its cell and L* for a colour culori maps into [0, 1]^3 sRGB.
    for (let q = 0; q < bins.count; q++) {
      let found = false;
      for (let i = 0; i <= 4 && !found; i++) {
        for (let j = 0; j <= 4 && !found; j++) {
          for (let L = 0; L <= 100 && !found; L += 0.5) {
            const c = toRgb({ mode: 'lab65', l: L, a: bins.a[q] - 5 + 2.5 * i, b: bins.b[q] - 5 + 2.5 * j });
            const tol = 1e-6; // float rounding (common practice)
            found = [c.r, c.g, c.b].every((v) => v >= -tol && v <= 1 + tol);
          }
        }
      }
      expect(found, `bin ${q} (${bins.a[q]}, ${bins.b[q]})`).toBe(true);
    }
  });

  it('finds the nearest bin like a brute-force search', () => {
    let s = 7;
    const next = () => ((s = (Math.imul(s, 1664525) + 1013904223) >>> 0) / 4294967296) * 300 - 150;
    for (let k = 0; k < 2000; k++) {
      const a = next();
      const b = next();
      let best = Infinity;
      for (let q = 0; q < bins.count; q++) best = Math.min(best, Math.hypot(bins.a[q] - a, bins.b[q] - b));
      const got = nearestBin(bins, a, b);
      expect(Math.hypot(bins.a[got] - a, bins.b[got] - b)).toBeCloseTo(best, 9);
    }
  });

  it('is cached per grid and rejects a bad grid', () => {
    expect(abBins(10)).toBe(bins);
    expect(abBins(20).count).toBeLessThan(bins.count);
    expect(() => abBins(0)).toThrow(RangeError);
  });
});
