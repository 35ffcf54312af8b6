import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { differenceCiede2000 } from 'culori';
import { describe, expect, it } from 'vitest';
import { colourfulness, meanAbError, meanCiede2000, psnr, srgbToLab } from '../src/colour/index.js';

// The figures `kinhue score` reports come from the colour module; these checks pin each one to a
// case worked by hand and to the published reference data the colour module is tested on.

const tsv = readFileSync(fileURLToPath(new URL('./fixtures/ciede2000-sharma-2005.tsv', import.meta.url)), 'utf8');
const pairs = tsv
  .split('\n')
  .filter((l) => l.trim() && !l.startsWith('#') && !l.startsWith('pair'))
  .map((l) => l.split('\t').map(Number));

describe('score metrics', () => {
  it('PSNR of 8-bit RGB matches the definition worked by hand', () => {
    // PSNR = 10 log10(255^2 / MSE) (common practice, e.g. Gonzalez & Woods). Six values, one off by 3,
    // one off by 4: MSE = (9 + 16) / 6, PSNR = 10 log10(65025 * 6 / 25) = 10 log10(15606) = 41.9329 dB (worked by hand).
    const x = new Uint8Array([10, 20, 30, 40, 50, 60]);
    const y = new Uint8Array([13, 20, 30, 40, 46, 60]);
    expect(psnr(x, y)).toBeCloseTo(10 * Math.log10((65025 * 6) / 25), 10);
    expect(psnr(x, y)).toBeCloseTo(41.9329, 3);
    // Identical images have no error: the ratio is infinite.
    expect(psnr(x, x)).toBe(Infinity);
  });

  it('mean CIEDE2000 over an image equals the mean of Sharma et al. (2005) Table 1', () => {
    // Sharma, Wu & Dalal (2005), Table 1: 34 pairs as a 34-pixel image pair; the image mean must be
    // the mean of the published dE00 column (4 decimals each, so 1e-4 tolerance).
    const plane = (col: number) => Float32Array.from(pairs.map((r) => r[col]));
    const x = { L: plane(1), a: plane(2), b: plane(3) };
    const y = { L: plane(4), a: plane(5), b: plane(6) };
    const expected = pairs.reduce((s, r) => s + r[7], 0) / pairs.length;
    // Float32 planes round the inputs at the 7th digit; the effect on dE00 is far below 1e-4.
    expect(Math.abs(meanCiede2000(x, y) - expected)).toBeLessThan(1e-4);
  });

  it('mean CIEDE2000 of sRGB red against its own grey agrees with culori', () => {
    // Reference library: culori differenceCiede2000 (independent implementation, CIE 15 / Sharma 2005).
    const red = srgbToLab(new Uint8Array([255, 0, 0]), 3);
    const grey = { L: red.L, a: new Float32Array(1), b: new Float32Array(1) };
    const ref = differenceCiede2000()({ mode: 'lab65', l: red.L[0], a: red.a[0], b: red.b[0] }, { mode: 'lab65', l: red.L[0], a: 0, b: 0 });
    expect(meanCiede2000(red, grey)).toBeCloseTo(ref, 3);
  });

  it('mean a*b* error is the mean Euclidean distance in a*b*, worked by hand', () => {
    // Pixel 1: (3, 4) vs (0, 0) -> 5; pixel 2: (1, 1) vs (1, 1) -> 0; mean 2.5. L* is ignored.
    const x = { L: new Float32Array([10, 90]), a: new Float32Array([3, 1]), b: new Float32Array([4, 1]) };
    const y = { L: new Float32Array([50, 20]), a: new Float32Array([0, 1]), b: new Float32Array([0, 1]) };
    expect(meanAbError(x, y)).toBeCloseTo(2.5, 6);
  });

  it('colourfulness follows Hasler & Suesstrunk (2003), worked by hand for a red and a blue pixel', () => {
    // Hasler & Suesstrunk 2003, eq. 3: M = sqrt(s_rg^2 + s_yb^2) + 0.3 sqrt(m_rg^2 + m_yb^2),
    // rg = R - G, yb = (R + G)/2 - B. Red (255,0,0): rg 255, yb 127.5; blue (0,0,255): rg 0, yb -255.
    // Means 127.5 and -63.75; population sds 127.5 and 191.25.
    const expected = Math.sqrt(127.5 ** 2 + 191.25 ** 2) + 0.3 * Math.sqrt(127.5 ** 2 + 63.75 ** 2); // 272.619
    expect(colourfulness(new Uint8Array([255, 0, 0, 0, 0, 255]), 3)).toBeCloseTo(expected, 6);
    expect(expected).toBeCloseTo(272.619, 2);
    // A grey image has no colourfulness.
    expect(colourfulness(new Uint8Array([10, 10, 10, 200, 200, 200]), 3)).toBe(0);
  });
});
