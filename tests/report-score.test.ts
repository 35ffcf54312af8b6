import { spawnSync } from 'node:child_process';
import { mkdir, mkdtemp, readFile, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { converter, differenceCiede2000 } from 'culori';
import sharp from 'sharp';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { colouriseLightness } from '../src/batch/index.js';
import { check as checkScore } from '../src/cli/commands/score.js';
import { check as checkSheet } from '../src/cli/commands/sheet.js';
import { CLEARLY_COLOURED_CHROMA, FALSE_HUE_DEGREES, NEAR_NEUTRAL_CHROMA, RIGHT_HUE_DEGREES, srgbToLab } from '../src/colour/index.js';
import { UsageError } from '../src/errors.js';
import { abBins, binHistogram, createNetwork, initBackend, loadModel, rebalanceWeights, saveModel } from '../src/model/index.js';
import { formatScoreTable, score, scoreToCsv, writeScoreFiles, type ScoreReport } from '../src/report/index.js';

// End to end on five small colour photos (one sepia-toned, one too pale to have a clearly coloured pixel), a grey
// one and a file that is not an image. The grey and transfer rows are recomputed here with culori (an independent
// CIELAB / LCh / CIEDE2000 implementation), the model rows with restore's own colourisation measured by culori.

const BIN = join(__dirname, '..', 'bin', 'kinhue.js');
const W = 48,
  H = 32;
let root: string;
let photos: string;
let trained: string;
let untrained: string;
let report: ScoreReport;
const rgbOf = new Map<string, Uint8Array>();

/** A colourful test photo: hue varies across, saturation down; `k` shifts the palette. */
function photo(k: number): Uint8Array {
  const rgb = new Uint8Array(W * H * 3);
  for (let y = 0; y < H; y++)
    for (let x = 0; x < W; x++) {
      const i = (y * W + x) * 3;
      const t = x / (W - 1),
        s = y / (H - 1);
      rgb[i] = Math.round(255 * ((1 - t) * 0.9 * (1 - s) + s * 0.5));
      rgb[i + 1] = Math.round(255 * ((k === 1 ? t : 0.3 + 0.4 * t) * (1 - s) * 0.8 + s * 0.45));
      rgb[i + 2] = Math.round(255 * ((k === 2 ? 1 - t : t) * 0.7 * (1 - s) + s * 0.4));
    }
  return rgb;
}

/** The training samples behind the "trained" model's class weights: a* on [0, 20), b* on [10, 40). */
function trainingSamples(): { a: Float32Array; b: Float32Array } {
  const n = 60,
    a = new Float32Array(n * n),
    b = new Float32Array(n * n);
  for (let i = 0; i < n; i++)
    for (let j = 0; j < n; j++) {
      a[i * n + j] = (20 * (i + 0.5)) / n;
      b[i * n + j] = 10 + (30 * (j + 0.5)) / n;
    }
  return { a, b };
}

const toLab = converter('lab65');
const toLch = converter('lch65');
const toRgb = converter('rgb');
const de00 = differenceCiede2000();

/** Figures for L* (from the original, by culori) with the given a*b* per pixel, all by culori. */
function culoriFigures(original: Uint8Array, ab: (i: number) => [number, number]) {
  const n = original.length / 3;
  let se = 0,
    de = 0,
    abErr = 0;
  // The hue figures from culori's chroma and hue angle, with the thresholds kinhue states (issue 17).
  let coloured = 0,
    right = 0,
    grey = 0,
    falseColour = 0;
  const hueOff = (h1: number, h2: number) => Math.min(Math.abs(h1 - h2), 360 - Math.abs(h1 - h2));
  for (let i = 0; i < n; i++) {
    const o = toLab({ mode: 'rgb', r: original[i * 3] / 255, g: original[i * 3 + 1] / 255, b: original[i * 3 + 2] / 255 });
    const [a, b] = ab(i);
    const c = toRgb({ mode: 'lab65', l: o.l, a, b });
    // labToSrgb clips each channel to 0-1 and rounds: the same here.
    const q = [c.r, c.g, c.b].map((v) => Math.round(Math.min(1, Math.max(0, v)) * 255));
    for (let k = 0; k < 3; k++) se += (q[k] - original[i * 3 + k]) ** 2;
    const seen = toLab({ mode: 'rgb', r: q[0] / 255, g: q[1] / 255, b: q[2] / 255 });
    de += de00(seen, o);
    abErr += Math.hypot(seen.a - o.a, seen.b - o.b);
    const lo = toLch(o),
      lr = toLch(seen);
    const off = lo.c >= NEAR_NEUTRAL_CHROMA && lr.c >= NEAR_NEUTRAL_CHROMA ? hueOff(lo.h ?? 0, lr.h ?? 0) : NaN;
    if (lo.c >= CLEARLY_COLOURED_CHROMA) {
      coloured++;
      if (lr.c < NEAR_NEUTRAL_CHROMA) grey++;
      else if (off <= RIGHT_HUE_DEGREES) right++;
    }
    if (lr.c >= CLEARLY_COLOURED_CHROMA && (lo.c < NEAR_NEUTRAL_CHROMA || off > FALSE_HUE_DEGREES)) falseColour++;
  }
  return {
    psnr: 10 * Math.log10((255 * 255 * n * 3) / se),
    ciede2000: de / n,
    abError: abErr / n,
    rightHue: coloured ? (100 * right) / coloured : null,
    falseColour: (100 * falseColour) / n,
    leftGrey: coloured ? (100 * grey) / coloured : null,
  };
}

/** kinhue's hue figures against culori's: within 0.2 points (a pixel or two at a threshold may fall either side). */
function expectHueFigures(
  got: { rightHue: number | null; falseColour: number; leftGrey: number | null },
  ref: ReturnType<typeof culoriFigures>,
): void {
  if (ref.rightHue === null) {
    expect(got.rightHue).toBeNull();
    expect(got.leftGrey).toBeNull();
  } else {
    expect(Math.abs(got.rightHue! - ref.rightHue)).toBeLessThan(0.2);
    expect(Math.abs(got.leftGrey! - ref.leftGrey!)).toBeLessThan(0.2);
  }
  expect(Math.abs(got.falseColour - ref.falseColour)).toBeLessThan(0.2);
}

beforeAll(async () => {
  root = await mkdtemp(join(tmpdir(), 'kinhue-score-'));
  photos = join(root, 'originals');
  await mkdir(photos);
  for (const k of [0, 1, 2]) {
    const rgb = photo(k);
    rgbOf.set(`photo-${k}.png`, rgb);
    await sharp(rgb, { raw: { width: W, height: H, channels: 3 } })
      .png()
      .toFile(join(photos, `photo-${k}.png`));
  }
  // A sepia-toned print kept as RGB: colour of one hue. Scored, with a note (it may be a tinted print).
  const sepia = new Uint8Array(W * H * 3);
  for (let i = 0; i < W * H; i++) {
    const v = 40 + ((i * 5) % 200);
    sepia[i * 3] = Math.min(255, v + 18);
    sepia[i * 3 + 1] = Math.round(v * 0.86 + 8);
    sepia[i * 3 + 2] = Math.round(v * 0.68);
  }
  rgbOf.set('sepia.png', sepia);
  await sharp(sepia, { raw: { width: W, height: H, channels: 3 } })
    .png()
    .toFile(join(photos, 'sepia.png'));
  // A pale photo: orange-ish above, blue-ish below, chroma about 10 (no clearly coloured pixel, C*ab < 15).
  const pale = new Uint8Array(W * H * 3);
  for (let i = 0; i < W * H; i++)
    pale.set(i < (W * H) / 2 ? [150 + (i % 40), 135 + (i % 40), 120 + (i % 40)] : [110 + (i % 40), 120 + (i % 40), 138 + (i % 40)], i * 3);
  rgbOf.set('pale.png', pale);
  await sharp(pale, { raw: { width: W, height: H, channels: 3 } })
    .png()
    .toFile(join(photos, 'pale.png'));
  await sharp(Buffer.alloc(W * H, 120), { raw: { width: W, height: H, channels: 1 } })
    .png()
    .toFile(join(photos, 'grey.png'));
  await writeFile(join(photos, 'notes.jpg'), 'this is text, not a photo\n');

  await initBackend();
  const bins = abBins();
  const { a, b } = trainingSamples();
  trained = join(root, 'model-trained');
  untrained = join(root, 'model-untrained');
  let net = createNetwork({ width: 4, seed: 5 });
  // Weights made with a rebalancing λ other than the paper's 0.5, recorded as train and tune record it.
  await saveModel(net, trained, {
    name: 'small-a',
    classWeights: rebalanceWeights(binHistogram(a, b, bins), 0.95),
    training: { rebalance: 0.95 },
  });
  net.dispose();
  net = createNetwork({ width: 4, seed: 6 });
  await saveModel(net, untrained, { name: 'small-b' });
  net.dispose();

  report = await score({ photos: [photos], models: [trained, untrained] });
});

afterAll(async () => {
  if (root) await rm(root, { recursive: true, force: true });
});

describe('kinhue score', () => {
  it('scores the colour photos and lists the grey one and the non-image as failures', () => {
    expect(report.photos.map((p) => p.file)).toEqual(['pale.png', 'photo-0.png', 'photo-1.png', 'photo-2.png', 'sepia.png']);
    expect(report.notes.join('\n')).toMatch(/single hue[^\n]*sepia\.png/);
    const failures = Object.fromEntries(report.failures.map((f) => [f.file, f.code]));
    expect(failures).toEqual({ 'grey.png': 'KH_BAD_DATA', 'notes.jpg': 'KH_NOT_AN_IMAGE' });
    expect(report.methods.map((m) => m.id)).toEqual(['grey', 'transfer:1', 'model:1', 'transfer:2', 'model:2']);
  });

  it('grey baseline figures agree with culori', () => {
    for (const p of report.photos) {
      const ref = culoriFigures(rgbOf.get(p.file)!, () => [0, 0]);
      const got = p.figures.grey;
      // Tolerances: culori and kinhue round a handful of values to a different 8-bit code at most.
      expect(Math.abs(got.psnr - ref.psnr)).toBeLessThan(0.05);
      expect(Math.abs(got.ciede2000 - ref.ciede2000)).toBeLessThan(0.02);
      expect(Math.abs(got.abError - ref.abError)).toBeLessThan(0.02);
      expect(got.colourfulness).toBeLessThan(0.5); // Hasler & Suesstrunk 2003: 0 for grey, here up to rounding
      if (p.file.startsWith('photo-')) expect(p.originalColourfulness).toBeGreaterThan(20);
      // Grey by construction: no clearly coloured pixel gets a hue, none is false, all are left grey.
      expect(got.falseColour).toBe(0);
      if (p.file === 'pale.png') {
        expect(p.clearlyColoured).toBe(0);
        expect(got.rightHue).toBeNull();
        expect(got.leftGrey).toBeNull();
      } else {
        expect(p.clearlyColoured).toBeGreaterThan(0);
        expect(got.rightHue).toBe(0);
        expect(got.leftGrey).toBe(100);
      }
      expectHueFigures(got, ref);
    }
    // Averages of right hue and left grey rest on the four photos that have clearly coloured pixels.
    expect(report.average!.photos).toBe(5);
    expect(report.average!.colouredPhotos).toBe(4);
    expect(report.average!.figures.grey.rightHue).toBe(0);
    expect(report.average!.figures.grey.leftGrey).toBe(100);
  });

  it("transfer baseline targets the training set's colour and agrees with culori", () => {
    const [t1, t2] = report.methods.filter((m) => m.kind === 'transfer');
    // Model 1's weights were made from samples with a* mean 10, b* mean 25 (by construction), at the λ it records.
    expect(t1.target!.source).toBe('class-weights');
    expect(t1.target!.statistics.mean[1]).toBeCloseTo(10, 0);
    expect(t1.target!.statistics.mean[2]).toBeCloseTo(25, 0);
    expect(t1.target!.description).toMatch(/λ 0\.95/);
    // Model 2 has no weights: the pooled statistics of the four scored photos, by culori.
    expect(t2.target!.source).toBe('scored-photos');
    let sa = 0,
      sb = 0,
      n = 0;
    for (const rgb of rgbOf.values()) {
      for (let i = 0; i < rgb.length; i += 3) {
        const o = toLab({ mode: 'rgb', r: rgb[i] / 255, g: rgb[i + 1] / 255, b: rgb[i + 2] / 255 });
        sa += o.a;
        sb += o.b;
        n++;
      }
    }
    expect(Math.abs(t2.target!.statistics.mean[1] - sa / n)).toBeLessThan(0.02);
    expect(Math.abs(t2.target!.statistics.mean[2] - sb / n)).toBeLessThan(0.02);
    for (const p of report.photos) {
      for (const t of [t1, t2]) {
        const [, ma, mb] = t.target!.statistics.mean;
        const ref = culoriFigures(rgbOf.get(p.file)!, () => [ma, mb]);
        expect(Math.abs(p.figures[t.id].psnr - ref.psnr)).toBeLessThan(0.05);
        expect(Math.abs(p.figures[t.id].ciede2000 - ref.ciede2000)).toBeLessThan(0.02);
        expect(Math.abs(p.figures[t.id].abError - ref.abError)).toBeLessThan(0.02);
        expectHueFigures(p.figures[t.id], ref);
      }
    }
  });

  it("model rows measure restore's colourisation, and averages count each photo once", async () => {
    const model = await loadModel(trained);
    try {
      for (const p of report.photos) {
        const rgb = rgbOf.get(p.file)!;
        const lab = srgbToLab(rgb, 3);
        const { a, b } = await colouriseLightness(lab.L, W, H, model, { workSize: model.meta.workingSize });
        const ref = culoriFigures(rgb, (i) => [a[i], b[i]]);
        expect(Math.abs(p.figures['model:1'].psnr - ref.psnr)).toBeLessThan(0.05);
        expect(Math.abs(p.figures['model:1'].ciede2000 - ref.ciede2000)).toBeLessThan(0.05);
        expectHueFigures(p.figures['model:1'], ref);
      }
    } finally {
      model.network.dispose();
    }
    const mean = report.photos.reduce((s, p) => s + p.figures['model:2'].ciede2000, 0) / report.photos.length;
    expect(report.average!.figures['model:2'].ciede2000).toBeCloseTo(mean, 10);
    // Right hue averages skip the pale photo, which has none.
    const coloured = report.photos.filter((p) => p.file !== 'pale.png');
    const hue = coloured.reduce((s, p) => s + p.figures['model:1'].rightHue!, 0) / coloured.length;
    expect(report.average!.figures['model:1'].rightHue).toBeCloseTo(hue, 10);
  });

  it('ends with a verdict per model against grey and the other model', () => {
    expect(report.verdicts.map((v) => v.method)).toEqual(['model:1', 'model:2']);
    expect(report.verdicts[0].comparisons.map((c) => c.against)).toEqual(['grey', 'model:2']);
    expect(report.verdicts[1].comparisons.map((c) => c.against)).toEqual(['grey', 'model:1']);
    for (const v of report.verdicts) {
      expect(v.text).toMatch(new RegExp(`^${v.label}: (better|worse|no clearer) than grey`));
      expect(v.text).not.toContain('\n');
    }
  });

  it('renders an aligned table, CSV rows per photo and method, and JSON, written atomically', async () => {
    const table = formatScoreTable(report);
    const lines = table.slice(0, table.indexOf('\n\n')).split('\n');
    expect(lines[0]).toMatch(/^photo\s+PSNR\s+CIEDE\s+a\*b\*\s+colour-\s+right\s+false\s+left$/);
    expect(lines[1]).toMatch(/^ {2}method\s+dB\s+2000\s+error\s+fulness\s+hue %\s+colour %\s+grey %$/);
    // Every method row ends at the same column (right-aligned figures), a missing figure as a dash.
    const rows = lines.filter((l) => /^ {2}(grey|Reinhard|model)/.test(l));
    expect(rows).toHaveLength((5 + 1) * 5);
    expect(new Set(rows.map((l) => l.length)).size).toBe(1);
    expect(Math.max(...lines.map((l) => l.length))).toBeLessThanOrEqual(100);
    expect(table).toMatch(/^pale\.png\n {2}original\s+[\d.]+\n {2}grey \(L\* only\)\s+[\d. ]+\s+-\s+0\.0\s+-$/m);
    expect(table).toContain('Reinhard transfer (small-a)');
    expect(table).toContain('average of 5 (right hue and left grey: 4)');
    expect(table).toMatch(/Verdict \(averages of 5 photos;[^\n]*\n {2}model small-a: /);
    expect(table).toMatch(/notes\.jpg: not an image/);
    expect(table).toMatch(/Right hue: of the original's clearly coloured pixels \(C\*ab >= 15\)/);

    const csv = scoreToCsv(report).split('\r\n');
    expect(csv[0]).toBe(
      'photo,method,model,psnr_db,ciede2000_mean,ab_error_mean,colourfulness,right_hue_pct,false_colour_pct,left_grey_pct,original_colourfulness,original_clearly_coloured_pct',
    );
    expect(csv).toHaveLength(1 + (5 + 1) * 5 + 1); // header, (photos + average) x methods, final line break
    // The pale photo's grey row: right hue and left grey empty, false colour 0, clearly coloured 0%.
    expect(csv[1]).toMatch(/^pale\.png,grey \(L\* only\),,[^,]+,[^,]+,[^,]+,[^,]+,,0,,[^,]+,0$/);

    const out = join(root, 'scores');
    const files = await writeScoreFiles(report, out);
    const json = JSON.parse(await readFile(files.json, 'utf8')) as ScoreReport;
    expect(json.kind).toBe('kinhue-score');
    expect(json.photos).toHaveLength(5);
    expect(json.photos[0].figures.grey.rightHue).toBeNull();
    expect(json.verdicts).toHaveLength(2);
    expect((await readFile(files.csv, 'utf8')).split('\r\n')[6]).toMatch(/^photo-0\.png,grey \(L\* only\),,/);
  });

  it('runs from the command line: --json prints JSON, --out writes both files, exit 1 for the failures', async () => {
    const out = join(root, 'cli-scores');
    const run = spawnSync(
      process.execPath,
      [BIN, 'score', join(photos, 'photo-0.png'), join(photos, 'grey.png'), '--model', trained, '--json', '--out', out],
      { encoding: 'utf8' },
    );
    expect(run.status, run.stderr).toBe(1);
    const json = JSON.parse(run.stdout) as ScoreReport;
    expect(json.photos.map((p) => p.file)).toEqual(['photo-0.png']);
    expect(json.failures.map((f) => f.file)).toEqual(['grey.png']);
    expect(JSON.parse(await readFile(join(out, 'kinhue-score.json'), 'utf8')).photos).toHaveLength(1);
    const table = spawnSync(process.execPath, [BIN, 'score', join(photos, 'photo-1.png'), '--model', trained], { encoding: 'utf8' });
    expect(table.status, table.stderr).toBe(0);
    expect(table.stdout).toMatch(/^photo-1\.png\n {2}original/m);
    expect(table.stdout).toMatch(/^ {2}model small-a: (better|worse|no clearer) than grey/m);
  });
});

describe('score and sheet command lines', () => {
  const usage = (fn: () => unknown): string => {
    try {
      fn();
    } catch (error) {
      expect(error).toBeInstanceOf(UsageError);
      return (error as Error).message;
    }
    throw new Error('expected a UsageError');
  };

  it('accept complete command lines', () => {
    expect(checkScore({ photos: ['originals/'], model: ['a', 'b'], out: 'scores', json: true })).toBe(true);
    expect(checkSheet({ run: 'restored', output: 'review.html', embed: false })).toBe(true);
  });

  it('refuse bad values with an example', () => {
    expect(usage(() => checkScore({ photos: [] }))).toMatch(/at least one colour photo[\s\S]*Example usage: kinhue score /);
    expect(usage(() => checkScore({ photos: ['x'], model: ['a', 'a'] }))).toMatch(/named twice/);
    expect(usage(() => checkScore({ photos: ['x'], 'work-size': 10 }))).toMatch(/--work-size/);
    expect(usage(() => checkSheet({ run: '' }))).toMatch(/output folder[\s\S]*Example usage: kinhue sheet /);
    expect(usage(() => checkSheet({ run: 'r', output: 'review.txt' }))).toMatch(/\.html/);
  });
});
