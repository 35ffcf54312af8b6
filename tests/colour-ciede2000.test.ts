import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { ciede2000 } from '../src/colour/index.js';

// Source: G. Sharma, W. Wu, E. N. Dalal (2005), Color Research & Application 30(1), Table 1;
// the fixture keeps the citation header.
const tsv = readFileSync(fileURLToPath(new URL('./fixtures/ciede2000-sharma-2005.tsv', import.meta.url)), 'utf8');
const rows = tsv
  .split('\n')
  .filter((line) => line.trim() !== '' && !line.startsWith('#') && !line.startsWith('pair'))
  .map((line) => line.split('\t').map(Number));

describe('ciede2000', () => {
  it('reads all 34 pairs of Sharma, Wu & Dalal (2005)', () => {
    expect(rows).toHaveLength(34);
    expect(rows.map((r) => r[0])).toEqual(Array.from({ length: 34 }, (_, i) => i + 1));
  });

  it.each(rows)('pair %i matches Sharma et al. (2005) Table 1 within 1e-4, both orders', (_pair, L1, a1, b1, L2, a2, b2, dE) => {
    // Sharma et al. (2005) Table 1, kL = kC = kH = 1; the table gives dE00 to 4 decimals.
    expect(Math.abs(ciede2000(L1, a1, b1, L2, a2, b2) - dE)).toBeLessThan(1e-4);
    // Sharma et al. (2005) note the formula is symmetric; pairs 9-16 test the hue discontinuity both ways.
    expect(Math.abs(ciede2000(L2, a2, b2, L1, a1, b1) - dE)).toBeLessThan(1e-4);
  });

  it('is zero for identical colours and grows with the parametric weights as the formula says', () => {
    // Sharma et al. (2005) eq. 22: dE00 = 0 when both colours are equal.
    expect(ciede2000(50, 10, -10, 50, 10, -10)).toBe(0);
    // Sharma et al. (2005) eq. 22: a lightness-only difference is divided by kL * SL, so kL = 2 halves it.
    const d1 = ciede2000(40, 0, 0, 45, 0, 0);
    expect(ciede2000(40, 0, 0, 45, 0, 0, 2)).toBeCloseTo(d1 / 2, 12);
  });
});
