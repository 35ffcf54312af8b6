import { spawnSync } from 'node:child_process';
import { mkdtemp, readdir, readFile, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { crc32, deflateRawSync } from 'node:zlib';
import { converter, differenceCiede2000 } from 'culori';
import sharp from 'sharp';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { KinhueError } from '../src/errors.js';
import { BACKBONE_CHANNELS, BACKBONE_GRID } from '../src/model/index.js';
import {
  CropSampler,
  cutCrops,
  Random,
  evaluatePhotos,
  loadCheckpoint,
  loadPhotoSet,
  saveCheckpoint,
  splitHoldout,
  type Photo,
} from '../src/training/index.js';

const toLab = converter('lab65');
const toRgb = converter('rgb');

let dir: string;
beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'kinhue-training-data-'));
});
afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

/** A PNG of `w` x `h` whose pixel (x, y) is `colour(x, y)`. */
async function png(path: string, w: number, h: number, colour: (x: number, y: number) => [number, number, number]): Promise<void> {
  const data = Buffer.alloc(w * h * 3);
  for (let y = 0; y < h; y++) for (let x = 0; x < w; x++) data.set(colour(x, y), (y * w + x) * 3);
  await sharp(data, { raw: { width: w, height: h, channels: 3 } })
    .png()
    .toFile(path);
}

/** A colourful test scene: four quadrants of different hues with a brightness ramp. */
const scene =
  (seed: number) =>
  (x: number, y: number): [number, number, number] => {
    const q = (x < 40 ? 0 : 1) + (y < 30 ? 0 : 2);
    const palette: [number, number, number][] = [
      [200, 60, 40],
      [40, 160, 60],
      [50, 80, 200],
      [220, 200, 60],
    ];
    const [r, g, b] = palette[(q + seed) % 4]!;
    const k = 0.6 + 0.4 * (x / 80);
    return [Math.round(r * k), Math.round(g * k), Math.round(b * k)];
  };

describe('Random (sfc32)', () => {
  it('repeats its sequence for a seed and continues exactly from a saved state', () => {
    const a = new Random(42);
    const b = new Random(42);
    const first = Array.from({ length: 100 }, () => a.nextUint32());
    expect(Array.from({ length: 100 }, () => b.nextUint32())).toEqual(first);
    const state = a.getState();
    const next = Array.from({ length: 50 }, () => a.next());
    const c = new Random(state);
    expect(Array.from({ length: 50 }, () => c.next())).toEqual(next);
    expect(new Random(43).nextUint32()).not.toBe(new Random(42).nextUint32());
  });

  it('is uniform: chi-square over 100 cells below the 0.1 % critical value', () => {
    // Critical value of chi-square with 99 degrees of freedom at p = 0.001 is 148.23 (NIST/SEMATECH
    // e-Handbook of Statistical Methods, table 1.3.6.7.4; from memory, 148.2).
    const rng = new Random(7);
    const counts = new Array(100).fill(0);
    const n = 100_000;
    for (let i = 0; i < n; i++) counts[rng.int(100)]++;
    const expected = n / 100;
    const chi2 = counts.reduce((s, c) => s + (c - expected) ** 2 / expected, 0);
    expect(chi2).toBeLessThan(148.2);
  });

  it('shuffles into a permutation', () => {
    const items = Array.from({ length: 50 }, (_, i) => i);
    const shuffled = new Random(3).shuffle([...items]);
    expect([...shuffled].sort((x, y) => x - y)).toEqual(items);
    expect(shuffled).not.toEqual(items);
  });
});

describe('photo sets', () => {
  it('reads colour photos, skips grey, toned, unreadable and other files with counts, and holds some out', async () => {
    const photos = join(dir, 'mixed');
    await import('node:fs/promises').then((fs) => fs.mkdir(join(photos, 'sub'), { recursive: true }));
    for (let i = 0; i < 5; i++) await png(join(photos, i < 3 ? `c${i}.png` : `sub/c${i}.png`), 80, 60, scene(i));
    await png(join(photos, 'grey.png'), 80, 60, (x) => [x * 3, x * 3, x * 3]);
    // A sepia-like print: one hue, chroma rising with density.
    await png(join(photos, 'sepia.png'), 80, 60, (x) => [Math.round(90 + x * 2), Math.round(70 + x * 1.8), Math.round(50 + x * 1.5)]);
    await writeFile(join(photos, 'broken.jpg'), 'this is text, not a JPEG');
    await writeFile(join(photos, 'notes.txt'), 'sources');
    // A photo without an extension, as some scanners write them: still read.
    await png(join(photos, 'scan0007'), 80, 60, scene(2));

    const set = await loadPhotoSet([photos], { maxSide: 40, seed: 1, holdout: 0.1 });
    expect(set.train.length + set.holdout.length).toBe(6);
    expect([...set.train, ...set.holdout].some((p) => p.file.endsWith('scan0007'))).toBe(true);
    expect(set.holdout.length).toBe(2); // at least 2 held out
    expect(set.grey.map((f) => f.split('/').pop())).toEqual(['grey.png', 'sepia.png']);
    expect(set.unreadable.map((u) => u.file.split('/').pop())).toEqual(['broken.jpg']);
    expect(set.otherFiles).toBe(1);
    for (const photo of [...set.train, ...set.holdout]) {
      expect(Math.max(photo.width, photo.height)).toBe(40);
      expect(photo.L.length).toBe(photo.width * photo.height);
    }
    // The same seed gives the same split.
    const again = await loadPhotoSet([photos], { maxSide: 40, seed: 1, holdout: 0.1 });
    expect(again.holdout.map((p) => p.file)).toEqual(set.holdout.map((p) => p.file));
    // Names say where a photo lies below the folder given, not where that folder is on this machine.
    expect(
      set.train
        .concat(set.holdout)
        .map((p) => p.name)
        .sort(),
    ).toEqual(['mixed/c0.png', 'mixed/c1.png', 'mixed/c2.png', 'mixed/scan0007', 'mixed/sub/c3.png', 'mixed/sub/c4.png']);

    // A validation split comes out of the photos left to learn from: the held-out photos stay those
    // of a run without one, so a run from before the split resumes with the same photos.
    const validated = await loadPhotoSet([photos], { maxSide: 40, seed: 1, holdout: 0.1, validation: 0.1 });
    expect(validated.holdout.map((p) => p.file)).toEqual(set.holdout.map((p) => p.file));
    expect(validated.validation.length).toBe(2);
    expect(validated.train.length).toBe(2);
    const all = [...validated.train, ...validated.validation, ...validated.holdout].map((p) => p.file);
    expect(new Set(all).size).toBe(6);
    expect(set.validation).toEqual([]);
  });

  it('keeps colours as CIELAB matching an independent library (culori, lab65) within 0.05', async () => {
    const folder = join(dir, 'flat');
    await import('node:fs/promises').then((fs) => fs.mkdir(folder, { recursive: true }));
    const colours: [number, number, number][] = [
      [200, 60, 40],
      [40, 160, 60],
      [50, 80, 200],
      [220, 200, 60],
    ];
    for (const [i, c] of colours.entries()) {
      // Half the image a flat colour, half a neutral, so the image is clearly colour.
      await png(join(folder, `f${i}.png`), 32, 16, (x) => (x < 16 ? c : [128, 128, 128]));
    }
    const set = await loadPhotoSet([folder], { maxSide: 32, seed: 1 });
    for (const photo of [...set.train, ...set.holdout]) {
      const i = Number(photo.file.match(/f(\d)\.png$/)![1]);
      const [r, g, b] = colours[i]!;
      const ref = toLab({ mode: 'rgb', r: r / 255, g: g / 255, b: b / 255 });
      expect(photo.L[0]).toBeCloseTo(ref.l, 1);
      expect(Math.abs(photo.a[0]! - ref.a)).toBeLessThan(0.05);
      expect(Math.abs(photo.b[0]! - ref.b)).toBeLessThan(0.05);
    }
  });

  it('refuses an empty folder, unreadable files only, and too few colour photos with KH_BAD_DATA', async () => {
    const fs = await import('node:fs/promises');
    const empty = join(dir, 'empty');
    await fs.mkdir(empty, { recursive: true });
    const code = async (paths: string[], validation?: number): Promise<KinhueError> => {
      try {
        await loadPhotoSet(paths, { maxSide: 32, seed: 1, validation });
      } catch (error) {
        expect(error).toBeInstanceOf(KinhueError);
        return error as KinhueError;
      }
      throw new Error('expected a KinhueError');
    };
    const e1 = await code([empty]);
    expect(e1.code).toBe('KH_BAD_DATA');
    expect(e1.file).toBe(empty);
    expect(e1.hint).toMatch(/colour photographs/);

    const broken = join(dir, 'broken');
    await fs.mkdir(broken, { recursive: true });
    await writeFile(join(broken, 'a.jpg'), 'text');
    await writeFile(join(broken, 'b.png'), Buffer.alloc(0));
    const e2 = await code([broken]);
    expect(e2.code).toBe('KH_BAD_DATA');
    expect(e2.message).toMatch(/2 unreadable/);
    expect(e2.hint).toMatch(/decoded/);

    const few = join(dir, 'few');
    await fs.mkdir(few, { recursive: true });
    for (let i = 0; i < 5; i++) await png(join(few, `c${i}.png`), 80, 60, scene(i));
    const e3 = await code([few], 0.1);
    expect(e3.code).toBe('KH_BAD_DATA');
    // Two held out, two for validation, two to learn from.
    expect(e3.message).toMatch(/too few colour photos to train on: 5 colour photos usable; at least 6 are needed/);
    // Without a validation split (runs from before it), four do.
    await expect(loadPhotoSet([few], { maxSide: 32, seed: 1 })).resolves.toMatchObject({ validation: [] });
  });

  it('splits at least 2 held out and 2 to train, about the fraction asked', () => {
    const files = Array.from({ length: 50 }, (_, i) => ({ file: `p${String(i).padStart(2, '0')}` }));
    expect(splitHoldout(files, 0.1, 1).holdout.length).toBe(5);
    expect(splitHoldout(files.slice(0, 4), 0.1, 1).holdout.length).toBe(2);
    expect(splitHoldout(files.slice(0, 4), 0.5, 1).train.length).toBe(2);
    const a = splitHoldout(files, 0.2, 1);
    expect(new Set([...a.train, ...a.holdout].map((f) => f.file)).size).toBe(50);
  });
});

function rampPhoto(file: string, w: number, h: number): Photo {
  const L = new Float32Array(w * h);
  const a = new Float32Array(w * h);
  const b = new Float32Array(w * h);
  for (let y = 0; y < h; y++) {
    for (let x = 0; x < w; x++) {
      L[y * w + x] = 20 + x;
      a[y * w + x] = x - y;
      b[y * w + x] = y;
    }
  }
  return { file, name: file, width: w, height: h, L, a, b };
}

describe('crop sampling', () => {
  it('visits every photo once per pass and continues identically from a saved state', () => {
    const photos = Array.from({ length: 5 }, (_, i) => rampPhoto(`p${i}`, 48, 40));
    const rng = new Random(5);
    const sampler = new CropSampler(photos, rng);
    sampler.next(5, 16);
    const order = sampler.getState().order;
    expect([...order].sort()).toEqual([0, 1, 2, 3, 4]);
    sampler.next(3, 16);
    const saved = { rng: rng.getState(), sampler: sampler.getState() };
    const expected = sampler.next(4, 16);
    const rng2 = new Random(saved.rng);
    const resumed = new CropSampler(photos, rng2, saved.sampler).next(4, 16);
    expect(resumed.L).toEqual(expected.L);
    expect(resumed.ab).toEqual(expected.ab);
  });

  it('lays out L* planes and per-crop a* then b* planes, values from the photo', () => {
    const photos = [rampPhoto('p', 64, 48)];
    const batch = new CropSampler(photos, new Random(1)).next(2, 16);
    expect(batch.L.length).toBe(2 * 256);
    expect(batch.ab.length).toBe(2 * 2 * 256);
    // b* = y and a* = x - y, L* = 20 + x: so a* + b* + 20 = L* at every sample (linear data).
    for (let i = 0; i < 2; i++) {
      for (let p = 0; p < 256; p += 37) {
        expect(batch.ab[i * 512 + p]! + batch.ab[i * 512 + 256 + p]! + 20).toBeCloseTo(batch.L[i * 256 + p]!, 3);
      }
    }
  });

  it('draws the crops next() cuts, in the same random order, and cuts them again into a batch given', () => {
    const photos = Array.from({ length: 3 }, (_, i) => rampPhoto(`p${i}`, 48 + 8 * i, 40));
    const whole = new CropSampler(photos, new Random(9)).next(5, 16);
    const drawing = new CropSampler(photos, new Random(9));
    const draws = drawing.draw(5, 16);
    expect(new Set(draws.slice(0, 3).map((d) => d.photo)).size).toBe(3); // one pass visits every photo
    const cut = cutCrops(photos, undefined, draws, 16);
    expect(cut.L).toEqual(whole.L);
    expect(cut.ab).toEqual(whole.ab);
    // Other crops cut into the same arrays replace every value: the reused batch equals a fresh one.
    const later = drawing.draw(5, 16);
    const fresh = cutCrops(photos, undefined, later, 16);
    const reused = cutCrops(photos, undefined, later, 16, cut);
    expect(reused.L).toBe(cut.L);
    expect(reused.L).toEqual(fresh.L);
    expect(reused.ab).toEqual(fresh.ab);
    expect(fresh.L).not.toEqual(whole.L);
    // A batch of another size is not reused.
    expect(cutCrops(photos, undefined, later.slice(0, 2), 16, cut).L).not.toBe(cut.L);
    // The backbone's features are laid out on cells of 8 and 16 pixels.
    const features = [0, 1, 2].map(() => {
      const f = {
        local8: new Float32Array(BACKBONE_GRID.local8 ** 2 * BACKBONE_CHANNELS.local8),
        local16: new Float32Array(BACKBONE_GRID.local16 ** 2 * BACKBONE_CHANNELS.local16),
        global: new Float32Array(BACKBONE_CHANNELS.global),
      };
      return { plain: f, mirrored: f };
    });
    expect(() => cutCrops(photos, features, new CropSampler(photos, new Random(1)).draw(1, 24), 24)).toThrow(/24 pixels/);
  });
});

describe('checkpoints', () => {
  it('round-trip typed arrays bit for bit, including NaN and -0, and leave no temporary file', async () => {
    const file = join(dir, 'ckpt', 'training-checkpoint.bin');
    await import('node:fs/promises').then((fs) => fs.mkdir(join(dir, 'ckpt'), { recursive: true }));
    const weights = [new Float32Array([1.5, -0, NaN, 1e-45, 3.4e38]), new Float32Array(0), new Float32Array([7])];
    await saveCheckpoint(file, { step: 12, rng: [1, 2, 3, 4294967295], nested: { weights, ids: new Int32Array([-3, 9]) } });
    const back = (await loadCheckpoint(file)) as { step: number; rng: number[]; nested: { weights: Float32Array[]; ids: Int32Array } };
    expect(back.step).toBe(12);
    expect(back.rng).toEqual([1, 2, 3, 4294967295]);
    expect(back.nested.ids).toEqual(new Int32Array([-3, 9]));
    back.nested.weights.forEach((w, i) => {
      expect(w).toBeInstanceOf(Float32Array);
      expect(Buffer.from(w.buffer)).toEqual(Buffer.from(weights[i]!.buffer));
    });
    expect(await readdir(join(dir, 'ckpt'))).toEqual(['training-checkpoint.bin']);
  });

  it('refuses a truncated or foreign file with KH_BAD_DATA and a missing one with KH_UNREADABLE', async () => {
    const file = join(dir, 'ckpt', 'cut.bin');
    await saveCheckpoint(file, { w: new Float32Array(1000) });
    const fs = await import('node:fs/promises');
    const whole = await fs.readFile(file);
    await fs.writeFile(file, whole.subarray(0, whole.length - 100));
    await expect(loadCheckpoint(file)).rejects.toMatchObject({ code: 'KH_BAD_DATA' });
    await fs.writeFile(file, 'hello');
    await expect(loadCheckpoint(file)).rejects.toMatchObject({ code: 'KH_BAD_DATA' });
    await expect(loadCheckpoint(join(dir, 'ckpt', 'none.bin'))).rejects.toMatchObject({ code: 'KH_UNREADABLE' });
  });
});

describe('held-out evaluation', () => {
  it('scores the grey baseline as the CIEDE2000 of removing the colour (culori as reference)', async () => {
    const w = 8;
    const h = 8;
    const photo: Photo = {
      file: 'flat',
      name: 'flat',
      width: w,
      height: h,
      L: new Float32Array(w * h).fill(55),
      a: new Float32Array(w * h).fill(30),
      b: new Float32Array(w * h).fill(-20),
    };
    const grey = await evaluatePhotos([photo]);
    const reference = differenceCiede2000()({ mode: 'lab65', l: 55, a: 30, b: -20 }, { mode: 'lab65', l: 55, a: 0, b: 0 });
    expect(grey.ciede2000).toBeCloseTo(reference, 4);
    // A grey image has no colourfulness (Hasler & Suesstrunk 2003: rg = yb = 0).
    expect(grey.colourfulness).toBeCloseTo(0, 6);
    // A predictor that knows the answer, at a quarter of the size: exact for flat colour.
    const perfect = await evaluatePhotos([photo], () => ({
      a: new Float32Array(4).fill(30),
      b: new Float32Array(4).fill(-20),
      width: 2,
      height: 2,
    }));
    expect(perfect.ciede2000).toBeLessThan(1e-3);
    expect(perfect.psnr).toBe(100);
    expect(perfect.psnr).toBeGreaterThan(grey.psnr);
    // The originals' colourfulness beside the results': for one flat colour the spread terms of Hasler &
    // Suesstrunk 2003 are 0, leaving 0.3 * sqrt(mean(rg)^2 + mean(yb)^2), rg = R - G, yb = (R + G) / 2 - B
    // on 0-255 values (sRGB from culori; within 0.5 for the 8-bit rounding).
    const rgb = toRgb({ mode: 'lab65', l: 55, a: 30, b: -20 });
    const [R, G, B] = [rgb.r * 255, rgb.g * 255, rgb.b * 255];
    const expected = 0.3 * Math.hypot(R - G, (R + G) / 2 - B);
    expect(Math.abs(grey.originalColourfulness! - expected)).toBeLessThan(0.5);
    expect(perfect.originalColourfulness).toBe(grey.originalColourfulness);
  });

  it('gives the hue figures, averaging right hue and left grey over the photos that have clearly coloured pixels', async () => {
    // Two flat photos (our own): one of a* 30, b* -20 (C* 36, clearly coloured), one neutral (no clearly coloured pixel).
    const w = 8,
      h = 8,
      n = w * h;
    const flat = (file: string, L: number, a: number, b: number): Photo => ({
      file,
      name: file,
      width: w,
      height: h,
      L: new Float32Array(n).fill(L),
      a: new Float32Array(n).fill(a),
      b: new Float32Array(n).fill(b),
    });
    const photos = [flat('coloured', 55, 30, -20), flat('neutral', 70, 0, 0)];
    const everywhere = (a: number, b: number) => () => ({
      a: new Float32Array(n).fill(a),
      b: new Float32Array(n).fill(b),
      width: w,
      height: h,
    });
    // Grey by construction: right hue 0 and left grey 100 on the coloured photo, no false colour anywhere.
    expect(await evaluatePhotos(photos)).toMatchObject({ rightHue: 0, falseColour: 0, leftGrey: 100, photos: 2, colouredPhotos: 1 });
    // The coloured photo's own colour everywhere: right on it; false colour on all of the neutral photo -> (0 + 100) / 2.
    expect(await evaluatePhotos(photos, everywhere(30, -20))).toMatchObject({
      rightHue: 100,
      falseColour: 50,
      leftGrey: 0,
      colouredPhotos: 1,
    });
    // Its hue turned by 45 degrees (not within 30, not beyond 60): neither right nor false on the coloured photo.
    const turned = [
      30 * Math.cos(Math.PI / 4) + 20 * Math.sin(Math.PI / 4),
      30 * Math.sin(Math.PI / 4) - 20 * Math.cos(Math.PI / 4),
    ] as const;
    expect(await evaluatePhotos(photos, everywhere(turned[0], turned[1]))).toMatchObject({ rightHue: 0, falseColour: 50, leftGrey: 0 });
    // No clearly coloured pixel in any photo: no right hue or left grey to report.
    expect(await evaluatePhotos([photos[1]])).toMatchObject({ rightHue: null, leftGrey: null, falseColour: 0, colouredPhotos: 0 });
  });
});

const ROOT = fileURLToPath(new URL('..', import.meta.url));

/** The rows of models/photo-list.tsv as objects keyed by the header's column names. */
async function photoList(): Promise<{ header: string[]; rows: Record<string, string>[] }> {
  const lines = (await readFile(join(ROOT, 'models', 'photo-list.tsv'), 'utf8')).split('\n').filter((l) => l !== '');
  const header = lines[0]!.split('\t');
  const rows = lines.slice(1).map((line) => {
    const cells = line.split('\t');
    expect(cells, line).toHaveLength(header.length);
    return Object.fromEntries(header.map((h, i) => [h, cells[i]!]));
  });
  return { header, rows };
}

describe('the training photo list (models/photo-list.tsv)', () => {
  // The fixed set of subjects that PHOTO_SOURCES.md counts the pool by (issue 17, item 5).
  const SUBJECTS = [
    'people',
    'animals',
    'plants',
    'landscape',
    'water-sky',
    'buildings-street',
    'interior',
    'objects-food',
    'vehicles',
    'texture',
  ];

  it('keeps its columns in order, subject last, so readers by position still work', async () => {
    const { header } = await photoList();
    expect(header).toEqual(['name', 'package', 'version', 'path', 'author', 'licence', 'use', 'note', 'subject']);
  });

  it('gives every row a package, version, path, author, licence, a use and a subject from the fixed set', async () => {
    const { rows } = await photoList();
    expect(rows.length).toBeGreaterThan(0);
    for (const row of rows) {
      for (const column of ['name', 'package', 'version', 'path', 'author', 'licence'])
        expect(row[column], `${row.name}: ${column}`).not.toBe('');
      expect(['pool', 'demo'], row.name).toContain(row.use);
      expect(SUBJECTS, row.name).toContain(row.subject);
      expect(row.name!.startsWith(`${row.package}--`), row.name).toBe(true);
    }
    expect(new Set(rows.map((r) => r.name)).size).toBe(rows.length);
    // One file taken twice under two names would count twice and could cross the held-out split.
    expect(new Set(rows.map((r) => `${r.package} ${r.path}`)).size).toBe(rows.length);
  });

  it('keeps the demo album and the packages reserved for independent checks out of the pool', async () => {
    const { rows } = await photoList();
    // The demo album's originals, as demo-photos/SOURCES.md names them (package and path in the package).
    const sources = await readFile(join(ROOT, 'demo-photos', 'SOURCES.md'), 'utf8');
    const demo = [...sources.matchAll(/^\| `wrenfold-[^|]+\|[^|]+\|[^|]+\| ([^ ]+) \([^)]+\) \| ([^|]+) \|/gm)].map((m) => ({
      pkg: m[1]!,
      path: [...m[2]!.matchAll(/`([^`]+)`/g)].map((p) => p[1]).join('!'),
    }));
    expect(demo).toHaveLength(9);
    for (const { pkg, path } of demo) {
      const listed = rows.filter((r) => r.package === pkg && r.path === path);
      expect(
        listed.map((r) => r.use),
        `${pkg} ${path}`,
      ).toEqual(['demo']);
    }
    // Reserved by issue 17: kphotoalbum and scratch, and the sample images of scientific, plotting,
    // image-processing and computer-vision libraries.
    const reserved = [
      /^kphotoalbum/,
      /^scratch/,
      /^libvips/,
      /^imagemagick/,
      /^graphicsmagick/,
      /^cimg-/,
      /^visp/,
      /^insighttoolkit/,
      /^python-pil/,
      /^python-skimage/,
      /^python3-skimage/,
      /^opencv/,
      /^libopencv/,
      /^octave/,
      /^matplotlib/,
      /^python-matplotlib/,
      /^scilab/,
    ];
    for (const row of rows.filter((r) => r.use === 'pool')) {
      expect(
        reserved.some((re) => re.test(row.package!)),
        `${row.name} comes from a reserved package`,
      ).toBe(false);
    }
  });
});

/**
 * A zip archive (the layout of a .jar) written by the book: PKWARE APPNOTE 6.3.x, local file header,
 * central directory header and end of central directory record (sections 4.3.7, 4.3.12, 4.3.16, from memory).
 */
function zipArchive(entries: { name: string; data: Buffer; deflate: boolean; badCrc?: boolean }[]): Buffer {
  const locals: Buffer[] = [];
  const centrals: Buffer[] = [];
  let offset = 0;
  for (const e of entries) {
    const name = Buffer.from(e.name, 'utf8');
    const body = e.deflate ? deflateRawSync(e.data) : e.data;
    const crc = (crc32(e.data) ^ (e.badCrc ? 1 : 0)) >>> 0;
    // Local and central headers hold the same run of fields (method, time, date, CRC-32, sizes, name
    // length), at offset 8 in the local header and 10 in the central one.
    const fields = (header: Buffer, at: number) => {
      header.writeUInt16LE(e.deflate ? 8 : 0, at);
      header.writeUInt32LE(crc, at + 6);
      header.writeUInt32LE(body.length, at + 10);
      header.writeUInt32LE(e.data.length, at + 14);
      header.writeUInt16LE(name.length, at + 18);
    };
    const local = Buffer.alloc(30);
    local.writeUInt32LE(0x04034b50, 0);
    local.writeUInt16LE(20, 4);
    fields(local, 8);
    // An extra field in the local header only, as some archivers write: the reader must skip it.
    const extra = Buffer.from([0xfe, 0xca, 0x00, 0x00]);
    local.writeUInt16LE(extra.length, 28);
    const central = Buffer.alloc(46);
    central.writeUInt32LE(0x02014b50, 0);
    central.writeUInt16LE(20, 4);
    central.writeUInt16LE(20, 6);
    fields(central, 10);
    central.writeUInt32LE(offset, 42);
    locals.push(local, name, extra, body);
    centrals.push(central, name);
    offset += local.length + name.length + extra.length + body.length;
  }
  const directory = Buffer.concat(centrals);
  const end = Buffer.alloc(22);
  end.writeUInt32LE(0x06054b50, 0);
  end.writeUInt16LE(entries.length, 8);
  end.writeUInt16LE(entries.length, 10);
  end.writeUInt32LE(directory.length, 12);
  end.writeUInt32LE(offset, 16);
  return Buffer.concat([...locals, directory, end]);
}

describe('copying a photo out of a package (models/extract-photo.mjs)', () => {
  const extract = (root: string, spec: string, out: string) =>
    spawnSync(process.execPath, [join(ROOT, 'models', 'extract-photo.mjs'), root, spec, out], { encoding: 'utf8' });

  it('copies stored and deflated entries of a .jar byte for byte, and refuses a wrong CRC-32 or a missing entry', async () => {
    const root = join(dir, 'package');
    await import('node:fs/promises').then((fs) => fs.mkdir(join(root, 'usr', 'share', 'app'), { recursive: true }));
    const jpeg = await sharp({ create: { width: 64, height: 48, channels: 3, background: { r: 200, g: 90, b: 40 } } })
      .jpeg()
      .toBuffer();
    const text = Buffer.from('not a photo, stored uncompressed');
    await writeFile(
      join(root, 'usr', 'share', 'app', 'app.jar'),
      zipArchive([
        { name: 'META-INF/notes.txt', data: text, deflate: false },
        { name: 'res/textures/brick.jpg', data: jpeg, deflate: true },
        { name: 'res/textures/broken.jpg', data: jpeg, deflate: true, badCrc: true },
      ]),
    );
    const jar = 'usr/share/app/app.jar';
    const out = join(dir, 'extracted');

    expect(extract(root, `${jar}!res/textures/brick.jpg`, join(out, 'brick.jpg')).status).toBe(0);
    expect(await readFile(join(out, 'brick.jpg'))).toEqual(jpeg);
    expect(extract(root, `${jar}!META-INF/notes.txt`, join(out, 'notes.txt')).status).toBe(0);
    expect(await readFile(join(out, 'notes.txt'))).toEqual(text);

    const bad = extract(root, `${jar}!res/textures/broken.jpg`, join(out, 'broken.jpg'));
    expect(bad.status).not.toBe(0);
    expect(bad.stderr).toMatch(/CRC-32/);
    const missing = extract(root, `${jar}!res/textures/none.jpg`, join(out, 'none.jpg'));
    expect(missing.status).not.toBe(0);
    expect(missing.stderr).toMatch(/no entry res\/textures\/none\.jpg/);
  });
});
