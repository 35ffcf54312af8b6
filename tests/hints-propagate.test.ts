// Hint propagation (Levin, Lischinski & Weiss 2004) and hinted colours at the scan's lightness.
import { mkdtemp, writeFile } from 'node:fs/promises';
import { readdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { converter, displayable } from 'culori';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { colouriseLightness, workingSize } from '../src/batch/colourise.js';
import { applyGuides } from '../src/batch/stages/guide.js';
import { workingLab } from '../src/batch/working-lab.js';
import { ciede2000, inSrgbGamut, labToSrgb, psnr, srgbToLab } from '../src/colour/index.js';
import { decodeImage } from '../src/image/index.js';
import {
  chromaAt,
  formatHex,
  hintLch,
  levinAffinity,
  parseCssColour,
  parseHints,
  PREDICTION_EDGE_SCALE,
  prepareGuidance,
  propagateHints,
  rasteriseHints,
  withPredictionEdges,
} from '../src/hints/index.js';
import type { KinhueModel } from '../src/model/index.js';
import { random } from './helpers/random.js';
import { loadShippedModel } from './helpers/shipped-model.js';

const hintsJson = (width: number, height: number, entries: unknown[]): string =>
  JSON.stringify({ format: 'kinhue-hints', version: 1, image: { width, height }, entries });

describe('two regions of equal L* split by a thin dark line, one hint in each', () => {
  // Our own construction of the paper's motivating case (Levin et al. 2004, fig. 1): colour follows
  // luminance, so it fills each region and stops at the line.
  const w = 160,
    h = 120,
    line = [79, 80];
  const L = new Float32Array(w * h).fill(60);
  for (let y = 0; y < h; y++) for (const x of line) L[y * w + x] = 20;
  const colours = { left: '#4f9a4f', right: '#c0504a' };

  it('each region takes its hint colour and neither crosses the line', async () => {
    const dir = await mkdtemp(join(tmpdir(), 'kinhue-hints-'));
    // Hints off-centre, so the centres are reached by propagation, not drawn.
    await writeFile(
      join(dir, 'regions.hints.json'),
      hintsJson(w, h, [
        { x: 15, y: 100, colour: colours.left, radius: 3 },
        {
          points: [
            [140, 10],
            [150, 20],
          ],
          colour: colours.right,
          radius: 2,
        },
      ]),
    );
    const guidance = await prepareGuidance(join(dir, 'regions.png'), w, h);
    // "No hints" is a flat grey prediction at low confidence (what an untrained model gives).
    const work = {
      width: w,
      height: h,
      L,
      a: new Float32Array(w * h),
      b: new Float32Array(w * h),
      confidence: new Float32Array(40 * 30).fill(0.25),
      confidenceWidth: 40,
      confidenceHeight: 30,
    };
    const guided = applyGuides(work, guidance.guides);
    Object.assign(guidance.record.hints!, guided.records.hints);
    expect(guidance.record.hints).toMatchObject({ used: true, entries: 2, adjustments: [] });
    // The expected colour: the hint's hue and chroma at the region's L* of 60.
    const expected = (css: string): [number, number] => {
      const lch = hintLch(parseCssColour(css)!);
      const c = chromaAt(60, lch.chroma, lch.hue);
      return [c * Math.cos(lch.hue), c * Math.sin(lch.hue)];
    };
    const [la, lb] = expected(colours.left),
      [ra, rb] = expected(colours.right);
    const dE = (i: number, a: number, b: number): number => ciede2000(60, guided.colour.a[i]!, guided.colour.b[i]!, 60, a, b);
    // CIEDE2000 under 5 at each region's centre (the threshold).
    expect(dE(60 * w + 40, la, lb)).toBeLessThan(5);
    expect(dE(60 * w + 120, ra, rb)).toBeLessThan(5);
    // Not crossing: every pixel of each region, up to the line, stays nearer its own hint than the other's
    // and within CIEDE2000 5 of its own (a leak of the other colour would pull the far side first).
    let worstLeft = 0,
      worstRight = 0;
    for (let y = 0; y < h; y++) {
      for (let x = 0; x < w; x++) {
        const i = y * w + x;
        if (x < line[0]!) {
          worstLeft = Math.max(worstLeft, dE(i, la, lb));
          expect(dE(i, la, lb)).toBeLessThan(dE(i, ra, rb));
        } else if (x > line[1]!) {
          worstRight = Math.max(worstRight, dE(i, ra, rb));
          expect(dE(i, ra, rb)).toBeLessThan(dE(i, la, lb));
        }
      }
    }
    expect(worstLeft).toBeLessThan(5);
    expect(worstRight).toBeLessThan(5);
  });

  it("meets the paper's condition: each free pixel is the weighted mean of its neighbours and its prediction", () => {
    const n = w * h;
    const fixed = new Uint8Array(n),
      ha = new Float32Array(n),
      hb = new Float32Array(n);
    for (const [i, a, b] of [
      [100 * w + 15, -39, 32],
      [15 * w + 145, 44, 26],
    ] as const) {
      fixed[i] = 1;
      ha[i] = a;
      hb[i] = b;
    }
    const pa = Float32Array.from({ length: n }, (_, i) => 5 * Math.sin(i / 97));
    const pb = new Float32Array(n).fill(3);
    const confidence = Float32Array.from({ length: n }, (_, i) => (i % 7) / 7);
    const result = propagateHints(
      { width: w, height: h, L, a: pa, b: pb, confidence },
      { fixed, a: ha, b: hb },
      { tolerance: 1e-8, maxIterations: 400 },
    );
    const g = levinAffinity(L, w, h);
    const lambda = 1 / n; // DEFAULT_PRIOR_WEIGHT spread over the pixels
    let worst = 0;
    for (let y = 1; y < h - 1; y++) {
      for (let x = 1; x < w - 1; x++) {
        const i = y * w + x;
        if (fixed[i]) continue;
        const nb: Array<[number, number]> = [
          [i + 1, g.east[i]!],
          [i - 1, g.east[i - 1]!],
          [i + w, g.south[i]!],
          [i - w, g.south[i - w]!],
          [i + w + 1, g.southEast[i]!],
          [i - w - 1, g.southEast[i - w - 1]!],
          [i + w - 1, g.southWest[i]!],
          [i - w + 1, g.southWest[i - w + 1]!],
        ];
        const d = lambda * Math.max(1e-3, confidence[i]!);
        let sw = d,
          sa = d * pa[i]!;
        for (const [j, wt] of nb) {
          sw += wt;
          sa += wt * (fixed[j] ? ha[j]! : result.a[j]!);
        }
        worst = Math.max(worst, Math.abs(result.a[i]! - sa / sw));
      }
    }
    expect(worst).toBeLessThan(0.05);
    expect(result.a[100 * w + 15]).toBe(-39);
  });

  it('leaves the prediction alone when there are no hints', () => {
    const a = new Float32Array(w * h).fill(7),
      b = new Float32Array(w * h).fill(-3);
    const r = propagateHints(
      { width: w, height: h, L, a, b, confidence: new Float32Array(w * h).fill(0.5) },
      { fixed: new Uint8Array(w * h), a: new Float32Array(w * h), b: new Float32Array(w * h) },
    );
    expect(r.a).toEqual(a);
    expect(r.b).toEqual(b);
  });
});

describe('boundaries the prediction shows and luminance does not', () => {
  // Our own construction: one even lightness, but the prediction sees two objects (a* +20 on the left, -20 on
  // the right, e.g. a green field against orange trees of the same L*). One hint on the left.
  const w = 120,
    h = 60,
    n = w * h;
  const L = new Float32Array(n).fill(55);
  const pa = Float32Array.from({ length: n }, (_, i) => (i % w < 60 ? 20 : -20)),
    pb = new Float32Array(n);
  const fixed = new Uint8Array(n),
    ha = new Float32Array(n),
    hb = new Float32Array(n);
  for (let y = 25; y < 35; y++)
    for (let x = 10; x < 20; x++) {
      fixed[y * w + x] = 1;
      ha[y * w + x] = 5;
      hb[y * w + x] = 30;
    }
  const input = { width: w, height: h, L, a: pa, b: pb, confidence: new Float32Array(n).fill(0.25) };

  it('luminance alone lets the hint flood both; with prediction edges the right keeps the prediction', () => {
    const plain = propagateHints(input, { fixed, a: ha, b: hb });
    const cut = propagateHints(input, { fixed, a: ha, b: hb }, { predictionEdges: PREDICTION_EDGE_SCALE });
    const right = 30 * w + 100,
      left = 30 * w + 45;
    // Levin et al.'s weights see no edge: the hint's b* = 30 reaches the far right almost whole.
    expect(plain.b[right]).toBeGreaterThan(25);
    // Cut at the prediction's boundary: the right keeps a* -20, b* 0 (within 1), the left takes the hint.
    expect(Math.abs(cut.a[right]! + 20)).toBeLessThan(1);
    expect(Math.abs(cut.b[right]!)).toBeLessThan(1);
    expect(Math.abs(cut.b[left]! - 30)).toBeLessThan(2);
  });

  it("a flat prediction leaves Levin et al.'s weights as they are; a step cuts only the edges across it", () => {
    const g = levinAffinity(L, w, h);
    const flat = withPredictionEdges(g, new Float32Array(n).fill(7), new Float32Array(n).fill(-3), PREDICTION_EDGE_SCALE);
    expect(flat.east).toEqual(g.east);
    expect(flat.southWest).toEqual(g.southWest);
    const step = withPredictionEdges(g, pa, pb, PREDICTION_EDGE_SCALE);
    // exp(-40^2 / (2 x scale^2)) underflows to 0 across the step; elsewhere the weight is unchanged (1 on even L*).
    expect(step.east[30 * w + 59]).toBe(0);
    expect(step.southEast[30 * w + 59]).toBe(0);
    expect(step.east[30 * w + 58]).toBe(g.east[30 * w + 58]);
  });
});

describe('odd shapes', () => {
  it.each([
    [1, 50],
    [50, 1],
    [3, 3],
    [700, 2],
  ])('%i x %i: a hint fades along a flat strip, held where placed', (w, h) => {
    const n = w * h;
    const L = new Float32Array(n).fill(50);
    const fixed = new Uint8Array(n),
      ha = new Float32Array(n),
      hb = new Float32Array(n);
    fixed[0] = 1;
    ha[0] = 30;
    hb[0] = -20;
    const r = propagateHints(
      { width: w, height: h, L, a: new Float32Array(n), b: new Float32Array(n), confidence: new Float32Array(n).fill(0.5) },
      { fixed, a: ha, b: hb },
    );
    expect(r.a[0]).toBe(30);
    expect(r.a.every((v) => Number.isFinite(v) && v <= 30 + 1e-3 && v >= -1e-3)).toBe(true);
    expect(r.a[n - 1]!).toBeLessThan(r.a[1]!);
    if (h === 1 || w === 1) {
      // A chain is tridiagonal: solve it directly (Thomas algorithm) as an independent check. Flat L* gives
      // weight 1 per edge; the prior (a* = 0) weighs 1/n x confidence 0.5 per pixel.
      const d = 0.5 / n,
        m = n - 1;
      const diag = Array.from({ length: m }, (_, k) => (k === m - 1 ? 1 : 2) + d),
        rhs: number[] = Array.from({ length: m }, (_, k) => (k === 0 ? 30 : 0));
      const c = new Array<number>(m).fill(-1),
        x = new Array<number>(m).fill(0);
      for (let k = 1; k < m; k++) {
        const f = -1 / diag[k - 1]!;
        diag[k] = diag[k]! - f * c[k - 1]!;
        rhs[k] = rhs[k]! - f * rhs[k - 1]!;
      }
      x[m - 1] = rhs[m - 1]! / diag[m - 1]!;
      for (let k = m - 2; k >= 0; k--) x[k] = (rhs[k]! - c[k]! * x[k + 1]!) / diag[k]!;
      for (let k = 0; k < m; k++) expect(Math.abs(r.a[k + 1]! - x[k]!)).toBeLessThan(0.05);
    }
  });
  it('every pixel hinted: the hints come back as they are', () => {
    const w = 20,
      h = 10,
      n = w * h;
    const fixed = new Uint8Array(n).fill(1),
      ha = Float32Array.from({ length: n }, (_, i) => i % 13),
      hb = new Float32Array(n).fill(-4);
    const r = propagateHints(
      {
        width: w,
        height: h,
        L: new Float32Array(n).fill(40),
        a: new Float32Array(n),
        b: new Float32Array(n),
        confidence: new Float32Array(n),
      },
      { fixed, a: ha, b: hb },
    );
    expect(r.a).toEqual(ha);
    expect(r.b).toEqual(hb);
  });
});

describe("hinted colours keep the scan's L*", () => {
  it('a colour sRGB cannot hold at that lightness loses chroma, keeps hue, and is reported', () => {
    const w = 40,
      h = 30;
    const L = new Float32Array(w * h).fill(95); // a very light area
    const hints = parseHints(
      hintsJson(w, h, [
        { x: 10, y: 10, colour: '#ff0000', radius: 2 },
        { x: 30, y: 20, colour: '#808080' },
      ]),
      'light.hints.json',
    );
    const drawn = rasteriseHints(hints, L, w, h, w, h);
    expect(drawn.adjustments).toHaveLength(1);
    const adj = drawn.adjustments[0]!;
    expect(adj.entry).toBe(1);
    expect(adj.message).toContain('entry 1 (#ff0000)');
    // sRGB red has chroma 104.6 at L* 53.2 (IEC 61966-2-1 primaries in CIELAB; culori agrees).
    expect(adj.requestedChroma).toBeCloseTo(104.6, 1);
    expect(adj.usedChroma).toBeLessThan(30);
    const i = 10 * w + 10;
    const { fixed, a, b } = drawn.constraints;
    expect(fixed[i]).toBe(1);
    // Same hue as sRGB red; inside sRGB at L* 95 by our gamut test and by culori's; 1% more chroma is not.
    expect(Math.atan2(b[i]!, a[i]!)).toBeCloseTo(Math.atan2(67.2032, 80.0925), 4);
    expect(inSrgbGamut(95, a[i]!, b[i]!)).toBe(true);
    const lrgb = converter('rgb');
    expect(displayable(lrgb({ mode: 'lab65', l: 95, a: a[i]! * 0.999, b: b[i]! * 0.999 }))).toBe(true);
    expect(displayable(lrgb({ mode: 'lab65', l: 95, a: a[i]! * 1.01, b: b[i]! * 1.01 }))).toBe(false);
    // A colour that fits is used as it is, at the scan's L*: grey stays grey.
    expect(a[20 * w + 30]).toBeCloseTo(0, 3);
  });
});

describe('hints sampled from colour photographs, against the shipped model', () => {
  // A broad check that a retrained model can keep (the figures for every photo: npm run bench -- quality):
  // hints sampled from the originals (10 points each) raise PSNR against the original by at least 1 dB over
  // no hints. Real photographs: the demo album's colour originals (demo-photos/SOURCES.md), held out of the
  // shipped model's training; two of them, the first and the fifth in name order. Each is taken to L* and
  // coloured as restore colours a scan (batch's colouriseLightness at the model's working size): "no hints"
  // is the shipped model alone; "with hints" the same run with the guides prepareGuidance builds from a
  // hints file found beside the scan. The 10 hints are one spot at random in each cell of a 5 x 2 grid
  // (stratified random sampling, common practice; seeded), each with the original's colour there (at the
  // working size) and a radius of 1% of the long side (common practice). PSNR: 8-bit RGB, full size.
  const dir = 'demo-photos/originals';
  const photos = readdirSync(dir)
    .filter((f) => f.endsWith('.jpg'))
    .sort()
    .filter((_, k) => k === 0 || k === 4);
  let model: KinhueModel;
  beforeAll(async () => {
    model = await loadShippedModel();
  });
  afterAll(() => model?.network.dispose());

  it('covers two photographs', () => expect(photos).toHaveLength(2));

  it.each(photos)('%s: 10 hints raise PSNR by at least 1 dB over the model alone', async (name) => {
    const { pixels } = await decodeImage(join(dir, name));
    const W = pixels.width,
      H = pixels.height,
      n = W * H;
    const original = new Uint8Array(n * 3);
    for (let i = 0; i < n; i++) for (let c = 0; c < 3; c++) original[i * 3 + c] = pixels.data[i * pixels.channels + c]!;
    const { L } = srgbToLab(original, 3);
    const workSize = model.meta.workingSize;

    const { width: w, height: h } = workingSize(W, H, workSize);
    const small = labToSrgb(workingLab(pixels, w, h), new Uint8Array(w * h * 3), 3);
    const rnd = random(7);
    const entries = [];
    for (let gy = 0; gy < 2; gy++) {
      for (let gx = 0; gx < 5; gx++) {
        const x = Math.floor(((gx + rnd()) * w) / 5),
          y = Math.floor(((gy + rnd()) * h) / 2);
        const i = y * w + x;
        entries.push({
          x: Math.floor(((x + 0.5) * W) / w),
          y: Math.floor(((y + 0.5) * H) / h),
          colour: formatHex([small[i * 3]!, small[i * 3 + 1]!, small[i * 3 + 2]!]),
          radius: Math.round(Math.max(W, H) / 100),
        });
      }
    }
    const scanDir = await mkdtemp(join(tmpdir(), 'kinhue-hints-photo-'));
    await writeFile(join(scanDir, name.replace(/\.jpg$/, '.hints.json')), hintsJson(W, H, entries));
    const guidance = await prepareGuidance(join(scanDir, name), W, H);

    const alone = await colouriseLightness(L, W, H, model, { workSize });
    const hinted = await colouriseLightness(L, W, H, model, { workSize, guides: guidance.guides });
    expect(guidance.record.hints).toMatchObject({ used: true, entries: 10 });
    const rgb = (a: Float32Array, b: Float32Array): Uint8Array => labToSrgb({ L, a, b }, new Uint8Array(n * 3), 3);
    const before = psnr(rgb(alone.a, alone.b), original),
      after = psnr(rgb(hinted.a, hinted.b), original);
    expect(after - before).toBeGreaterThanOrEqual(1);
  });
});
