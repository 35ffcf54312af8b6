/**
 * Tone classification of an input: neutral grey, toned monochrome (sepia, selenium, cyanotype...)
 * or a colour photograph. kinhue works from L* in every case; the tint is reported so the caller
 * can say what it saw (and a colour input is warned about, since its colours will be replaced).
 *
 * A toned print is one dye or metal over a grey image: its a*, b* are a smooth function of L*
 * (the "tone curve"), along one hue, and never very strong. A warm or cool colour photograph can
 * have one dominant hue too, but pixels of equal lightness differ in colour (a brown calf against
 * beige grass, blue sky beside white cloud), or a second hue family shows up (green foliage in a
 * sunset), or its colour is stronger than any toning process gives. Each of those makes it colour.
 */
import type { LabPlanes } from '../colour/index.js';

export type ToneKind = 'grey' | 'toned' | 'colour';
export type ToneName = 'sepia' | 'selenium' | 'cyanotype' | 'blue-black' | 'green';

export interface ToneReport {
  kind: ToneKind;
  /** Mean a*, b* over the image: the tint of a toned print. */
  tint: { a: number; b: number };
  /** A name for the tint from its hue angle (toned images only). */
  name?: ToneName;
  /** RMS distance of each pixel's (a*, b*) from the mean tint, in CIELAB units. */
  spread: number;
  /** Hue angle of the tint in degrees (0-360). */
  hue: number;
  /** 95th percentile of chroma C*ab over the pixels. */
  chroma95: number;
  /** Mean resultant length of the (a*, b*) vectors: 1 when every pixel has the same hue, near 0 when hues cancel. */
  hueConcentration: number;
  /** 95th percentile of the tone curve's chroma at each pixel's L*: what colour is left once pixels of equal L* are averaged. */
  toneChroma95: number;
  /** Fraction of pixels whose (a*, b*) lies more than `curveTolerance` from the mean (a*, b*) of pixels of their L*. */
  offCurve: number;
  /** Fraction of pixels more than OUTLIER_DISTANCE from that tone curve. */
  outliers: number;
  /** The distance counted by `offCurve`: OFF_CURVE_DISTANCE, or more on a noisy image (up to MAX_CURVE_TOLERANCE). */
  curveTolerance: number;
  /**
   * Fraction of the pixels that are chromatic (C*ab >= HUE_MIN_CHROMA, or the curve tolerance on a noisy image) with a
   * hue more than HUE_FAMILY_DEGREES from the dominant hue (the peak of the chromatic pixels' hue histogram).
   */
  offHue: number;
}

/**
 * Below this 95th-percentile chroma an image is neutral grey. A C*ab difference of about 2.3 is one
 * just-noticeable difference (Sharma 2003, Digital Color Imaging Handbook: from memory); a scan of a
 * grey print carries scanner and paper casts up to about that, so 3 is common practice.
 */
export const GREY_CHROMA95 = 3;
/**
 * Toned prints have their chroma along one hue: mean resultant length >= 0.8 means a circular
 * standard deviation of hue under about 38 degrees (sqrt(-2 ln 0.8) rad). Our reasoning: sepia,
 * selenium and cyanotype prints vary in strength with density but hardly in hue.
 */
export const TONED_CONCENTRATION = 0.8;
/**
 * No toning process gives a 95th-percentile chroma above this. Cyanotype's Prussian blue is the
 * strongest of them, about C*ab 35-40 in the deepest blues (from memory); sepia and selenium stay
 * under about 30. Measured: the demo cyanotype scan 32; one-hue colour photographs in the training
 * pool (a backlit leaf, a meadow, red sandstone) 47-90.
 */
export const TONED_MAX_CHROMA95 = 45;
/**
 * A pixel is off the tone curve when its (a*, b*) is more than this from the mean of the pixels of
 * its L* (2-unit L* bins): about two just-noticeable differences (see GREY_CHROMA95). Measured: the
 * demo's toned scans have at most 0.7% of pixels beyond it at full size (JPEG noise and grain), the
 * demo's colour originals 44-88%.
 */
export const OFF_CURVE_DISTANCE = 4;
/**
 * Chroma noise raises that distance: it becomes NOISE_MULTIPLE times the noise's standard deviation
 * per a*, b* component when that is larger, so pure noise puts about exp(-NOISE_MULTIPLE^2 / 2) = 0.03%
 * of pixels beyond it (Rayleigh tail). The noise is estimated from neighbouring pixels' departures
 * from the curve, which a smooth colour region does not change.
 */
export const NOISE_MULTIPLE = 4;
/**
 * ... up to this at most (noise of 3 units per component, more than a scanner's chroma noise: common
 * practice), since fine colour texture at the pixel scale looks like noise to that estimate too.
 */
export const MAX_CURVE_TOLERANCE = 12;
/**
 * A colour photograph has this fraction of its pixels or more off the tone curve; a toned print
 * (smooth chroma over L*) almost none. 10% is "a meaningful part of the picture" (common practice).
 * Measured at 512 px: the toned demo scans under 1%; 26 of the 29 training-pool colour photographs
 * that an earlier rule (hue concentration and spread only) called toned, 14-69% (the other three are
 * found by the tests below). Five near-monochrome ones (a blue dusk lake, a pale wood grain, two warm
 * cloudscapes, a dim mountain) lie at 0.6-6.5% and stay toned: by their colours alone they are what a
 * toned print of them would be.
 */
export const OFF_CURVE_FRACTION = 0.1;
/**
 * A small, strongly coloured subject (a yellow bird under a grey ceiling) is far off the curve: more
 * than 12 units, five just-noticeable differences, over at least 1% of the pixels makes it colour.
 * A toned print has nothing there but the odd stain or dust speck. Common practice; measured: the
 * toned demo scans 0%, two pool photographs with a small coloured subject on grey 1.9%.
 */
export const OUTLIER_DISTANCE = 12;
export const OUTLIER_FRACTION = 0.01;
/**
 * Hue families: a pixel of chroma 6 or more (its hue is then good to about 10 degrees after 8-bit
 * rounding: our estimate) whose hue is more than 60 degrees from the dominant hue belongs to another
 * family (sepia against red or green). The dominant hue is the peak of the hue histogram, not the
 * mean tint, which a second family would pull towards itself. Toned prints have none beyond stains;
 * 2% of the whole picture is a second family (common practice). Counted over all pixels, not the
 * chromatic ones only, so a nearly grey print with one small coloured mark is not called colour for it.
 * It finds what the curve test cannot: hues that change with lightness (dark foliage, bright sky).
 */
export const HUE_MIN_CHROMA = 6;
export const HUE_FAMILY_DEGREES = 60;
export const OFF_HUE_FRACTION = 0.02;

const HIST_STEP = 0.1;
const HIST_BINS = 2000;
/** The hue-by-chroma histogram of chromatic pixels: 5-degree hue bins, 1-unit chroma bins up to 128. */
const HUE_BINS = 72;
const HUE_CHROMA_BINS = 129;
/** L* bins of the tone curve, 2 units wide: finer than a toned print's tint changes with density. */
const L_BINS = 50;
/**
 * The noise estimate compares each pixel with the one this many places to its right: JPEG stores
 * chroma at half resolution (4:2:0) and interpolates it, so adjacent pixels share their chroma noise.
 */
const NEIGHBOUR_STEP = 3;
/**
 * The noise is read from this quantile of those distances: a low one, so that texture and edges in a
 * colour photograph (the upper part of the distribution) do not pass for noise.
 */
const NOISE_QUANTILE = 0.1;
/**
 * That quantile of |e1 - e2| for two independent 2-D Gaussian errors of unit deviation per component:
 * sqrt(2) (the difference) times the Rayleigh quantile sqrt(-2 ln(1 - q)).
 */
const NEIGHBOUR_QUANTILE_PER_SIGMA = Math.SQRT2 * Math.sqrt(-2 * Math.log(1 - NOISE_QUANTILE));
/** At most this many pixels are visited (an even stride); enough for stable statistics. */
const MAX_SAMPLES = 1 << 20;
/**
 * ... and at most this many in the second pass, the costlier one: the fractions it measures are then
 * good to about 0.1% (binomial standard error at 10%: sqrt(0.1 * 0.9 / 2^18) = 0.06%).
 */
const CURVE_SAMPLES = 1 << 18;

/**
 * Classifies an image from its CIELAB planes (row-major: the noise estimate compares pixels along rows).
 *
 * @example
 * const report = classifyTone(srgbToLab(pixels.data, pixels.channels));
 * if (report.kind === 'colour') warn('colour photo: only its lightness is used');
 */
export function classifyTone(lab: LabPlanes): ToneReport {
  const n = lab.a.length;
  const stride = Math.max(1, Math.floor(n / MAX_SAMPLES));
  const first = overall(lab, stride);
  const { count, meanA, meanB } = first;
  if (count === 0) {
    return {
      kind: 'grey',
      tint: { a: 0, b: 0 },
      spread: 0,
      hue: 0,
      chroma95: 0,
      hueConcentration: 0,
      toneChroma95: 0,
      offCurve: 0,
      outliers: 0,
      curveTolerance: OFF_CURVE_DISTANCE,
      offHue: 0,
    };
  }
  const tintChroma = Math.hypot(meanA, meanB);
  const hue = (Math.atan2(meanB, meanA) * 180) / Math.PI;
  const curve = aroundCurve(lab, Math.max(1, Math.floor(n / CURVE_SAMPLES)), first);

  const noiseSigma =
    curve.neighbours > 0 ? percentile(curve.neighbourHist, curve.neighbours, NOISE_QUANTILE) / NEIGHBOUR_QUANTILE_PER_SIGMA : 0;
  const curveTolerance = Math.min(MAX_CURVE_TOLERANCE, Math.max(OFF_CURVE_DISTANCE, NOISE_MULTIPLE * noiseSigma));
  const report: ToneReport = {
    kind: 'colour',
    tint: { a: meanA, b: meanB },
    spread: Math.sqrt(Math.max(0, first.sumSq / count - tintChroma * tintChroma)),
    hue: hue < 0 ? hue + 360 : hue,
    chroma95: percentile(first.chromaHist, count, 0.95),
    hueConcentration: first.sumC > 0 ? (tintChroma * count) / first.sumC : 0,
    toneChroma95: percentile(curve.curveChromaHist, curve.count, 0.95),
    offCurve: fractionAbove(curve.offHist, curve.count, curveTolerance),
    outliers: fractionAbove(curve.offHist, curve.count, OUTLIER_DISTANCE),
    curveTolerance,
    // a hue counts once its chroma stands clear of the noise
    offHue: offFamily(curve.hueChromaHist, Math.max(HUE_MIN_CHROMA, curveTolerance)) / curve.count,
  };
  const onCurve = report.offCurve < OFF_CURVE_FRACTION && report.outliers < OUTLIER_FRACTION;
  // Grey: nearly every pixel neutral, or (on a noisy scan) neutral once the noise is averaged out along L*.
  if (report.chroma95 < GREY_CHROMA95 || (onCurve && report.toneChroma95 < GREY_CHROMA95)) report.kind = 'grey';
  else if (
    onCurve &&
    report.hueConcentration >= TONED_CONCENTRATION &&
    report.chroma95 <= TONED_MAX_CHROMA95 &&
    report.offHue < OFF_HUE_FRACTION
  ) {
    report.kind = 'toned';
    report.name = toneName(report.hue, tintChroma);
  }
  return report;
}

interface Overall {
  count: number;
  meanA: number;
  meanB: number;
  sumSq: number;
  sumC: number;
  chromaHist: Uint32Array;
  /** The tone curve: mean a*, b* per L* bin. */
  curveA: Float64Array;
  curveB: Float64Array;
}

/** First pass: tint, chroma histogram and the tone curve. */
function overall(lab: LabPlanes, stride: number): Overall {
  const { L, a, b } = lab;
  const n = a.length;
  const chromaHist = new Uint32Array(HIST_BINS + 1);
  const curveA = new Float64Array(L_BINS),
    curveB = new Float64Array(L_BINS),
    curveN = new Float64Array(L_BINS);
  let count = 0,
    sumA = 0,
    sumB = 0,
    sumSq = 0,
    sumC = 0;
  for (let i = 0; i < n; i += stride) {
    const ai = a[i]!,
      bi = b[i]!;
    const sq = ai * ai + bi * bi;
    const c = Math.sqrt(sq);
    sumA += ai;
    sumB += bi;
    sumSq += sq;
    sumC += c;
    chromaHist[histBin(c)]++;
    const k = lightnessBin(L[i]!);
    curveA[k] += ai;
    curveB[k] += bi;
    curveN[k]++;
    count++;
  }
  for (let k = 0; k < L_BINS; k++) {
    if (curveN[k]! > 0) {
      curveA[k] /= curveN[k]!;
      curveB[k] /= curveN[k]!;
    }
  }
  return { count, meanA: count ? sumA / count : 0, meanB: count ? sumB / count : 0, sumSq, sumC, chromaHist, curveA, curveB };
}

/**
 * Second pass, as histograms (so thresholds that depend on the noise can be applied afterwards):
 * each pixel's distance from the tone curve, the distance between the departures of pixels
 * NEIGHBOUR_STEP apart (noise), the curve's own chroma, and the chroma of pixels of another hue family.
 */
function aroundCurve(lab: LabPlanes, stride: number, first: Overall) {
  const { L, a, b } = lab;
  const { curveA, curveB } = first;
  const n = a.length;
  const offHist = new Uint32Array(HIST_BINS + 1);
  const neighbourHist = new Uint32Array(HIST_BINS + 1);
  const curveChromaHist = new Uint32Array(HIST_BINS + 1);
  const hueChromaHist = new Uint32Array(HUE_BINS * HUE_CHROMA_BINS);
  let count = 0,
    neighbours = 0;
  for (let i = 0; i < n; i += stride) {
    count++;
    const ai = a[i]!,
      bi = b[i]!;
    const k = lightnessBin(L[i]!);
    const ea = ai - curveA[k]!,
      eb = bi - curveB[k]!;
    offHist[histBin(norm(ea, eb))]++;
    curveChromaHist[histBin(norm(curveA[k]!, curveB[k]!))]++;
    const j = i + NEIGHBOUR_STEP;
    if (j < n) {
      const kj = lightnessBin(L[j]!);
      neighbourHist[histBin(norm(ea - (a[j]! - curveA[kj]!), eb - (b[j]! - curveB[kj]!)))]++;
      neighbours++;
    }
    const c = norm(ai, bi);
    if (c >= HUE_MIN_CHROMA) {
      const h = Math.floor(((Math.atan2(bi, ai) / (2 * Math.PI) + 1) % 1) * HUE_BINS) % HUE_BINS;
      hueChromaHist[Math.min(HUE_CHROMA_BINS - 1, Math.floor(c)) * HUE_BINS + h]++;
    }
  }
  return { count, offHist, neighbourHist, neighbours, curveChromaHist, hueChromaHist };
}

/**
 * Pixels of chroma `minChroma` or more whose hue is more than HUE_FAMILY_DEGREES from the dominant hue:
 * the peak of their hue histogram (summed over a window of about 35 degrees), refined as the circular
 * mean of the bins within half that family width of it.
 */
function offFamily(hueChromaHist: Uint32Array, minChroma: number): number {
  const hues = new Float64Array(HUE_BINS);
  for (let c = Math.min(HUE_CHROMA_BINS - 1, Math.ceil(minChroma)); c < HUE_CHROMA_BINS; c++) {
    for (let h = 0; h < HUE_BINS; h++) hues[h] += hueChromaHist[c * HUE_BINS + h]!;
  }
  const binDegrees = 360 / HUE_BINS;
  const window = Math.round(17.5 / binDegrees);
  let peak = 0,
    best = -1;
  for (let h = 0; h < HUE_BINS; h++) {
    let sum = 0;
    for (let d = -window; d <= window; d++) sum += hues[(h + d + HUE_BINS) % HUE_BINS]!;
    if (sum > best) {
      best = sum;
      peak = h;
    }
  }
  if (best <= 0) return 0;
  const half = Math.round(HUE_FAMILY_DEGREES / 2 / binDegrees);
  let x = 0,
    y = 0;
  for (let d = -half; d <= half; d++) {
    const h = (peak + d + HUE_BINS) % HUE_BINS;
    const angle = ((h + 0.5) * 2 * Math.PI) / HUE_BINS;
    x += hues[h]! * Math.cos(angle);
    y += hues[h]! * Math.sin(angle);
  }
  const dominant = Math.atan2(y, x);
  const cosFamily = Math.cos((HUE_FAMILY_DEGREES * Math.PI) / 180);
  let off = 0;
  for (let h = 0; h < HUE_BINS; h++) {
    if (Math.cos(((h + 0.5) * 2 * Math.PI) / HUE_BINS - dominant) < cosFamily) off += hues[h]!;
  }
  return off;
}

/**
 * Names a tint by hue angle h = atan2(b*, a*). Bands are our reading of the processes' colours
 * (from memory): sepia is brown to yellow-brown (h 20-100), selenium purple-brown to red-brown
 * (h 320-20), cyanotype a strong Prussian blue (h 180-320, chroma 10 or more) and gold or
 * platinum toning a weak blue-black there; green toning sits between.
 */
export function toneName(hue: number, chroma: number): ToneName {
  const h = ((hue % 360) + 360) % 360;
  if (h >= 20 && h < 100) return 'sepia';
  if (h >= 100 && h < 180) return 'green';
  if (h >= 180 && h < 320) return chroma >= 10 ? 'cyanotype' : 'blue-black';
  return 'selenium';
}

function lightnessBin(l: number): number {
  const k = Math.floor((l * L_BINS) / 100);
  return k < 0 ? 0 : k >= L_BINS ? L_BINS - 1 : k;
}

/** Math.hypot without its overflow care, which costs several times as much in V8 and is not needed here. */
function norm(x: number, y: number): number {
  return Math.sqrt(x * x + y * y);
}

function histBin(value: number): number {
  return Math.min(HIST_BINS, Math.floor(value / HIST_STEP));
}

function percentile(hist: Uint32Array, count: number, p: number): number {
  const target = p * count;
  let seen = 0;
  for (let i = 0; i < hist.length; i++) {
    seen += hist[i]!;
    if (seen >= target) return (i + 0.5) * HIST_STEP;
  }
  return HIST_BINS * HIST_STEP;
}

/** Fraction of the histogram's count above `limit` (bins wholly above it). */
function fractionAbove(hist: Uint32Array, count: number, limit: number): number {
  let above = 0;
  for (let i = Math.ceil(limit / HIST_STEP); i < hist.length; i++) above += hist[i]!;
  return above / count;
}
