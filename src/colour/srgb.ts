/**
 * The sRGB transfer function (IEC 61966-2-1:1999), its inverse, and the lookup tables that make bulk
 * decoding and encoding of 8- and 16-bit data fast. Values are 0-1 unless a name says otherwise.
 */

/**
 * Decodes one sRGB-encoded value (0-1) to linear light (0-1), IEC 61966-2-1.
 * @example
 * srgbToLinear(128 / 255); // 0.2158605...
 */
export function srgbToLinear(v: number): number {
  return v <= 0.04045 ? v / 12.92 : Math.pow((v + 0.055) / 1.055, 2.4);
}

/**
 * Encodes one linear-light value (0-1) as sRGB (0-1), IEC 61966-2-1. Not clipped: callers clip.
 * @example
 * linearToSrgb(0.2158605); // 0.50196...
 */
export function linearToSrgb(v: number): number {
  return v <= 0.0031308 ? v * 12.92 : 1.055 * Math.pow(v, 1 / 2.4) - 0.055;
}

/** Linear light of every 8-bit code, index 0-255. */
export const SRGB8_TO_LINEAR: Float64Array = (() => {
  const t = new Float64Array(256);
  for (let i = 0; i < 256; i++) t[i] = srgbToLinear(i / 255);
  return t;
})();

let srgb16Table: Float64Array | undefined;

/**
 * Linear light of every 16-bit code, index 0-65535 (built on first use, 512 KiB).
 * @example
 * srgb16ToLinearTable()[65535]; // 1
 */
export function srgb16ToLinearTable(): Float64Array {
  if (!srgb16Table) {
    const t = new Float64Array(65536);
    for (let i = 0; i < 65536; i++) t[i] = srgbToLinear(i / 65535);
    srgb16Table = t;
  }
  return srgb16Table;
}

/**
 * A quantiser from linear light to the nearest integer sRGB code 0..max, exact to the rounding of
 * round(max * linearToSrgb(v)). A coarse table gives a first code; the decision thresholds (the
 * linear values of the half-way points between codes) correct it by a step or two.
 */
export interface Quantiser {
  readonly max: number;
  readonly bins: number;
  readonly first: Uint8Array | Uint16Array;
  /** thresholds[k]: linear value at which code k+1 starts; thresholds[max] = Infinity (a sentinel). */
  readonly thresholds: Float64Array;
}

function makeQuantiser(max: number, bins: number): Quantiser {
  const thresholds = new Float64Array(max + 1);
  for (let k = 0; k < max; k++) thresholds[k] = srgbToLinear((k + 0.5) / max);
  thresholds[max] = Infinity;
  const first = max <= 255 ? new Uint8Array(bins + 1) : new Uint16Array(bins + 1);
  let code = 0;
  for (let i = 0; i <= bins; i++) {
    const v = i / bins;
    while (v >= thresholds[code]) code++;
    first[i] = code;
  }
  return { max, bins, first, thresholds };
}

// 65536 bins (64 KiB): a bin holds a code boundary rarely even on the steep segment near black, so
// the correcting loop almost never runs and its branch is predictable (4096 bins took a third longer).
const Q8 = makeQuantiser(255, 1 << 16);
let q16: Quantiser | undefined;

/** @internal the 16-bit quantiser, built on first use (about 1 MiB). */
export function quantiser16(): Quantiser {
  if (!q16) q16 = makeQuantiser(65535, 1 << 18);
  return q16;
}

/** @internal the 8-bit quantiser. */
export function quantiser8(): Quantiser {
  return Q8;
}

/**
 * Encodes linear light as an integer sRGB code 0..q.max, clipping out-of-range values.
 * @internal used by the bulk conversions; exported for them and for tests.
 */
export function quantise(q: Quantiser, v: number): number {
  if (!(v > 0)) return 0; // also catches NaN
  if (v >= 1) return q.max;
  const thresholds = q.thresholds;
  let code = q.first[(v * q.bins) | 0];
  while (v >= thresholds[code]) code++;
  return code;
}

/**
 * Encodes linear light as an 8-bit sRGB code (0-255), clipped and rounded.
 * @example
 * linearToSrgb8(0.2158605); // 128
 */
export function linearToSrgb8(v: number): number {
  return quantise(Q8, v);
}

/**
 * Encodes linear light as a 16-bit sRGB code (0-65535), clipped and rounded.
 * @example
 * linearToSrgb16(1); // 65535
 */
export function linearToSrgb16(v: number): number {
  return quantise(quantiser16(), v);
}

/**
 * Encodes linear light as sRGB 0-1, clipped to 0-1.
 * @example
 * linearToSrgbClipped(1.2); // 1
 */
export function linearToSrgbClipped(v: number): number {
  if (!(v > 0)) return 0;
  if (v >= 1) return 1;
  return linearToSrgb(v);
}
