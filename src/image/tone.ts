/**
 * Tone classification of an input: neutral grey, toned monochrome (sepia, selenium, cyanotype...)
 * or a colour photograph. kinhue works from L* in every case; the tint is reported so the caller
 * can say what it saw (and a colour input is warned about, since its colours will be replaced).
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
 * ... and their chroma stays close to the mean tint: an RMS spread under 12 CIELAB units
 * (common practice for this kind of check: a colour photograph's foliage, skin and sky spread
 * its (a*, b*) by 20 or more).
 */
export const TONED_SPREAD = 12;

const HIST_STEP = 0.1;
const HIST_BINS = 2000;
/** At most this many pixels are visited (an even stride); enough for stable statistics. */
const MAX_SAMPLES = 1 << 20;

/**
 * Classifies an image from its CIELAB planes.
 *
 * @example
 * const report = classifyTone(srgbToLab(pixels.data, pixels.channels));
 * if (report.kind === 'colour') warn('colour photo: only its lightness is used');
 */
export function classifyTone(lab: LabPlanes): ToneReport {
  const { a, b } = lab;
  const n = a.length;
  const stride = Math.max(1, Math.floor(n / MAX_SAMPLES));
  const hist = new Uint32Array(HIST_BINS + 1);
  let count = 0, sumA = 0, sumB = 0, sumSq = 0, sumC = 0;
  for (let i = 0; i < n; i += stride) {
    const ai = a[i]!, bi = b[i]!;
    const sq = ai * ai + bi * bi;
    const c = Math.sqrt(sq);
    sumA += ai;
    sumB += bi;
    sumSq += sq;
    sumC += c;
    hist[Math.min(HIST_BINS, Math.floor(c / HIST_STEP))]++;
    count++;
  }
  if (count === 0) return { kind: 'grey', tint: { a: 0, b: 0 }, spread: 0, hue: 0, chroma95: 0, hueConcentration: 0 };
  const meanA = sumA / count, meanB = sumB / count;
  const tintChroma = Math.hypot(meanA, meanB);
  const spread = Math.sqrt(Math.max(0, sumSq / count - tintChroma * tintChroma));
  const hueConcentration = sumC > 0 ? (tintChroma * count) / sumC : 0;
  const chroma95 = percentile(hist, count, 0.95);
  const hue = (Math.atan2(meanB, meanA) * 180) / Math.PI;
  const report: ToneReport = {
    kind: 'colour',
    tint: { a: meanA, b: meanB },
    spread,
    hue: hue < 0 ? hue + 360 : hue,
    chroma95,
    hueConcentration,
  };
  if (chroma95 < GREY_CHROMA95) report.kind = 'grey';
  else if (hueConcentration >= TONED_CONCENTRATION && spread <= TONED_SPREAD) {
    report.kind = 'toned';
    report.name = toneName(report.hue, tintChroma);
  }
  return report;
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

function percentile(hist: Uint32Array, count: number, p: number): number {
  const target = p * count;
  let seen = 0;
  for (let i = 0; i < hist.length; i++) {
    seen += hist[i]!;
    if (seen >= target) return (i + 0.5) * HIST_STEP;
  }
  return HIST_BINS * HIST_STEP;
}
