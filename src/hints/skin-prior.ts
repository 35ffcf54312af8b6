/**
 * The skin prior: where a face was found, skin gets a skin hue at the scan's own L*, instead of whatever
 * the colour network guessed (on faces it guesses badly: the training photographs hold almost no people).
 * Skin is where a wrong colour hurts most, so the prior is narrow and visible: a hue band of human skin,
 * applied only inside an ellipse around each face and only to pixels whose L* is close to the face's own
 * middle (so hair, eyes, a hat or the background behind keep the network's colour), and every face it
 * touched is listed in the record, so a family can correct it with a hints file, which always wins.
 */
import type { FaceBox } from '../model/face-finder.js';

/**
 * The skin colour given, as CIELAB hue angle (degrees) and chroma. From memory of Xiao et al. 2017
 * ("Characterising the variations in ethnic skin colours: a new calibrated data base for human skin",
 * Skin Research and Technology 23): the groups' mean cheek and forehead colours lie near a* 10-13 and
 * b* 15-19 whatever their L*, i.e. hue angles of about 50-60 degrees and chroma about 18-22. One hue and a
 * chroma at the low end: a prior says "skin", not whose skin.
 */
export const SKIN_COLOUR = { hue: 54, chroma: 18 } as const;

/** How strongly the prior replaces the network's colour where it applies fully (ours). */
const STRENGTH = 0.85;
/**
 * The face's ellipse around a detector box (ours, from the box the detector draws: brows to mouth, ear to
 * ear): centre a little below the box's, reaching forehead and chin.
 */
const ELLIPSE = { down: 0.12, rx: 0.62, ry: 0.88, solid: 0.7, core: 0.3 } as const;
/** How far a pixel's L* may be from the face's middle before the prior fades (one standard deviation; ours). */
const LIGHTNESS_SPREAD = 20;
/**
 * The face's own outline stops the prior: a pixel is reached from the face's core by its easiest path, each
 * step costing the L* change beyond EDGE_STEP (gentle shading across a cheek costs nothing, a contour does);
 * the prior fades with that cost, one standard deviation at EDGE_SPREAD (ours).
 */
const EDGE_STEP = 2;
const EDGE_SPREAD = 8;
const GEODESIC_SWEEPS = 3;
/** Working-size pixels counted as "given skin" in the record: those the prior moved at least half way. */
const COUNTED_WEIGHT = 0.5;

/** What the record says about the skin prior. */
export interface SkinRecord {
  /** The faces found, as fractions of the picture, with the detector's score. */
  faces: FaceBox[];
  /** The colour given (hue angle in degrees, chroma), before the scan's L* limits it. */
  hue: number;
  chroma: number;
  /** Working-size pixels the prior moved at least half way, and their share of the picture. */
  pixels: number;
  share: number;
}

/** Median of the values of `L` inside a rectangle (clamped to the picture). */
function medianInside(L: Float32Array, width: number, height: number, x0: number, y0: number, x1: number, y1: number): number | undefined {
  const values: number[] = [];
  for (let y = Math.max(0, Math.floor(y0)); y < Math.min(height, Math.ceil(y1)); y++) {
    for (let x = Math.max(0, Math.floor(x0)); x < Math.min(width, Math.ceil(x1)); x++) values.push(L[y * width + x]!);
  }
  if (values.length === 0) return undefined;
  values.sort((p, q) => p - q);
  return values[values.length >> 1];
}

/**
 * How much the prior applies at each pixel (0-1) for the faces given: an ellipse around each face, solid
 * in its middle and fading to its rim, times the nearness of the pixel's L* to the face's middle L*.
 * @example
 * const w = skinWeights(L, 320, 240, [{ x: 0.4, y: 0.3, width: 0.2, height: 0.25, score: 0.9 }]);
 */
export function skinWeights(L: Float32Array, width: number, height: number, faces: FaceBox[]): Float32Array {
  const weights = new Float32Array(width * height);
  for (const face of faces) {
    const bw = face.width * width;
    const bh = face.height * height;
    const cx = (face.x + face.width / 2) * width;
    const cy = (face.y + face.height / 2) * height + ELLIPSE.down * bh;
    const rx = ELLIPSE.rx * bw;
    const ry = ELLIPSE.ry * bh;
    const middle = medianInside(L, width, height, cx - bw / 4, cy - bh / 4, cx + bw / 4, cy + bh / 4);
    if (middle === undefined || rx < 0.5 || ry < 0.5) continue;
    const x0 = Math.max(0, Math.floor(cx - rx));
    const y0 = Math.max(0, Math.floor(cy - ry));
    const box = { x0, y0, w: Math.min(width, Math.ceil(cx + rx)) - x0, h: Math.min(height, Math.ceil(cy + ry)) - y0 };
    if (box.w <= 0 || box.h <= 0) continue;
    const ellipse = (x: number, y: number): number => Math.hypot((x + 0.5 - cx) / rx, (y + 0.5 - cy) / ry);
    const cost = edgeCost(
      L,
      width,
      box,
      (x, y) => ellipse(x, y) <= ELLIPSE.core && Math.abs(L[y * width + x]! - middle) <= LIGHTNESS_SPREAD,
    );
    for (let y = 0; y < box.h; y++) {
      for (let x = 0; x < box.w; x++) {
        const e = ellipse(box.x0 + x, box.y0 + y);
        if (e >= 1) continue;
        const spatial = e <= ELLIPSE.solid ? 1 : (1 - e) / (1 - ELLIPSE.solid);
        const i = (box.y0 + y) * width + box.x0 + x;
        const d = (L[i]! - middle) / LIGHTNESS_SPREAD;
        const c = cost[y * box.w + x]! / EDGE_SPREAD;
        const w = spatial * Math.exp(-0.5 * (d * d + c * c));
        if (w > weights[i]!) weights[i] = w;
      }
    }
  }
  return weights;
}

/**
 * For each pixel of a box, the least total of L* steps beyond EDGE_STEP along an 8-connected path from a
 * core pixel (Infinity where no core pixel exists): forward and backward raster sweeps, repeated, as in
 * chamfer distance transforms.
 */
function edgeCost(
  L: Float32Array,
  width: number,
  box: { x0: number; y0: number; w: number; h: number },
  isCore: (x: number, y: number) => boolean,
): Float32Array {
  const { x0, y0, w, h } = box;
  const cost = new Float32Array(w * h).fill(Infinity);
  for (let y = 0; y < h; y++) for (let x = 0; x < w; x++) if (isCore(x0 + x, y0 + y)) cost[y * w + x] = 0;
  const lightness = (x: number, y: number): number => L[(y0 + y) * width + x0 + x]!;
  const relax = (x: number, y: number, nx: number, ny: number): void => {
    if (nx < 0 || ny < 0 || nx >= w || ny >= h) return;
    const via = cost[ny * w + nx]! + Math.max(0, Math.abs(lightness(x, y) - lightness(nx, ny)) - EDGE_STEP);
    if (via < cost[y * w + x]!) cost[y * w + x] = via;
  };
  for (let sweep = 0; sweep < GEODESIC_SWEEPS; sweep++) {
    for (let y = 0; y < h; y++) {
      for (let x = 0; x < w; x++) {
        relax(x, y, x - 1, y);
        relax(x, y, x - 1, y - 1);
        relax(x, y, x, y - 1);
        relax(x, y, x + 1, y - 1);
      }
    }
    for (let y = h - 1; y >= 0; y--) {
      for (let x = w - 1; x >= 0; x--) {
        relax(x, y, x + 1, y);
        relax(x, y, x + 1, y + 1);
        relax(x, y, x, y + 1);
        relax(x, y, x - 1, y + 1);
      }
    }
  }
  return cost;
}

/**
 * The skin colour at an L*: full chroma in the mid-tones, less towards black and white, where no print
 * shows much colour (ours).
 */
function chromaAt(L: number): number {
  return SKIN_COLOUR.chroma * Math.max(0, Math.min(1, L / 35, (100 - L) / 15));
}

/**
 * The working colour with the skin prior applied to the faces given: new a* and b* planes (the inputs are
 * not changed) and the record. With no faces, the planes come back as copies and the record counts 0.
 * @example
 * const { a, b, record } = applySkinPrior(L, a0, b0, 320, 240, faces);
 */
export function applySkinPrior(
  L: Float32Array,
  a: Float32Array,
  b: Float32Array,
  width: number,
  height: number,
  faces: FaceBox[],
): { a: Float32Array; b: Float32Array; record: SkinRecord } {
  const weights = skinWeights(L, width, height, faces);
  const outA = Float32Array.from(a);
  const outB = Float32Array.from(b);
  const cos = Math.cos((SKIN_COLOUR.hue * Math.PI) / 180);
  const sin = Math.sin((SKIN_COLOUR.hue * Math.PI) / 180);
  let pixels = 0;
  for (let i = 0; i < weights.length; i++) {
    const w = weights[i]! * STRENGTH;
    if (w === 0) continue;
    const c = chromaAt(L[i]!);
    outA[i] = (1 - w) * a[i]! + w * c * cos;
    outB[i] = (1 - w) * b[i]! + w * c * sin;
    if (weights[i]! >= COUNTED_WEIGHT) pixels++;
  }
  const round = (v: number): number => Number(v.toFixed(4));
  return {
    a: outA,
    b: outB,
    record: {
      faces: faces.map((f) => ({ x: round(f.x), y: round(f.y), width: round(f.width), height: round(f.height), score: round(f.score) })),
      hue: SKIN_COLOUR.hue,
      chroma: SKIN_COLOUR.chroma,
      pixels,
      share: round(pixels / Math.max(1, weights.length)),
    },
  };
}
