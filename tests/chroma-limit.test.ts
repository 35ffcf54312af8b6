import { describe, expect, it } from 'vitest';
import { inSrgbGamut, limitChroma, maxChroma } from '../src/colour/index.js';
import { random } from './helpers/random.js';

/** Largest in-gamut chroma at (L, hue), by bisection on the exact gamut test of the colour module. */
function bisectChroma(L: number, h: number): number {
  let lo = 0,
    hi = 200;
  for (let k = 0; k < 40; k++) {
    const mid = (lo + hi) / 2;
    if (inSrgbGamut(L, mid * Math.cos(h), mid * Math.sin(h))) lo = mid;
    else hi = mid;
  }
  return lo;
}

describe('limitChroma: new colour kept inside sRGB at constant L* and hue', () => {
  it('brings 10,000 random colours inside the gamut (IEC 61966-2-1 primaries), keeping L* and hue', () => {
    const rnd = random(42);
    const n = 10000;
    const L = new Float32Array(n),
      a = new Float32Array(n),
      b = new Float32Array(n);
    for (let i = 0; i < n; i++) {
      L[i] = 0.5 + rnd() * 99;
      a[i] = (rnd() - 0.5) * 200;
      b[i] = (rnd() - 0.5) * 200;
    }
    const a0 = a.slice(),
      b0 = b.slice(),
      L0 = L.slice();
    limitChroma(L, a, b);
    expect(L).toEqual(L0);
    for (let i = 0; i < n; i++) {
      // Our tolerance: 1e-3 in linear light (moves L* by under 0.1).
      expect(inSrgbGamut(L[i]!, a[i]!, b[i]!, 1e-3)).toBe(true);
      const c0 = Math.hypot(a0[i]!, b0[i]!),
        c = Math.hypot(a[i]!, b[i]!);
      if (c > 1e-3) expect(Math.abs(Math.atan2(b[i]!, a[i]!) - Math.atan2(b0[i]!, a0[i]!))).toBeLessThan(1e-4);
      // Never more chroma than asked for; when it was reduced, not far below the largest in-gamut chroma
      // (the table is interpolated between 2-degree hue steps and cuts corners at the cusps: our tolerance 20%).
      expect(c).toBeLessThanOrEqual(c0 + 1e-4);
      if (c < c0 - 1e-4) expect(c).toBeGreaterThan(0.8 * bisectChroma(L[i]!, Math.atan2(b0[i]!, a0[i]!)));
    }
  });

  it('leaves colours well inside the gamut alone', () => {
    const L = new Float32Array([50, 70, 30]),
      a = new Float32Array([10, -5, 3]),
      b = new Float32Array([-10, 12, 4]);
    limitChroma(L, a, b);
    expect(Array.from(a)).toEqual([10, -5, 3].map(Math.fround));
    expect(Array.from(b)).toEqual([-10, 12, 4].map(Math.fround));
  });

  it('tabulates maximum chroma close to the exact boundary', () => {
    for (const [L, h] of [
      [50, 0.3],
      [90, 1.6],
      [20, 4.2],
      [65, 2.5],
    ] as const) {
      const exact = bisectChroma(L, h);
      expect(maxChroma(L, h)).toBeLessThanOrEqual(exact * 1.02);
      expect(maxChroma(L, h)).toBeGreaterThan(0.9 * exact);
    }
  });
});
