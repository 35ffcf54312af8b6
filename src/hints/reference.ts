/**
 * Colour from a reference photograph, after Welsh, Ashikhmin & Mueller (2002), "Transferring Color to
 * Greyscale Images": the reference's luminance is remapped to the scan's mean and spread, a jittered grid of
 * reference pixels is sampled, each scan pixel takes the a*b* of the sample that best matches its luminance
 * and the standard deviation of luminance around it (5 x 5), weighted half and half as in the paper.
 * Several references (one for a series) pool their samples, each remapped by its own statistics.
 */
import { stat } from 'node:fs/promises';
import { shrinkPlane, srgbToLab, type LabPlanes } from '../colour/index.js';
import { classifyTone, decodeImage, type Pixels } from '../image/index.js';
import { ErrorCodes, KinhueError } from '../errors.js';
import { folderImages } from '../files/index.js';
import { smoothColour } from './propagate.js';
import { seededUniform } from '../random.js';

/** Pooled samples of one or more reference photographs. */
export interface ReferenceSet {
  files: string[];
  /** Things to tell the person (a reference that looks toned). */
  notes: string[];
  /** Per sample: luminance, local deviation, colour, and which reference it came from. */
  L: Float32Array;
  deviation: Float32Array;
  a: Float32Array;
  b: Float32Array;
  source: Uint16Array;
  /** Mean and standard deviation of L* over each reference. */
  stats: Array<{ mean: number; sd: number }>;
}

// Welsh et al. used about 200 samples on a jittered grid; 16 x 16 per reference, up to 1024 pooled.
const GRID = 16;
const MAX_SAMPLES = 1024;
/**
 * Our additions to the paper, chosen on the album's photographs (tests/hints-reference.test.ts): a pixel takes
 * the mean colour of its 8 best matches rather than the single best, and the result is smoothed edge-aware
 * (smoothColour, strength 0.02), which halves the stray colours of mismatched pixels.
 */
const NEAREST = 8;
export const REFERENCE_SMOOTHING = 0.02;
/** Long side at which references are read (the working size restore uses by default). */
const REFERENCE_SIDE = 512;

function refuse(file: string, message: string, hint: string): KinhueError {
  return new KinhueError(ErrorCodes.BAD_HINTS, message, { file, hint });
}

/**
 * Reads a reference photograph, or every image in a folder (not its subfolders), and samples it.
 * A grey reference is refused: it has no colours to give.
 *
 * @example
 *   const ref = await loadReference('family/colour-1968.jpg');
 */
export async function loadReference(path: string): Promise<ReferenceSet> {
  const info = await stat(path).catch(() => undefined);
  if (!info) throw refuse(path, 'reference photo not found', 'give the path of a colour photograph, or of a folder of them');
  let files = [path];
  if (info.isDirectory()) {
    files = await folderImages(path);
    if (files.length === 0)
      throw refuse(path, 'the reference folder holds no images', 'put colour photographs (JPEG, PNG, TIFF, WebP) in it');
  }
  const perReference = Math.max(16, Math.min(GRID * GRID, Math.floor(MAX_SAMPLES / files.length)));
  const parts: Array<ReturnType<typeof sampleReference>> = [];
  const notes: string[] = [];
  for (const file of files) {
    const decoded = await decodeImage(file);
    const lab = referenceLab(decoded.pixels);
    const tone = classifyTone(lab.lab);
    if (tone.kind === 'grey') {
      throw refuse(
        file,
        `a reference must be a colour photograph; this one is grey (95% of its pixels have chroma under ${tone.chroma95.toFixed(1)})`,
        'use a colour photograph of the same scene, people or place',
      );
    }
    // Warm or cool colour photographs can look toned to the tone test; they are used, with a note.
    if (tone.kind === 'toned')
      notes.push(
        `${file}: its colours lie along one hue (${tone.name ?? 'tinted'}), as a toned print's do; check that it is a colour photograph`,
      );
    parts.push(sampleReference(lab.lab, lab.width, lab.height, perReference, parts.length));
  }
  const total = parts.reduce((s, p) => s + p.L.length, 0);
  const set: ReferenceSet = {
    files,
    notes,
    L: new Float32Array(total),
    deviation: new Float32Array(total),
    a: new Float32Array(total),
    b: new Float32Array(total),
    source: new Uint16Array(total),
    stats: parts.map((p) => p.stats),
  };
  let at = 0;
  for (const p of parts) {
    set.L.set(p.L, at);
    set.deviation.set(p.deviation, at);
    set.a.set(p.a, at);
    set.b.set(p.b, at);
    set.source.fill(p.index, at, at + p.L.length);
    at += p.L.length;
  }
  return set;
}

/** The reference area-averaged to a long side of REFERENCE_SIDE (sRGB codes averaged, as restore does), in CIELAB. */
function referenceLab(px: Pixels): { lab: LabPlanes; width: number; height: number } {
  const s = Math.min(1, REFERENCE_SIDE / Math.max(px.width, px.height));
  const width = Math.max(1, Math.round(px.width * s)),
    height = Math.max(1, Math.round(px.height * s));
  const colours = px.channels >= 3 ? 3 : 1;
  const max = px.depth === 16 ? 65535 : 255;
  const n = px.width * px.height;
  const out = new Float32Array(width * height * colours);
  const plane = new Float32Array(n);
  for (let c = 0; c < colours; c++) {
    for (let i = 0; i < n; i++) plane[i] = px.data[i * px.channels + c]! / max;
    const small = shrinkPlane(plane, px.width, px.height, width, height);
    for (let i = 0; i < small.length; i++) out[i * colours + c] = small[i]!;
  }
  const lab = srgbToLab(out, colours as 1 | 3);
  return { lab, width, height };
}

/**
 * Standard deviation of a plane over the (2r+1)^2 window around each pixel (clipped at the borders),
 * from summed-area tables.
 */
export function localDeviation(L: Float32Array, width: number, height: number, r = 2): Float32Array {
  const w1 = width + 1;
  const s = new Float64Array(w1 * (height + 1)),
    s2 = new Float64Array(w1 * (height + 1));
  for (let y = 0; y < height; y++) {
    let row = 0,
      row2 = 0;
    for (let x = 0; x < width; x++) {
      const v = L[y * width + x]!;
      row += v;
      row2 += v * v;
      s[(y + 1) * w1 + x + 1] = s[y * w1 + x + 1]! + row;
      s2[(y + 1) * w1 + x + 1] = s2[y * w1 + x + 1]! + row2;
    }
  }
  const out = new Float32Array(width * height);
  for (let y = 0; y < height; y++) {
    const y0 = Math.max(0, y - r),
      y1 = Math.min(height, y + r + 1);
    for (let x = 0; x < width; x++) {
      const x0 = Math.max(0, x - r),
        x1 = Math.min(width, x + r + 1);
      const count = (y1 - y0) * (x1 - x0);
      const sum = s[y1 * w1 + x1]! - s[y0 * w1 + x1]! - s[y1 * w1 + x0]! + s[y0 * w1 + x0]!;
      const sum2 = s2[y1 * w1 + x1]! - s2[y0 * w1 + x1]! - s2[y1 * w1 + x0]! + s2[y0 * w1 + x0]!;
      const mean = sum / count;
      out[y * width + x] = Math.sqrt(Math.max(0, sum2 / count - mean * mean));
    }
  }
  return out;
}

function meanAndSd(L: Float32Array): { mean: number; sd: number } {
  let s = 0,
    s2 = 0;
  for (let i = 0; i < L.length; i++) {
    s += L[i]!;
    s2 += L[i]! * L[i]!;
  }
  const mean = s / L.length;
  return { mean, sd: Math.sqrt(Math.max(0, s2 / L.length - mean * mean)) };
}

/** One sample per cell of a jittered grid (Welsh et al. 2002, section 3). */
function sampleReference(lab: LabPlanes, width: number, height: number, count: number, index: number) {
  const deviation = localDeviation(lab.L, width, height);
  const grid = Math.max(1, Math.round(Math.sqrt(count)));
  const rnd = seededUniform(0x6b68 + index);
  const L: number[] = [],
    dev: number[] = [],
    a: number[] = [],
    b: number[] = [];
  for (let gy = 0; gy < grid; gy++) {
    for (let gx = 0; gx < grid; gx++) {
      const x = Math.min(width - 1, Math.floor(((gx + rnd()) * width) / grid));
      const y = Math.min(height - 1, Math.floor(((gy + rnd()) * height) / grid));
      const i = y * width + x;
      L.push(lab.L[i]!);
      dev.push(deviation[i]!);
      a.push(lab.a[i]!);
      b.push(lab.b[i]!);
    }
  }
  return {
    index,
    L: Float32Array.from(L),
    deviation: Float32Array.from(dev),
    a: Float32Array.from(a),
    b: Float32Array.from(b),
    stats: meanAndSd(lab.L),
  };
}

/**
 * a*b* for a scan's L* (0-100) from the reference samples: each pixel takes the colour of the sample whose
 * remapped luminance and 5 x 5 deviation are nearest (half weight each); see NEAREST for what we add.
 *
 * @example
 *   const { a, b } = transferReference(ref, work.L, work.width, work.height);
 */
export function transferReference(
  ref: ReferenceSet,
  L: Float32Array,
  width: number,
  height: number,
  smoothing = REFERENCE_SMOOTHING,
): { a: Float32Array; b: Float32Array } {
  const n = width * height;
  const scan = meanAndSd(L);
  const deviation = localDeviation(L, width, height);
  // Luminance remapping (Welsh et al., after Hertzmann et al. 2001): each reference to the scan's mean and spread.
  const m = ref.L.length;
  const order = Array.from({ length: m }, (_, k) => k);
  const rl = new Float64Array(m),
    rd = new Float64Array(m);
  for (let k = 0; k < m; k++) {
    const st = ref.stats[ref.source[k]!]!;
    const scale = st.sd > 1e-6 ? scan.sd / st.sd : 1;
    rl[k] = scale * (ref.L[k]! - st.mean) + scan.mean;
    rd[k] = scale * ref.deviation[k]!;
  }
  order.sort((p, q) => rl[p]! - rl[q]!);
  const sl = Float64Array.from(order, (k) => rl[k]!),
    sd = Float64Array.from(order, (k) => rd[k]!);
  const sa = Float32Array.from(order, (k) => ref.a[k]!),
    sb = Float32Array.from(order, (k) => ref.b[k]!);
  const a = new Float32Array(n),
    b = new Float32Array(n);
  const K = Math.min(m, NEAREST);
  const bestCost = new Float64Array(K),
    bestIndex = new Int32Array(K);
  // Keeps the K cheapest matches seen, most expensive first at slot 0 (a small insertion list).
  const offer = (k: number, cost: number): void => {
    if (cost >= bestCost[0]!) return;
    let j = 0;
    while (j + 1 < K && bestCost[j + 1]! > cost) {
      bestCost[j] = bestCost[j + 1]!;
      bestIndex[j] = bestIndex[j + 1]!;
      j++;
    }
    bestCost[j] = cost;
    bestIndex[j] = k;
  };
  for (let i = 0; i < n; i++) {
    const l = L[i]!,
      d = deviation[i]!;
    bestCost.fill(Infinity);
    // Start at the first sample not darker than the pixel and widen both ways while a better match is possible.
    let lo = 0,
      hi = m;
    while (lo < hi) {
      const mid = (lo + hi) >> 1;
      if (sl[mid]! < l) lo = mid + 1;
      else hi = mid;
    }
    for (let k = lo; k < m; k++) {
      const dl = sl[k]! - l;
      if (0.5 * dl * dl >= bestCost[0]!) break;
      const dd = sd[k]! - d;
      offer(k, 0.5 * dl * dl + 0.5 * dd * dd);
    }
    for (let k = lo - 1; k >= 0; k--) {
      const dl = sl[k]! - l;
      if (0.5 * dl * dl >= bestCost[0]!) break;
      const dd = sd[k]! - d;
      offer(k, 0.5 * dl * dl + 0.5 * dd * dd);
    }
    let sa2 = 0,
      sb2 = 0;
    for (let j = 0; j < K; j++) {
      sa2 += sa[bestIndex[j]!]!;
      sb2 += sb[bestIndex[j]!]!;
    }
    a[i] = sa2 / K;
    b[i] = sb2 / K;
  }
  return smoothing > 0 ? smoothColour(L, a, b, width, height, smoothing) : { a, b };
}
