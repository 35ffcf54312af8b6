// Tone classification: grey, toned monochrome (with its tint) or colour. Synthetic test images are built
// in CIELAB with a known tint, rendered to 8-bit sRGB by the colour module, then measured back; the demo
// album adds real files: colour photographs from Debian packages and the toned scans made from them
// (demo-photos/SOURCES.md names each photograph's source and each scan's tone).
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import sharp from 'sharp';
import { describe, expect, it } from 'vitest';
import { labToSrgb, srgbToLab, type LabPlanes } from '../src/colour/index.js';
import { classifyTone, decodeImage, toneName, type ToneName } from '../src/image/index.js';
import { random } from './helpers/random.js';

const DEMO = join(dirname(fileURLToPath(import.meta.url)), '..', 'demo-photos');

const W = 128,
  H = 96;

/** An 8-bit sRGB image whose L* ramps 5-95 across and whose a*, b* come from `tint(L)`. */
function tonedImage(tint: (L: number, x: number, y: number) => [number, number]): { lab: LabPlanes; meanA: number; meanB: number } {
  const n = W * H;
  const planned: LabPlanes = { L: new Float32Array(n), a: new Float32Array(n), b: new Float32Array(n) };
  for (let y = 0; y < H; y++) {
    for (let x = 0; x < W; x++) {
      const i = y * W + x;
      const L = 5 + (90 * x) / (W - 1);
      const [a, b] = tint(L, x, y);
      planned.L[i] = L;
      planned.a[i] = a;
      planned.b[i] = b;
    }
  }
  const rgb = labToSrgb(planned, new Uint8Array(n * 3), 3);
  const lab = srgbToLab(rgb, 3); // measured after 8-bit rounding, as a decoded scan would be
  let meanA = 0,
    meanB = 0;
  for (let i = 0; i < n; i++) {
    meanA += lab.a[i]!;
    meanB += lab.b[i]!;
  }
  return { lab, meanA: meanA / n, meanB: meanB / n };
}

/** Strongest in the mid-tones, as toning is: paper white and deep black carry less tint. */
const midtone = (L: number): number => Math.sin((Math.PI * L) / 100);

/** Seeded Gaussian noise (Box-Muller over the shared seeded generator), the same on every run. */
function gaussian(seed: number): () => number {
  const uniform = random(seed);
  return () => Math.sqrt(-2 * Math.log(1 - uniform())) * Math.cos(2 * Math.PI * uniform());
}

describe('classifyTone', () => {
  it('a neutral grey ramp is grey with no tint', () => {
    const { lab } = tonedImage(() => [0, 0]);
    const report = classifyTone(lab);
    expect(report.kind).toBe('grey');
    expect(Math.hypot(report.tint.a, report.tint.b)).toBeLessThan(0.5); // 8-bit rounding only
  });

  it('a faint scanner cast (C*ab about 1.5) still counts as grey', () => {
    const { lab } = tonedImage(() => [0.8, 1.2]);
    expect(classifyTone(lab).kind).toBe('grey');
  });

  it('a sepia print is toned, named sepia, with its mean a*, b* as the tint', () => {
    // Sepia: warm brown, roughly a* 5-10, b* 15-25 in the mid-tones (from memory).
    const { lab, meanA, meanB } = tonedImage((L) => [8 * midtone(L), 20 * midtone(L)]);
    const report = classifyTone(lab);
    expect(report.kind).toBe('toned');
    expect(report.name).toBe('sepia');
    expect(report.tint.a).toBeCloseTo(meanA, 1);
    expect(report.tint.b).toBeCloseTo(meanB, 1);
    expect(report.hue).toBeGreaterThan(60);
    expect(report.hue).toBeLessThan(76); // atan2(20, 8) = 68.2 degrees
  });

  it('a cyanotype is toned and named cyanotype', () => {
    // Prussian blue: a* slightly negative, b* strongly negative (from memory).
    const { lab } = tonedImage((L) => [-4 - 2 * midtone(L), -18 - 12 * midtone(L)]);
    const report = classifyTone(lab);
    expect(report.kind).toBe('toned');
    expect(report.name).toBe('cyanotype');
  });

  it('a selenium-toned print is toned and named selenium', () => {
    // Selenium: purple-brown to red-brown, a* above b* (from memory).
    const { lab } = tonedImage((L) => [7 * midtone(L) + 1, 1.5 * midtone(L)]);
    const report = classifyTone(lab);
    expect(report.kind).toBe('toned');
    expect(report.name).toBe('selenium');
  });

  it('a colour photograph (hues all round the circle) is colour', () => {
    // Hue turns with position: every hue at chroma 25, as in a scene with sky, foliage and skin.
    const { lab } = tonedImage((L, x, y) => {
      const h = ((x * 7 + y * 13) % 360) * (Math.PI / 180);
      return [25 * Math.cos(h), 25 * Math.sin(h)];
    });
    const report = classifyTone(lab);
    expect(report.kind).toBe('colour');
    expect(report.name).toBeUndefined();
    expect(report.spread).toBeGreaterThan(15);
  });

  it('two strong opposing colours are colour, not a tint', () => {
    const { lab } = tonedImage((L, x) => (x < W / 2 ? [40, 30] : [-40, 20]));
    expect(classifyTone(lab).kind).toBe('colour');
  });
});

describe('classifyTone: warm or cool colour photographs against toned prints', () => {
  it('one hue band but unequal chroma at equal lightness (a brown animal on pale grass) is colour', () => {
    // Every pixel at hue 62 degrees, as in a warm photograph: the old rule called this sepia. The upper half
    // has chroma 30, the lower 10, over the same L* ramp, which no single toning process does.
    const { lab } = tonedImage((L, x, y) => {
      const c = y < H / 2 ? 30 : 10;
      return [c * Math.cos((62 * Math.PI) / 180), c * Math.sin((62 * Math.PI) / 180)];
    });
    const report = classifyTone(lab);
    expect(report.hueConcentration).toBeGreaterThan(0.95); // one hue band...
    expect(report.offCurve).toBeGreaterThan(0.4); // ...but half the pixels 10 units off the tone curve
    expect(report.kind).toBe('colour');
  });

  it('one hue, but stronger than any toning (a green leaf, C*ab 60-80) is colour', () => {
    const { lab } = tonedImage((L) => {
      const c = 60 + (20 * L) / 100;
      return [c * Math.cos((130 * Math.PI) / 180), c * Math.sin((130 * Math.PI) / 180)];
    });
    const report = classifyTone(lab);
    expect(report.offCurve).toBeLessThan(0.01); // chroma follows L* as in a toned print
    expect(report.chroma95).toBeGreaterThan(60);
    expect(report.kind).toBe('colour');
  });

  it('a second hue family tied to lightness (dark green below a bright orange sky) is colour', () => {
    // Each L* has one colour, so the tone curve fits; 30% of the pixels are green, 70 degrees from the tint.
    const { lab } = tonedImage((L) => {
      const h = (L < 32 ? 130 : 60) * (Math.PI / 180);
      return [18 * Math.cos(h), 18 * Math.sin(h)];
    });
    const report = classifyTone(lab);
    expect(report.offCurve).toBeLessThan(0.1); // not what finds it
    expect(report.offHue).toBeGreaterThan(0.2);
    expect(report.kind).toBe('colour');
  });

  it('a thin, strongly coloured subject on a nearly grey picture is colour', () => {
    // 2% of the pixels (a yellow rail, two rows across the picture) at chroma 40 over a faintly warm grey.
    const { lab } = tonedImage((L, x, y) => (y === 40 || y === 41 ? [-2, 40] : [1, 4]));
    const report = classifyTone(lab);
    expect(report.offCurve).toBeLessThan(0.1); // not what finds it
    expect(report.outliers).toBeGreaterThan(0.015);
    expect(report.kind).toBe('colour');
  });

  it('colour texture at the pixel scale is not all taken for noise', () => {
    // Alternate columns of chroma 40 and 5 at one hue: the neighbour-based noise estimate sees this as
    // strong noise, but its allowance stops at MAX_CURVE_TOLERANCE (12) and the pixels lie 17 units off.
    const { lab } = tonedImage((L, x) => {
      const c = x % 2 === 0 ? 40 : 5;
      return [c * Math.cos((62 * Math.PI) / 180), c * Math.sin((62 * Math.PI) / 180)];
    });
    const report = classifyTone(lab);
    expect(report.curveTolerance).toBe(12);
    expect(report.kind).toBe('colour');
  });

  it('chroma noise on a scan (4:2:0 blocks, 2 units per a*, b*) leaves a sepia print toned and a grey one grey', () => {
    // Noise of 2 units standard deviation per component, in 2 x 2 blocks as JPEG's half-resolution chroma
    // (ITU-T T.81 with 4:2:0 sampling) leaves it: C*ab 4 to 5 at the 95th percentile on a grey print.
    const noisy = (tint: (L: number) => [number, number], seed: number): LabPlanes => {
      const noise = gaussian(seed);
      const blocks = new Map<number, [number, number]>();
      return tonedImage((L, x, y) => {
        const key = (y >> 1) * W + (x >> 1);
        if (!blocks.has(key)) blocks.set(key, [2 * noise(), 2 * noise()]);
        const [na, nb] = blocks.get(key)!;
        const [a, b] = tint(L);
        return [a + na, b + nb];
      }).lab;
    };
    const sepia = classifyTone(noisy((L) => [8 * midtone(L), 20 * midtone(L)], 7));
    expect(sepia.curveTolerance).toBeGreaterThan(6); // raised by the noise
    expect(sepia.kind).toBe('toned');
    expect(sepia.name).toBe('sepia');
    const grey = classifyTone(noisy(() => [0, 0], 11));
    expect(grey.chroma95).toBeGreaterThan(3); // the noise alone would pass the plain chroma test
    expect(grey.kind).toBe('grey');
  });
});

/** The demo album at full size (as `score` reads originals) and at 512 px (the working size restore and training use). */
async function albumTone(folder: string, name: string): Promise<ReturnType<typeof classifyTone>[]> {
  const file = join(DEMO, folder, name);
  const { pixels } = await decodeImage(file);
  const full = classifyTone(srgbToLab(pixels.data, pixels.channels));
  const { data, info } = await sharp(file)
    .resize(512, 512, { fit: 'inside' })
    .removeAlpha()
    .toColourspace('srgb')
    .raw({ depth: 'uchar' })
    .toBuffer({ resolveWithObject: true });
  const small = classifyTone(srgbToLab(new Uint8Array(data.buffer, data.byteOffset, data.length), info.channels as 3));
  return [full, small];
}

describe('classifyTone on the demo album (demo-photos/SOURCES.md)', () => {
  const originals = [
    'wrenfold-01-hill-pasture.jpg',
    'wrenfold-02-spaniels.jpg',
    'wrenfold-03-new-calf.jpg',
    'wrenfold-04-hill-pony.jpg',
    'wrenfold-05-billy-goat.jpg',
    'wrenfold-06-gosling.jpg',
    'wrenfold-07-orchard-clocks.jpg',
    'wrenfold-08-ferry-couple.jpg',
    'wrenfold-09-cousin-ada.jpg',
  ];
  // 03 (a brown calf on beige ground) and 07 (dandelion clocks in evening light) are warm, one-hue colour
  // photographs that an earlier rule called sepia.
  it.each(originals)('original %s is colour', async (name) => {
    for (const report of await albumTone('originals', name)) expect(report.kind).toBe('colour');
  });

  // The tone make-scans.mjs gave each scan (SOURCES.md): warm black is a weak warm tone, in the sepia hue band.
  const scans: Array<[string, 'grey' | 'toned', ToneName | undefined]> = [
    ['wrenfold-01-hill-pasture.jpg', 'toned', 'sepia'],
    ['wrenfold-02-spaniels.jpg', 'toned', 'sepia'],
    ['wrenfold-03-new-calf.jpg', 'grey', undefined],
    ['wrenfold-04-hill-pony.jpg', 'toned', 'selenium'],
    ['wrenfold-05-billy-goat.jpg', 'toned', 'cyanotype'],
    ['wrenfold-06-gosling.tif', 'grey', undefined],
    ['wrenfold-07-orchard-clocks.jpg', 'toned', 'sepia'],
    ['wrenfold-08-ferry-couple.jpg', 'toned', 'sepia'],
    ['wrenfold-09-cousin-ada.jpg', 'grey', undefined],
  ];
  it.each(scans)('scan %s is %s (%s)', async (name, kind, tint) => {
    for (const report of await albumTone('scans', name)) {
      expect(report.kind).toBe(kind);
      expect(report.name).toBe(tint);
    }
  });

  it('the warm-black scan carries a weaker tint than the sepia ones', async () => {
    const [warm] = await albumTone('scans', 'wrenfold-02-spaniels.jpg');
    const [sepia] = await albumTone('scans', 'wrenfold-01-hill-pasture.jpg');
    // make-scans.mjs maps mid-grey to sRGB (0.53, 0.50, 0.45) for warm black, (0.60, 0.47, 0.33) for sepia.
    expect(Math.hypot(warm!.tint.a, warm!.tint.b)).toBeLessThan(10);
    expect(Math.hypot(sepia!.tint.a, sepia!.tint.b)).toBeGreaterThan(15);
  });
});

describe('toneName', () => {
  it('names hue bands', () => {
    expect(toneName(68, 20)).toBe('sepia');
    expect(toneName(262, 25)).toBe('cyanotype');
    expect(toneName(262, 4)).toBe('blue-black');
    expect(toneName(10, 6)).toBe('selenium');
    expect(toneName(345, 6)).toBe('selenium');
    expect(toneName(140, 6)).toBe('green');
  });
});
