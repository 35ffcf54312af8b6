// Reference photographs (Welsh, Ashikhmin & Mueller 2002): colour carried over by matching luminance and
// local texture, blended with the model's prediction by its confidence.
import { readdirSync } from 'node:fs';
import { mkdir, mkdtemp } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import sharp from 'sharp';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { colouriseLightness } from '../src/batch/colourise.js';
import { meanAbError, srgbToLab } from '../src/colour/index.js';
import { decodeImage, type Pixels } from '../src/image/index.js';
import { applyGuides } from '../src/batch/stages/guide.js';
import { loadReference, localDeviation, prepareGuidance, prepareGuides, transferReference } from '../src/hints/index.js';
import type { KinhueModel } from '../src/model/index.js';
import { loadShippedModel } from './helpers/shipped-model.js';

/** A crop of interleaved pixels (fractions of the width and height). */
function crop(px: Pixels, x0: number, y0: number, x1: number, y1: number): Pixels {
  const left = Math.round(px.width * x0),
    top = Math.round(px.height * y0);
  const width = Math.round(px.width * x1) - left,
    height = Math.round(px.height * y1) - top;
  const data = new Uint8Array(width * height * px.channels);
  for (let y = 0; y < height; y++) {
    const from = ((top + y) * px.width + left) * px.channels;
    data.set(px.data.subarray(from, from + width * px.channels), y * width * px.channels);
  }
  return { width, height, channels: px.channels, depth: 8, data };
}

describe('reference photographs', () => {
  // A broad check that a retrained model can keep (the figures for every photo: npm run bench -- quality).
  // Real photographs: the demo album's colour originals (demo-photos/SOURCES.md), held out of the shipped
  // model's training; every other one in name order from the first (01, 03, 05, 07). The scan is the right
  // and upper part of a photograph, taken to L* alone; the reference is the left and lower part of the same
  // photograph in colour: the same scene under a different crop (about half of each is shared). Both runs
  // colour the scan as restore does (batch's colouriseLightness at the model's working size): "the model
  // alone" without a guide, "with the reference" with the guide prepareGuidance builds for --reference.
  const photos = readdirSync('demo-photos/originals')
    .filter((f) => f.endsWith('.jpg'))
    .sort()
    .filter((_, k) => k % 2 === 0);
  let model: KinhueModel;
  beforeAll(async () => {
    model = await loadShippedModel();
  });
  afterAll(() => model?.network.dispose());

  it.each(photos)('%s: a reference of the same scene does not raise the mean a*b* error above the model alone', async (name) => {
    const dir = await mkdtemp(join(tmpdir(), 'kinhue-reference-'));
    const file = join('demo-photos/originals', name);
    const { pixels } = await decodeImage(file);
    const refPath = join(dir, 'reference.png');
    const left = 0,
      top = Math.round(pixels.height * 0.15);
    await sharp(file)
      .extract({ left, top, width: Math.round(pixels.width * 0.7), height: pixels.height - top })
      .png()
      .toFile(refPath);

    const scan = crop(pixels, 0.3, 0, 1, 0.85);
    const n = scan.width * scan.height;
    const rgb = new Uint8Array(n * 3);
    for (let i = 0; i < n; i++) for (let c = 0; c < 3; c++) rgb[i * 3 + c] = scan.data[i * scan.channels + c]!;
    const truth = srgbToLab(rgb, 3);
    const workSize = model.meta.workingSize;

    const guidance = await prepareGuidance(join(dir, 'scan.png'), scan.width, scan.height, { reference: refPath });
    expect(guidance.record.reference).toMatchObject({ files: [refPath], samples: 256 });
    const alone = await colouriseLightness(truth.L, scan.width, scan.height, model, { workSize });
    const guided = await colouriseLightness(truth.L, scan.width, scan.height, model, { workSize, guides: guidance.guides });
    const modelError = meanAbError({ L: truth.L, a: alone.a, b: alone.b }, truth);
    const referenceError = meanAbError({ L: truth.L, a: guided.a, b: guided.b }, truth);
    // Where the model alone is already close the reference may not help, but it must not make things worse
    // by a visible amount (0.5 a*b*, common practice for a just-noticeable step).
    expect(referenceError).toBeLessThan(modelError + 0.5);
  });

  it('the reference guide keeps the model colour where it is sure and takes the reference colour where it is not', async () => {
    // Synthetic: a colour reference (a red-to-blue ramp) and a flat predicted colour; confidence 1 then 0.
    const dir = await mkdtemp(join(tmpdir(), 'kinhue-reference-'));
    const w = 48,
      h = 32;
    const ramp = Uint8Array.from({ length: w * h * 3 }, (_, i) =>
      i % 3 === 1 ? 90 : i % 3 === 0 ? 40 + ((i / 3) % w) * 4 : 230 - ((i / 3) % w) * 4,
    );
    await sharp(ramp, { raw: { width: w, height: h, channels: 3 } })
      .png()
      .toFile(join(dir, 'reference.png'));
    const { guides, record } = await prepareGuides({ hints: null, reference: join(dir, 'reference.png') }, w, h);
    expect(guides.map((g) => g.name)).toEqual(['reference']);
    expect(record.reference).toMatchObject({ files: [join(dir, 'reference.png')] });
    const L = Float32Array.from({ length: w * h }, (_, i) => 30 + (i % w));
    const predicted = (confidence: number) => ({
      width: w,
      height: h,
      L,
      a: new Float32Array(w * h).fill(12),
      b: new Float32Array(w * h).fill(-7),
      confidence: new Float32Array(w * h).fill(confidence),
      confidenceWidth: w,
      confidenceHeight: h,
    });
    const sure = applyGuides(predicted(1), guides);
    expect(sure.colour.a.every((v) => v === 12) && sure.colour.b.every((v) => v === -7)).toBe(true);
    expect(sure.records.reference).toHaveProperty('milliseconds');
    const unsure = applyGuides(predicted(0), guides).colour;
    const transferred = transferReference(await loadReference(join(dir, 'reference.png')), L, w, h);
    // Exactly the transferred colour (float32 rounding of the same sum: tolerance 1e-4 a*b*, common practice).
    for (let i = 0; i < w * h; i += 37) {
      expect(unsure.a[i]).toBeCloseTo(transferred.a[i]!, 4);
      expect(unsure.b[i]).toBeCloseTo(transferred.b[i]!, 4);
    }
  });

  it('a grey reference is refused with a message naming it; a toned one is noted', async () => {
    // The album's scans: wrenfold-03 is a neutral grey print, wrenfold-01 a toned one (demo-photos/SOURCES.md).
    await expect(loadReference('demo-photos/scans/wrenfold-03-new-calf.jpg')).rejects.toMatchObject({
      code: 'KH_BAD_HINTS',
      file: 'demo-photos/scans/wrenfold-03-new-calf.jpg',
      message: expect.stringContaining('this one is grey'),
    });
    const toned = await loadReference('demo-photos/scans/wrenfold-01-hill-pasture.jpg');
    expect(toned.notes[0]).toContain('along one hue');
    await expect(loadReference('no/such/reference.jpg')).rejects.toMatchObject({ code: 'KH_BAD_HINTS' });
  });

  it('a folder of references pools their samples (one reference for a series)', async () => {
    const dir = await mkdtemp(join(tmpdir(), 'kinhue-reference-'));
    await mkdir(join(dir, 'series'));
    for (const name of ['wrenfold-02-spaniels.jpg', 'wrenfold-05-billy-goat.jpg']) {
      await sharp(join('demo-photos/originals', name))
        .resize(400)
        .toFile(join(dir, 'series', name));
    }
    const ref = await loadReference(join(dir, 'series'));
    expect(ref.files).toHaveLength(2);
    expect(ref.L.length).toBe(512);
    expect(new Set(ref.source)).toEqual(new Set([0, 1]));
    await mkdir(join(dir, 'empty'));
    await expect(loadReference(join(dir, 'empty'))).rejects.toMatchObject({
      code: 'KH_BAD_HINTS',
      message: expect.stringContaining('no images'),
    });
  });

  it('local deviation is the 5 x 5 standard deviation (population form, as Welsh et al. use it)', () => {
    const w = 7,
      h = 6;
    const L = Float32Array.from({ length: w * h }, (_, i) => (i * 37) % 11);
    const dev = localDeviation(L, w, h);
    for (const [x, y] of [
      [3, 3],
      [0, 0],
      [6, 5],
      [2, 4],
    ] as const) {
      const values: number[] = [];
      for (let v = Math.max(0, y - 2); v <= Math.min(h - 1, y + 2); v++) {
        for (let u = Math.max(0, x - 2); u <= Math.min(w - 1, x + 2); u++) values.push(L[v * w + u]!);
      }
      const mean = values.reduce((s, v) => s + v, 0) / values.length;
      const sd = Math.sqrt(values.reduce((s, v) => s + (v - mean) ** 2, 0) / values.length);
      expect(dev[y * w + x]).toBeCloseTo(sd, 4);
    }
  });
});
