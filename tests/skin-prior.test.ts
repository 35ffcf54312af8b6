import { spawnSync } from 'node:child_process';
import { cp, mkdtemp, readFile, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { shrinkPlane, srgbToLab } from '../src/colour/index.js';
import { ModelError } from '../src/errors.js';
import { applySkinPrior, SKIN_COLOUR, skinWeights } from '../src/hints/index.js';
import { decodeImage } from '../src/image/index.js';
import { FACE_FINDER_DIR, findFaces, initBackend, loadFaceFinder, type FaceBox, type FaceFinder } from '../src/model/index.js';

const REPO = join(dirname(fileURLToPath(import.meta.url)), '..');
const SCANS = join(REPO, 'demo-photos', 'scans');
const BIN = join(REPO, 'bin', 'kinhue.js');

/**
 * A synthetic portrait, 80 x 80: a face (L* 65) of radius 14 at (40, 40), ringed by dark hair (L* 25) to
 * radius 17, on a background as light as the face (L* 65), so only the outline tells them apart.
 */
function portrait(): { L: Float32Array; face: FaceBox } {
  const n = 80;
  const L = new Float32Array(n * n);
  for (let y = 0; y < n; y++) {
    for (let x = 0; x < n; x++) {
      const r = Math.hypot(x + 0.5 - 40, y + 0.5 - 40);
      L[y * n + x] = r < 14 ? 65 : r < 17 ? 25 : 65;
    }
  }
  // The detector's box: brows to mouth, ear to ear, a little above the face's centre.
  return { L, face: { x: 28 / 80, y: 26 / 80, width: 24 / 80, height: 24 / 80, score: 0.9 } };
}

const hueOf = (a: number, b: number): number => ((Math.atan2(b, a) * 180) / Math.PI + 360) % 360;

describe('skin prior on a synthetic portrait', () => {
  it('gives the face the skin hue at its own L*, stops at its outline, and leaves the rest bit for bit', () => {
    const { L, face } = portrait();
    // The network's guess: green everywhere (the complaint that led to the prior).
    const a = new Float32Array(L.length).fill(-20);
    const b = new Float32Array(L.length).fill(10);
    const before = { a: Float32Array.from(a), b: Float32Array.from(b) };
    const out = applySkinPrior(L, a, b, 80, 80, [face]);
    expect(a).toEqual(before.a); // inputs are not changed
    expect(b).toEqual(before.b);
    const at = (x: number, y: number): [number, number] => [out.a[y * 80 + x]!, out.b[y * 80 + x]!];
    // Face middle: 85% skin colour at L* 65 (full chroma there), 15% the guess; green (hue 153) becomes a warm
    // hue close to the skin band of 50-60 degrees (see SKIN_COLOUR's source).
    const [am, bm] = at(40, 40);
    const rad = (SKIN_COLOUR.hue * Math.PI) / 180;
    expect(am).toBeCloseTo(0.85 * SKIN_COLOUR.chroma * Math.cos(rad) + 0.15 * -20, 4);
    expect(bm).toBeCloseTo(0.85 * SKIN_COLOUR.chroma * Math.sin(rad) + 0.15 * 10, 4);
    expect(hueOf(am, bm)).toBeLessThan(70);
    // Beyond the hair, inside the face's ellipse (below the chin): as light as the face, but across the outline.
    const [ab, bb] = at(40, 60);
    expect(Math.hypot(ab - -20, bb - 10)).toBeLessThan(1);
    // Outside the ellipse: untouched, bit for bit.
    for (const [x, y] of [
      [2, 2],
      [77, 40],
      [40, 78],
      [10, 70],
    ] as const) {
      expect(at(x, y)).toEqual([-20, 10]);
    }
    expect(out.record.faces).toHaveLength(1);
    expect(out.record.hue).toBe(SKIN_COLOUR.hue);
    // About the face's disk (pi * 14^2 = 616 pixels), not the ellipse (pi * 14.9 * 21 = 980).
    expect(out.record.pixels).toBeGreaterThan(400);
    expect(out.record.pixels).toBeLessThan(700);
  });

  it('follows gentle shading across a face but fades where L* is far from the face middle', () => {
    const n = 80;
    const { face } = portrait();
    const L = new Float32Array(n * n);
    // A face lit from the left: L* falls from 75 to 45 across it, a pixel at a time.
    for (let y = 0; y < n; y++) for (let x = 0; x < n; x++) L[y * n + x] = 75 - (30 * x) / n;
    const w = skinWeights(L, n, n, [face]);
    expect(w[40 * n + 30]).toBeGreaterThan(0.8);
    expect(w[40 * n + 50]).toBeGreaterThan(0.8);
    // An eye or a nostril 30 L* darker than the face's middle: hardly touched.
    L[40 * n + 40] = L[40 * n + 40]! - 30;
    expect(skinWeights(L, n, n, [face])[40 * n + 40]).toBeLessThan(0.2);
  });

  it('with no faces gives the planes back unchanged and counts nothing', () => {
    const { L } = portrait();
    const a = new Float32Array(L.length).fill(3);
    const b = new Float32Array(L.length).fill(-4);
    const out = applySkinPrior(L, a, b, 80, 80, []);
    expect(out.a).toEqual(a);
    expect(out.b).toEqual(b);
    expect(out.record).toMatchObject({ faces: [], pixels: 0, share: 0 });
  });
});

/** A scan's L* at full size, or with its long side brought down to `longSide` (as restore's working size). */
async function lightnessOf(file: string, longSide?: number): Promise<{ L: Float32Array; width: number; height: number }> {
  const { pixels } = await decodeImage(file);
  const L = srgbToLab(pixels.data, pixels.channels).L;
  if (!longSide) return { L, width: pixels.width, height: pixels.height };
  const s = longSide / Math.max(pixels.width, pixels.height);
  const width = Math.round(pixels.width * s);
  const height = Math.round(pixels.height * s);
  return { L: shrinkPlane(L, pixels.width, pixels.height, width, height), width, height };
}

describe('face finder (BlazeFace, shipped in models/face-finder) on the demo album', () => {
  let finder: FaceFinder;
  beforeAll(async () => {
    await initBackend();
    finder = await loadFaceFinder();
  }, 60_000);

  const centre = (f: FaceBox): [number, number] => [f.x + f.width / 2, f.y + f.height / 2];

  it('finds both faces of the couple where we marked them by eye, and one in the portrait', async () => {
    const couple = await lightnessOf(join(SCANS, 'wrenfold-08-ferry-couple.jpg'));
    const faces = findFaces(finder, couple.L, couple.width, couple.height);
    expect(faces).toHaveLength(2);
    // Face centres marked by eye on the photo (fractions of width and height): her face, his face.
    const marked: [number, number][] = [
      [0.345, 0.27],
      [0.585, 0.22],
    ];
    for (const [mx, my] of marked) {
      expect(
        faces.some((f) => Math.hypot(centre(f)[0] - mx, centre(f)[1] - my) < 0.05),
        `a face near ${mx}, ${my}`,
      ).toBe(true);
    }
    const ada = await lightnessOf(join(SCANS, 'wrenfold-09-cousin-ada.jpg'));
    const one = findFaces(finder, ada.L, ada.width, ada.height);
    expect(one).toHaveLength(1);
    expect(Math.hypot(centre(one[0]!)[0] - 0.55, centre(one[0]!)[1] - 0.62)).toBeLessThan(0.12);
  });

  it.each([
    'wrenfold-01-hill-pasture.jpg',
    'wrenfold-02-spaniels.jpg',
    'wrenfold-03-new-calf.jpg',
    'wrenfold-04-hill-pony.jpg',
    'wrenfold-05-billy-goat.jpg',
    'wrenfold-06-gosling.tif',
    'wrenfold-07-orchard-clocks.jpg',
  ])('finds no face in %s (landscapes, animals, flowers), at full size or at a working size', async (name) => {
    for (const size of [undefined, 512, 320]) {
      const scan = await lightnessOf(join(SCANS, name), size);
      expect(findFaces(finder, scan.L, scan.width, scan.height), `long side ${size ?? 'full'}`).toEqual([]);
    }
  });

  it('refuses a detector file that differs from the shipped one, naming it', async () => {
    const dir = await mkdtemp(join(tmpdir(), 'kinhue-faces-'));
    try {
      await cp(FACE_FINDER_DIR, dir, { recursive: true });
      const weights = await readFile(join(dir, 'face-finder.bin'));
      weights[100] = weights[100]! ^ 0xff;
      await writeFile(join(dir, 'face-finder.bin'), weights);
      const error = await loadFaceFinder(dir).catch((e: unknown) => e);
      expect(error).toBeInstanceOf(ModelError);
      expect((error as ModelError).file).toBe(join(dir, 'face-finder.bin'));
    } finally {
      await rm(dir, { recursive: true, force: true });
    }
  });
});

describe('restore with the skin prior', () => {
  let root: string;
  beforeAll(async () => {
    root = await mkdtemp(join(tmpdir(), 'kinhue-skin-'));
    await cp(join(SCANS, 'wrenfold-08-ferry-couple.jpg'), join(root, 'scans', 'couple.jpg'), { recursive: true });
  });
  afterAll(async () => {
    await rm(root, { recursive: true, force: true });
  });

  it('records the faces it gave a skin hue, in the record, the warnings and the XMP; --no-skin turns it off', async () => {
    const on = spawnSync(process.execPath, [BIN, 'restore', join(root, 'scans'), '--out', join(root, 'on'), '--jobs', '1'], {
      encoding: 'utf8',
    });
    expect(on.status, on.stderr).toBe(0);
    const record = JSON.parse(await readFile(join(root, 'on', 'couple.kinhue.json'), 'utf8'));
    expect(record.guidance.skin.faces).toHaveLength(2);
    expect(record.guidance.skin.pixels).toBeGreaterThan(0);
    expect(record.warnings.join(' ')).toMatch(/skin prior: 2 faces/);
    expect(record.settings.skin).toBeUndefined();
    const image = await readFile(join(root, 'on', 'couple.jpg'));
    expect(image.toString('latin1')).toContain('<kinhue:skinPriorFaces>2</kinhue:skinPriorFaces>');

    const off = spawnSync(process.execPath, [BIN, 'restore', join(root, 'scans'), '--out', join(root, 'off'), '--jobs', '1', '--no-skin'], {
      encoding: 'utf8',
    });
    expect(off.status, off.stderr).toBe(0);
    const plain = JSON.parse(await readFile(join(root, 'off', 'couple.kinhue.json'), 'utf8'));
    expect(plain.guidance).toBeUndefined();
    expect(plain.settings.skin).toBe(false);
  }, 120_000);
});
