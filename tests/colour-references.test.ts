// Cross-checks against two implementations the project did not write: libvips (through sharp's own
// sRGB -> CIELAB conversion) and culori (an independent colour library from the npm registry).
import { converter, differenceCiede2000, displayable } from 'culori';
import sharp from 'sharp';
import { describe, expect, it } from 'vitest';
import { ciede2000, inSrgbGamut, labToSrgb, srgbToLab } from '../src/colour/index.js';
import { random } from './helpers/random.js';

function randomRgb8(n: number, seed: number): Uint8Array {
  const rnd = random(seed);
  const data = new Uint8Array(n * 3);
  for (let j = 0; j < data.length; j++) data[j] = Math.floor(rnd() * 256);
  // The corners of the cube too: black, white, primaries and secondaries.
  const corners = [0, 0, 0, 255, 255, 255, 255, 0, 0, 0, 255, 0, 0, 0, 255, 255, 255, 0, 0, 255, 255, 255, 0, 255];
  data.set(corners, 0);
  return data;
}

describe('sRGB -> CIELAB against libvips', () => {
  it('65,536 seeded random colours stay within CIEDE2000 0.1 of sharp/libvips', async () => {
    // Reference: libvips' colourspace conversion (sRGB -> CIELAB D65) as exposed by sharp, float output.
    // libvips uses the 4-decimal IEC matrix, so small differences are expected; the bound is issue 2's.
    const width = 256,
      height = 256;
    const rgb = randomRgb8(width * height, 11);
    const { data, info } = await sharp(Buffer.from(rgb), { raw: { width, height, channels: 3 } })
      .toColourspace('lab')
      .raw({ depth: 'float' })
      .toBuffer({ resolveWithObject: true });
    expect(info.channels).toBe(3);
    const vips = new Float32Array(data.buffer, data.byteOffset, data.length / 4);
    const ours = srgbToLab(rgb, 3);
    let worst = 0;
    for (let i = 0; i < width * height; i++) {
      worst = Math.max(worst, ciede2000(ours.L[i], ours.a[i], ours.b[i], vips[3 * i], vips[3 * i + 1], vips[3 * i + 2]));
    }
    expect(worst).toBeLessThan(0.1);
  });
});

describe('CIELAB against culori', () => {
  const toLab65 = converter('lab65');
  const toRgb = converter('rgb');

  it('sRGB -> CIELAB: 20,000 seeded random colours stay within CIEDE2000 0.1 of culori lab65', () => {
    // Reference: culori 'lab65' mode (CIELAB, D65), its own matrices and white.
    const n = 20_000;
    const rgb = randomRgb8(n, 12);
    const ours = srgbToLab(rgb, 3);
    let worst = 0;
    for (let i = 0; i < n; i++) {
      const c = toLab65({ mode: 'rgb', r: rgb[3 * i] / 255, g: rgb[3 * i + 1] / 255, b: rgb[3 * i + 2] / 255 });
      worst = Math.max(worst, ciede2000(ours.L[i], ours.a[i], ours.b[i], c.l, c.a, c.b));
    }
    expect(worst).toBeLessThan(0.1);
  });

  it('CIELAB -> sRGB: 10,000 in-gamut colours land within CIEDE2000 0.1 of culori', () => {
    // Reference: culori lab65 -> rgb. Only colours culori calls displayable, so clipping plays no part.
    // The two sRGB results are compared perceptually (both measured with our forward conversion, checked
    // above against libvips and culori), since near black a tiny linear difference is a large sRGB step.
    const rnd = random(13);
    const L: number[] = [],
      a: number[] = [],
      b: number[] = [];
    while (L.length < 10_000) {
      const c = { mode: 'lab65' as const, l: rnd() * 100, a: rnd() * 200 - 100, b: rnd() * 200 - 100 };
      if (displayable(c)) {
        L.push(c.l);
        a.push(c.a);
        b.push(c.b);
      }
    }
    const n = L.length;
    const lab = { L: Float32Array.from(L), a: Float32Array.from(a), b: Float32Array.from(b) };
    const oursRgb = labToSrgb(lab, new Float32Array(n * 3), 3);
    const theirsRgb = new Float32Array(n * 3);
    let worstRgb = 0;
    for (let i = 0; i < n; i++) {
      const c = toRgb({ mode: 'lab65', l: lab.L[i], a: lab.a[i], b: lab.b[i] });
      theirsRgb.set([c.r, c.g, c.b], 3 * i);
    }
    for (let j = 0; j < n * 3; j++) worstRgb = Math.max(worstRgb, Math.abs(oursRgb[j] - theirsRgb[j]));
    const ours = srgbToLab(oursRgb, 3);
    const theirs = srgbToLab(theirsRgb, 3);
    let worst = 0;
    for (let i = 0; i < n; i++) {
      worst = Math.max(worst, ciede2000(ours.L[i], ours.a[i], ours.b[i], theirs.L[i], theirs.a[i], theirs.b[i]));
    }
    expect(worst).toBeLessThan(0.1);
    // And on the 0-1 sRGB scale, within a few thousandths (different white points: common-practice bound).
    expect(worstRgb).toBeLessThan(0.005);
  });

  it('CIEDE2000 agrees with culori on 10,000 random pairs', () => {
    // Reference: culori differenceCiede2000 (an independent implementation of Sharma et al. 2005).
    const rnd = random(14);
    const diff = differenceCiede2000();
    let worst = 0;
    for (let i = 0; i < 10_000; i++) {
      const p = { mode: 'lab65' as const, l: rnd() * 100, a: rnd() * 200 - 100, b: rnd() * 200 - 100 };
      const q = { mode: 'lab65' as const, l: rnd() * 100, a: rnd() * 200 - 100, b: rnd() * 200 - 100 };
      worst = Math.max(worst, Math.abs(diff(p, q) - ciede2000(p.l, p.a, p.b, q.l, q.a, q.b)));
    }
    expect(worst).toBeLessThan(1e-9);
  });

  it('inSrgbGamut agrees with culori displayable away from the boundary', () => {
    // Reference: culori displayable() on lab65 colours. The two use slightly different white points, so
    // colours within 0.005 (linear light) of the gamut boundary are left out of the comparison.
    const rnd = random(15);
    let compared = 0,
      disagree = 0;
    for (let i = 0; i < 50_000; i++) {
      const L = rnd() * 100,
        a = rnd() * 256 - 128,
        b = rnd() * 256 - 128;
      if (inSrgbGamut(L, a, b, -0.005) !== inSrgbGamut(L, a, b, 0.005)) continue;
      compared++;
      if (inSrgbGamut(L, a, b) !== displayable({ mode: 'lab65', l: L, a, b })) disagree++;
    }
    expect(compared).toBeGreaterThan(40_000);
    expect(disagree).toBe(0);
  });
});
