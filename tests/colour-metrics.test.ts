import { describe, expect, it } from 'vitest';
import {
  ciede2000,
  colourfulness,
  inSrgbGamut,
  labToSrgb,
  meanAbError,
  meanCiede2000,
  psnr,
  srgbColourToLab,
  srgbToLab,
} from '../src/colour/index.js';
import { random } from './helpers/random.js';

describe('colourfulness (Hasler & Suesstrunk 2003)', () => {
  it('is 0 for a grey image', () => {
    // Hasler & Suesstrunk (2003): rg = yb = 0 for every neutral pixel, so M = 0.
    const rnd = random(21);
    const grey = new Uint8Array(3000);
    for (let j = 0; j < grey.length; j += 3) grey.fill(Math.floor(rnd() * 256), j, j + 3);
    expect(colourfulness(grey, 3)).toBe(0);
  });

  it('matches a hand-computed two-pixel image at every depth', () => {
    // Hand computation from the paper's definitions (population standard deviation), pixels red and blue:
    // rg = 255, 0 -> mean 127.5, sd 127.5; yb = 127.5, -255 -> mean -63.75, sd 191.25;
    // M = sqrt(127.5^2 + 191.25^2) + 0.3 sqrt(127.5^2 + 63.75^2) = 229.85389 + 0.3 * 142.54933 = 272.61869.
    const expected = 272.61869;
    expect(colourfulness(new Uint8Array([255, 0, 0, 0, 0, 255]), 3)).toBeCloseTo(expected, 4);
    expect(colourfulness(new Uint16Array([65535, 0, 0, 1, 0, 0, 65535, 2]), 4)).toBeCloseTo(expected, 4);
    expect(colourfulness(new Float32Array([1, 0, 0, 0, 0, 1]), 3)).toBeCloseTo(expected, 4);
  });

  it('a uniform colour counts its mean only', () => {
    // Hasler & Suesstrunk (2003): sd = 0, so M = 0.3 sqrt(mean_rg^2 + mean_yb^2); for (200, 100, 50):
    // rg = 100, yb = 100; M = 0.3 * sqrt(20000) = 42.42641 (hand computed).
    const img = new Uint8Array(300);
    for (let j = 0; j < img.length; j += 3) img.set([200, 100, 50], j);
    expect(colourfulness(img, 3)).toBeCloseTo(42.42641, 4);
  });
});

describe('inSrgbGamut', () => {
  it('holds the whole RGB cube surface, including the primaries, and refuses far-out colours', () => {
    // Every 8-bit colour is in sRGB by definition (IEC 61966-2-1); sample the cube's faces.
    const face: number[] = [];
    for (let u = 0; u < 256; u += 15)
      for (let v = 0; v < 256; v += 15) face.push(0, u, v, 255, u, v, u, 0, v, u, 255, v, u, v, 0, u, v, 255);
    const lab = srgbToLab(Uint8Array.from(face), 3);
    let outside = 0;
    for (let i = 0; i < lab.L.length; i++) if (!inSrgbGamut(lab.L[i], lab.a[i], lab.b[i])) outside++;
    expect(outside).toBe(0);
    // CIELAB far beyond any sRGB colour (sRGB a* spans about -86 to 98: CIELAB of the primaries, reference notes).
    expect(inSrgbGamut(50, 120, 0)).toBe(false);
    expect(inSrgbGamut(101, 0, 0)).toBe(false);
    expect(inSrgbGamut(-1, 0, 0)).toBe(false);
    // A tolerance widens the test: L* 100.3 grey is about 0.8% too bright in linear light (CIE 15:2004 inverse).
    expect(inSrgbGamut(100.3, 0, 0)).toBe(false);
    expect(inSrgbGamut(100.3, 0, 0, 0.01)).toBe(true);
  });

  it('agrees with a round trip: inside colours come back unchanged, outside ones are moved', () => {
    // The round trip (CIELAB -> clipped sRGB -> CIELAB) changes a colour exactly when it was clipped.
    // Colours within 0.01 (linear light) of the boundary are left out: there the change is arbitrarily small.
    const rnd = random(22);
    const n = 20_000;
    const lab = { L: new Float32Array(n), a: new Float32Array(n), b: new Float32Array(n) };
    for (let i = 0; i < n; i++) {
      lab.L[i] = rnd() * 100;
      lab.a[i] = rnd() * 256 - 128;
      lab.b[i] = rnd() * 256 - 128;
    }
    const back = srgbToLab(labToSrgb(lab, new Float32Array(n * 3), 3), 3);
    let inside = 0,
      outside = 0,
      worstInside = 0,
      leastOutside = Infinity;
    for (let i = 0; i < n; i++) {
      const d = ciede2000(lab.L[i], lab.a[i], lab.b[i], back.L[i], back.a[i], back.b[i]);
      if (inSrgbGamut(lab.L[i], lab.a[i], lab.b[i])) {
        inside++;
        worstInside = Math.max(worstInside, d);
      } else if (!inSrgbGamut(lab.L[i], lab.a[i], lab.b[i], 0.01)) {
        outside++;
        leastOutside = Math.min(leastOutside, d);
      }
    }
    expect(inside).toBeGreaterThan(1000);
    expect(outside).toBeGreaterThan(1000);
    expect(worstInside).toBeLessThan(1e-3);
    expect(leastOutside).toBeGreaterThan(0.1);
  });
});

describe('image comparisons', () => {
  it('psnr follows 10 log10(255^2 / MSE) and is Infinity for equal images', () => {
    // Definition of PSNR for 8-bit data (common practice); one value off by 10 in four: MSE 25,
    // 10 log10(65025 / 25) = 34.1514035 (hand computed).
    expect(psnr(new Uint8Array([0, 0, 0, 0]), new Uint8Array([0, 0, 0, 10]))).toBeCloseTo(34.1514035, 6);
    expect(psnr(new Uint8Array([1, 2, 3]), new Uint8Array([1, 2, 3]))).toBe(Infinity);
    // All 0 against all 255: MSE 255^2, PSNR 0 dB.
    expect(psnr(new Uint8Array(6), new Uint8Array(6).fill(255))).toBeCloseTo(0, 12);
    expect(() => psnr(new Uint8Array(3), new Uint8Array(4))).toThrow(RangeError);
  });

  it('meanAbError is the mean a*b* distance, ignoring L*', () => {
    // Hand computed: distances 0 and 5 (a 3-4-5 triangle), mean 2.5; L* differs but does not count.
    const x = { L: new Float32Array([10, 20]), a: new Float32Array([0, 3]), b: new Float32Array([0, 4]) };
    const y = { L: new Float32Array([90, 20]), a: new Float32Array([0, 0]), b: new Float32Array([0, 0]) };
    expect(meanAbError(x, y)).toBeCloseTo(2.5, 6);
    expect(() => meanAbError(x, { L: new Float32Array(1), a: new Float32Array(1), b: new Float32Array(1) })).toThrow(RangeError);
  });

  it('meanCiede2000 averages the per-pixel CIEDE2000', () => {
    // Sharma et al. (2005) Table 1, pairs 1 and 2: 2.0425 and 2.8615, mean 2.4520.
    const x = { L: new Float32Array([50, 50]), a: new Float32Array([2.6772, 3.1571]), b: new Float32Array([-79.7751, -77.2803]) };
    const y = { L: new Float32Array([50, 50]), a: new Float32Array([0, 0]), b: new Float32Array([-82.7485, -82.7485]) };
    expect(Math.abs(meanCiede2000(x, y) - 2.452)).toBeLessThan(1e-4);
    expect(meanCiede2000(x, x)).toBe(0);
  });

  it('a hand-made image pair gives consistent metrics at every layer', () => {
    // One pixel changes from sRGB red to sRGB orange: meanCiede2000 is that pixel's CIEDE2000 over two pixels.
    const a = new Uint8Array([255, 0, 0, 0, 128, 0]);
    const b = new Uint8Array([255, 128, 0, 0, 128, 0]);
    const la = srgbToLab(a, 3),
      lb = srgbToLab(b, 3);
    const red = srgbColourToLab(1, 0, 0),
      orange = srgbColourToLab(1, 128 / 255, 0);
    expect(meanCiede2000(la, lb)).toBeCloseTo(ciede2000(...red, ...orange) / 2, 4);
    expect(meanAbError(la, lb)).toBeCloseTo(Math.hypot(red[1] - orange[1], red[2] - orange[2]) / 2, 4);
    // 128 off in one of six values: MSE 128^2 / 6.
    expect(psnr(a, b)).toBeCloseTo(10 * Math.log10((255 * 255 * 6) / (128 * 128)), 10);
  });
});
