import { describe, expect, it } from 'vitest';
import {
  D65_WHITE,
  LAB_EPSILON,
  LAB_KAPPA,
  greyToLightness,
  labF,
  labToSrgb,
  labToSrgbColour,
  labToXyz,
  lightnessToGrey,
  linearSrgbToXyz,
  linearToSrgb,
  linearToSrgb16,
  linearToSrgb8,
  srgbColourToLab,
  srgbToLab,
  srgbToLinear,
  xyzToLab,
} from '../src/colour/index.js';
import { random } from './helpers/random.js';

/** L* of a relative luminance, written out from CIE 15:2004 for the tests (independent of the source). */
function cieLightness(y: number): number {
  return y > 216 / 24389 ? 116 * Math.cbrt(y) - 16 : (24389 / 27) * y;
}
function cieY(L: number): number {
  return L > 8 ? ((L + 16) / 116) ** 3 : L / (24389 / 27);
}

describe('sRGB transfer function', () => {
  it('decodes 128/255 to 0.215861', () => {
    // IEC 61966-2-1 decode; value as given in the project reference notes (6 decimals).
    expect(Math.abs(srgbToLinear(128 / 255) - 0.215861)).toBeLessThan(5e-7);
    // IEC 61966-2-1: the linear segment below 0.04045 is V / 12.92.
    expect(srgbToLinear(0.04)).toBeCloseTo(0.04 / 12.92, 15);
  });

  it('encodes back what it decodes', () => {
    // IEC 61966-2-1 defines encode as the inverse of decode.
    for (let i = 0; i <= 1000; i++) expect(linearToSrgb(srgbToLinear(i / 1000))).toBeCloseTo(i / 1000, 12);
  });

  it('fast 8- and 16-bit encoders round exactly like round(max * encode(v))', () => {
    // Reference: the IEC 61966-2-1 formula followed by rounding (common practice for quantising).
    const rnd = random(1);
    const values: number[] = [-0.1, 0, 1, 1.5, Number.NaN];
    // Just either side of each decision point (exactly on one, rounding of the formula decides either way).
    for (let k = 0; k < 255; k++) {
      const t = srgbToLinear((k + 0.5) / 255);
      values.push(t * (1 - 1e-12), t * (1 + 1e-12));
    }
    for (let k = 0; k < 65535; k += 97) {
      const t = srgbToLinear((k + 0.5) / 65535);
      values.push(t * (1 - 1e-12), t * (1 + 1e-12));
    }
    for (let i = 0; i < 100_000; i++) values.push(rnd() ** 3);
    const wrong: number[] = [];
    for (const v of values) {
      const c = Number.isNaN(v) ? 0 : Math.min(1, Math.max(0, v));
      if (linearToSrgb8(v) !== Math.round(255 * linearToSrgb(c))) wrong.push(v);
      if (linearToSrgb16(v) !== Math.round(65535 * linearToSrgb(c))) wrong.push(v);
    }
    expect(wrong).toEqual([]);
  });
});

describe('XYZ and CIELAB constants', () => {
  it('maps sRGB white to D65 (ASTM E308: 95.047, 100, 108.883)', () => {
    // ASTM E308 D65, 2 degree observer, on the Y = 1 scale.
    expect(D65_WHITE).toEqual([0.95047, 1, 1.08883]);
    const [x, y, z] = linearSrgbToXyz(1, 1, 1);
    expect(x).toBeCloseTo(0.95047, 12);
    expect(y).toBeCloseTo(1, 12);
    expect(z).toBeCloseTo(1.08883, 12);
    // CIE 15:2004: the reference white has L* = 100, a* = b* = 0.
    const lab = xyzToLab(0.95047, 1, 1.08883);
    expect(lab[0]).toBeCloseTo(100, 10);
    expect(lab[1]).toBeCloseTo(0, 10);
    expect(lab[2]).toBeCloseTo(0, 10);
  });

  it('uses the exact CIE 15:2004 constants, whose two branches of f(t) meet', () => {
    // CIE 15:2004 (and its 2004 errata): epsilon = 216/24389, kappa = 24389/27 make f continuous at epsilon.
    expect(LAB_EPSILON).toBe(216 / 24389);
    expect(LAB_KAPPA).toBe(24389 / 27);
    expect(Math.abs(Math.cbrt(LAB_EPSILON) - (LAB_KAPPA * LAB_EPSILON + 16) / 116)).toBeLessThan(1e-15);
    // f(t) from the source against the CIE 15:2004 formula, both branches.
    for (const t of [0, 0.001, 0.008, 0.009, 0.2, 0.5, 0.9, 1]) {
      const ref = t > 216 / 24389 ? Math.cbrt(t) : ((24389 / 27) * t + 16) / 116;
      expect(labF(t)).toBeCloseTo(ref, 12);
    }
  });

  it('inverts CIELAB back to XYZ', () => {
    // CIE 15:2004 gives the inverse; check it undoes the forward transform over a grid.
    for (const [x, y, z] of [
      [0.1, 0.2, 0.3],
      [0.001, 0.002, 0.0005],
      [0.9, 0.95, 1.0],
      [0.4, 0.3, 0.02],
    ]) {
      const [L, a, b] = xyzToLab(x, y, z);
      const back = labToXyz(L, a, b);
      expect(back[0]).toBeCloseTo(x, 12);
      expect(back[1]).toBeCloseTo(y, 12);
      expect(back[2]).toBeCloseTo(z, 12);
    }
  });
});

// Published CIELAB of the sRGB primaries and white: the project reference notes (7-decimal sRGB matrix,
// white 0.95047/1/1.08883, CIE 15:2004), quoted to 4 decimals; tolerance 1e-4 covers that rounding.
const PUBLISHED: [string, [number, number, number], [number, number, number]][] = [
  ['red', [1, 0, 0], [53.2408, 80.0925, 67.2032]],
  ['green', [0, 1, 0], [87.7347, -86.1827, 83.1793]],
  ['blue', [0, 0, 1], [32.297, 79.1875, -107.8602]],
  ['white', [1, 1, 1], [100, 0, 0]],
];

describe('sRGB primaries and white in CIELAB', () => {
  it.each(PUBLISHED)('%s matches the published values (scalar and every bulk depth)', (_name, rgb, lab) => {
    const scalar = srgbColourToLab(rgb[0], rgb[1], rgb[2]);
    const u8 = srgbToLab(new Uint8Array(rgb.map((v) => v * 255)), 3);
    const u16 = srgbToLab(new Uint16Array(rgb.map((v) => v * 65535)), 3);
    const f32 = srgbToLab(new Float32Array(rgb), 3);
    for (const got of [scalar, [u8.L[0], u8.a[0], u8.b[0]], [u16.L[0], u16.a[0], u16.b[0]], [f32.L[0], f32.a[0], f32.b[0]]]) {
      for (let c = 0; c < 3; c++) expect(Math.abs(got[c] - lab[c])).toBeLessThan(1e-4);
    }
    // The inverse lands back on the primary (CIE 15:2004 inverse, IEC 61966-2-1 encode).
    const back = labToSrgbColour(lab[0], lab[1], lab[2]);
    for (let c = 0; c < 3; c++) expect(Math.abs(back[c] - rgb[c])).toBeLessThan(1e-5);
  });
});

describe('bulk round trips', () => {
  it('every 8-bit sRGB colour survives sRGB -> CIELAB -> sRGB unchanged', () => {
    // Requirement of issue 2; the reference is the input itself. 16 chunks of 2^20 colours.
    const chunk = 1 << 20;
    const rgb = new Uint8Array(chunk * 3);
    const back = new Uint8Array(chunk * 3);
    let mismatches = 0;
    for (let r0 = 0; r0 < 256; r0 += 16) {
      for (let i = 0, j = 0; i < chunk; i++, j += 3) {
        rgb[j] = r0 + (i >>> 16);
        rgb[j + 1] = (i >>> 8) & 255;
        rgb[j + 2] = i & 255;
      }
      labToSrgb(srgbToLab(rgb, 3), back, 3);
      for (let j = 0; j < rgb.length; j++) if (rgb[j] !== back[j]) mismatches++;
    }
    expect(mismatches).toBe(0);
  });

  it('random 16-bit colours and every 16-bit grey survive the round trip', () => {
    // The reference is the input itself (lossless at 16 bits: float32 CIELAB keeps far more than a 16-bit step).
    const rnd = random(2);
    const n = 200_000;
    const rgb = new Uint16Array(n * 3);
    for (let j = 0; j < rgb.length; j++) rgb[j] = Math.floor(rnd() * 65536);
    const back = labToSrgb(srgbToLab(rgb, 3), new Uint16Array(n * 3), 3);
    expect(Array.from(back).every((v, j) => v === rgb[j])).toBe(true);
    const grey = new Uint16Array(65536).map((_, i) => i);
    expect(Array.from(lightnessToGrey(greyToLightness(grey, 1), new Uint16Array(65536))).every((v, i) => v === i)).toBe(true);
  });

  it('16-bit and float inputs agree with the 8-bit path for the same colours', () => {
    // An 8-bit code v is the same colour as 16-bit v * 257 and float v / 255 (IEC 61966-2-1 scaling).
    const rnd = random(3);
    const n = 10_000;
    const u8 = new Uint8Array(n * 3).map(() => Math.floor(rnd() * 256));
    const a = srgbToLab(u8, 3);
    const b = srgbToLab(
      Uint16Array.from(u8, (v) => v * 257),
      3,
    );
    const c = srgbToLab(
      Float32Array.from(u8, (v) => v / 255),
      3,
    );
    let worst = 0;
    for (let i = 0; i < n; i++) {
      const ref = srgbColourToLab(u8[3 * i] / 255, u8[3 * i + 1] / 255, u8[3 * i + 2] / 255);
      for (const p of [a, b, c]) {
        worst = Math.max(worst, Math.abs(p.L[i] - ref[0]), Math.abs(p.a[i] - ref[1]), Math.abs(p.b[i] - ref[2]));
      }
    }
    expect(worst).toBeLessThan(1e-4);
  });

  it('float output round-trips float input to float32 precision, with alpha set to 1', () => {
    const rnd = random(4);
    const n = 10_000;
    const rgba = new Float32Array(n * 4).map((_, j) => (j % 4 === 3 ? 0.25 : rnd()));
    const lab = srgbToLab(rgba, 4);
    const back = labToSrgb(lab, new Float32Array(n * 4), 4);
    let worst = 0,
      alphaWrong = 0;
    for (let j = 0; j < rgba.length; j++) {
      if (j % 4 === 3) alphaWrong += back[j] === 1 ? 0 : 1;
      else worst = Math.max(worst, Math.abs(back[j] - rgba[j]));
    }
    expect(alphaWrong).toBe(0);
    expect(worst).toBeLessThan(2e-6);
  });

  it('four-channel integer data ignores input alpha and writes opaque alpha', () => {
    const rgba = new Uint8Array([200, 100, 50, 7, 10, 20, 30, 255]);
    const lab = srgbToLab(rgba, 4);
    const rgb = srgbToLab(new Uint8Array([200, 100, 50, 10, 20, 30]), 3);
    expect(Array.from(lab.a)).toEqual(Array.from(rgb.a));
    expect(Array.from(labToSrgb(lab, new Uint8Array(8), 4))).toEqual([200, 100, 50, 255, 10, 20, 30, 255]);
    expect(Array.from(labToSrgb(lab, new Uint16Array(8), 4))).toEqual([51400, 25700, 12850, 65535, 2570, 5140, 7710, 65535]);
  });

  it('clips out-of-gamut CIELAB per channel', () => {
    // L* 50, a* 120 lies far outside sRGB: red saturates at the top, green at the bottom.
    const lab = { L: new Float32Array([50, 120, -5]), a: new Float32Array([120, 0, 0]), b: new Float32Array([0, 0, 0]) };
    const out = labToSrgb(lab, new Uint8Array(9), 3);
    expect(out[0]).toBe(255);
    expect(out[1]).toBe(0);
    expect(Array.from(out.slice(3))).toEqual([255, 255, 255, 0, 0, 0]);
    const f = labToSrgb(lab, new Float32Array(9), 3);
    expect(Math.max(...f)).toBeLessThanOrEqual(1);
    expect(Math.min(...f)).toBeGreaterThanOrEqual(0);
  });
});

describe('grey data and lightness', () => {
  it('grey input gives a* = b* = 0 exactly at every depth and layout', () => {
    // CIE 15:2004: a neutral (X/Xn = Y/Yn = Z/Zn) has a* = b* = 0.
    const rnd = random(5);
    const inputs = [
      srgbToLab(
        new Uint8Array(1000).map(() => rnd() * 256),
        1,
      ),
      srgbToLab(
        new Uint16Array(2000).map(() => rnd() * 65536),
        2,
      ),
      srgbToLab(
        new Float32Array(1000).map(() => rnd()),
        1,
      ),
      srgbToLab(
        Uint8Array.from({ length: 3000 }, (_, j) => Math.floor(j / 3) % 256),
        3,
      ),
      srgbToLab(
        Uint16Array.from({ length: 4000 }, (_, j) => Math.floor(j / 4) * 61),
        4,
      ),
    ];
    for (const lab of inputs) {
      expect(lab.a.every((v) => v === 0)).toBe(true);
      expect(lab.b.every((v) => v === 0)).toBe(true);
    }
  });

  it('L* of grey levels follows CIE 15:2004 from the IEC 61966-2-1 decode', () => {
    const codes = new Uint8Array(256).map((_, i) => i);
    const L = greyToLightness(codes, 1);
    let worst = 0;
    for (let i = 0; i < 256; i++) worst = Math.max(worst, Math.abs(L[i] - cieLightness(srgbToLinear(i / 255))));
    expect(worst).toBeLessThan(1e-4);
    // Grey + alpha reads only the grey channel.
    expect(Array.from(greyToLightness(new Uint8Array([119, 0, 119, 255]), 2))).toEqual([L[119], L[119]]);
  });

  it('greyToLightness of RGB data equals the L* plane of srgbToLab', () => {
    const rnd = random(6);
    for (const data of [
      new Uint8Array(30_000).map(() => rnd() * 256),
      new Uint16Array(30_000).map(() => rnd() * 65536),
      new Float32Array(30_000).map(() => rnd()),
    ]) {
      expect(Array.from(greyToLightness(data, 3))).toEqual(Array.from(srgbToLab(data, 3).L));
    }
  });

  it('greyToLightness gives the same L* for 8-bit RGB when colours repeat and when they outnumber its memory of recent ones', () => {
    const rnd = random(7);
    // 200,000 random colours (more than the 65,536 it remembers, so remembered ones are replaced), then a
    // toned image with few colours read three times over.
    const many = new Uint8Array(600_000).map(() => rnd() * 256);
    const toned = new Uint8Array(3 * 50_000);
    for (let i = 0; i < 50_000; i++) {
      const v = Math.floor(rnd() * 40) + 100;
      toned.set([v + 18, Math.round(v * 0.86 + 8), Math.round(v * 0.68)], 3 * i);
    }
    for (const data of [many, toned, toned, many, toned]) {
      expect(Array.from(greyToLightness(data, 3))).toEqual(Array.from(srgbToLab(data, 3).L));
    }
  });

  it('greyToLightness writes into a buffer given for it and returns the part it filled', () => {
    const data = new Uint8Array([10, 200, 30, 119, 119, 119]);
    const out = new Float32Array(5).fill(-1);
    const L = greyToLightness(data, 3, out);
    expect(L.length).toBe(2);
    expect(L.buffer).toBe(out.buffer);
    expect(Array.from(out)).toEqual([...Array.from(srgbToLab(data, 3).L), -1, -1, -1]);
    expect(() => greyToLightness(data, 3, new Float32Array(1))).toThrow(RangeError);
  });

  it('lightnessToGrey renders L* as the nearest grey and round-trips L*', () => {
    // Every 8-bit grey level comes back exactly.
    const codes = new Uint8Array(256).map((_, i) => i);
    expect(Array.from(lightnessToGrey(greyToLightness(codes, 1), new Uint8Array(256)))).toEqual(Array.from(codes));
    const rnd = random(7);
    const L = new Float32Array(20_000).map(() => rnd() * 100);
    // Integer output is round(max * encode(Y(L*))): CIE 15:2004 inverse then IEC 61966-2-1 encode.
    const g8 = lightnessToGrey(L, new Uint8Array(L.length));
    const g16 = lightnessToGrey(L, new Uint16Array(L.length));
    const gf = lightnessToGrey(L, new Float32Array(L.length));
    const Lf = greyToLightness(gf, 1);
    let wrong8 = 0,
      wrong16 = 0,
      worst = 0;
    for (let i = 0; i < L.length; i++) {
      if (g8[i] !== Math.round(255 * linearToSrgb(cieY(L[i])))) wrong8++;
      if (g16[i] !== Math.round(65535 * linearToSrgb(cieY(L[i])))) wrong16++;
      worst = Math.max(worst, Math.abs(Lf[i] - L[i]));
    }
    expect([wrong8, wrong16]).toEqual([0, 0]);
    expect(worst).toBeLessThan(1e-3);
    // Out-of-range L* clips to black and white.
    expect(Array.from(lightnessToGrey(new Float32Array([-3, 130]), new Uint8Array(2)))).toEqual([0, 255]);
  });
});

describe('argument checks', () => {
  it('refuses impossible layouts with a RangeError', () => {
    expect(() => srgbToLab(new Uint8Array(4), 3)).toThrow(RangeError);
    expect(() => srgbToLab(new Uint8Array(6), 5 as 3)).toThrow(RangeError);
    const lab = srgbToLab(new Uint8Array(6), 3);
    expect(() => labToSrgb(lab, new Uint8Array(5), 3)).toThrow(RangeError);
    expect(() => lightnessToGrey(lab.L, new Uint8Array(3))).toThrow(RangeError);
  });
});
