/**
 * CIELAB (CIE 15:2004, D65, 2 degree observer) for single colours and for whole images held as
 * interleaved typed arrays. Bulk conversions use lookup tables for integer data and allocate only
 * their output planes.
 */
import { LAB_EPSILON, LAB_KAPPA, fastCbrt, labF, labFInverse, lightnessFromY, yFromLightness } from './cube-root.js';
import {
  SRGB8_TO_LINEAR,
  linearToSrgb,
  linearToSrgbClipped,
  quantiser16,
  quantiser8,
  quantise,
  srgb16ToLinearTable,
  srgbToLinear,
  type Quantiser,
} from './srgb.js';
import { D65_WHITE, SRGB_TO_XYZ, XYZ_TO_SRGB, linearSrgbToXyz, xyzToLinearSrgb, type Triple } from './xyz.js';

/** One image in CIELAB: three row-major planes of equal length. */
export interface LabPlanes {
  L: Float32Array;
  a: Float32Array;
  b: Float32Array;
}

/** Interleaved image data: Uint8 0-255, Uint16 0-65535 or Float32 0-1. */
export type PixelData = Uint8Array | Uint16Array | Float32Array;

const [XN, , ZN] = D65_WHITE;
// Linear sRGB straight to X/Xn, Y/Yn, Z/Zn: the white division folded into the matrix.
const M00 = SRGB_TO_XYZ[0] / XN,
  M01 = SRGB_TO_XYZ[1] / XN,
  M02 = SRGB_TO_XYZ[2] / XN;
const M10 = SRGB_TO_XYZ[3],
  M11 = SRGB_TO_XYZ[4],
  M12 = SRGB_TO_XYZ[5];
const M20 = SRGB_TO_XYZ[6] / ZN,
  M21 = SRGB_TO_XYZ[7] / ZN,
  M22 = SRGB_TO_XYZ[8] / ZN;
// X/Xn, Y/Yn, Z/Zn straight back to linear sRGB.
const N00 = XYZ_TO_SRGB[0] * XN,
  N01 = XYZ_TO_SRGB[1],
  N02 = XYZ_TO_SRGB[2] * ZN;
const N10 = XYZ_TO_SRGB[3] * XN,
  N11 = XYZ_TO_SRGB[4],
  N12 = XYZ_TO_SRGB[5] * ZN;
const N20 = XYZ_TO_SRGB[6] * XN,
  N21 = XYZ_TO_SRGB[7],
  N22 = XYZ_TO_SRGB[8] * ZN;
const EPS = LAB_EPSILON;
const KAPPA = LAB_KAPPA;
const F_EPS = 6 / 29;

/**
 * XYZ (white Y = 1) to CIELAB against D65.
 * @example
 * xyzToLab(0.95047, 1, 1.08883); // [100, 0, 0]
 */
export function xyzToLab(x: number, y: number, z: number): [number, number, number];
export function xyzToLab<T extends Triple>(x: number, y: number, z: number, out: T): T;
export function xyzToLab(x: number, y: number, z: number, out: Triple = [0, 0, 0]): Triple {
  const fx = labF(x / XN),
    fy = labF(y),
    fz = labF(z / ZN);
  out[0] = 116 * fy - 16;
  out[1] = 500 * (fx - fy);
  out[2] = 200 * (fy - fz);
  return out;
}

/**
 * CIELAB against D65 to XYZ (white Y = 1).
 * @example
 * labToXyz(100, 0, 0); // [0.95047, 1, 1.08883]
 */
export function labToXyz(L: number, a: number, b: number): [number, number, number];
export function labToXyz<T extends Triple>(L: number, a: number, b: number, out: T): T;
export function labToXyz(L: number, a: number, b: number, out: Triple = [0, 0, 0]): Triple {
  const fy = (L + 16) / 116;
  out[0] = XN * labFInverse(fy + a / 500);
  out[1] = yFromLightness(L);
  out[2] = ZN * labFInverse(fy - b / 200);
  return out;
}

/**
 * One sRGB colour (encoded, 0-1) to CIELAB.
 * @example
 * srgbColourToLab(1, 0, 0); // [53.2408, 80.0925, 67.2032]
 */
export function srgbColourToLab(r: number, g: number, b: number): [number, number, number];
export function srgbColourToLab<T extends Triple>(r: number, g: number, b: number, out: T): T;
export function srgbColourToLab(r: number, g: number, b: number, out: Triple = [0, 0, 0]): Triple {
  linearSrgbToXyz(srgbToLinear(r), srgbToLinear(g), srgbToLinear(b), out);
  return xyzToLab(out[0], out[1], out[2], out);
}

/**
 * One CIELAB colour to linear sRGB, not clipped: a channel outside 0-1 means outside the gamut.
 * @example
 * labToLinearSrgb(100, 0, 0); // [1, 1, 1] to rounding
 */
export function labToLinearSrgb(L: number, a: number, b: number): [number, number, number];
export function labToLinearSrgb<T extends Triple>(L: number, a: number, b: number, out: T): T;
export function labToLinearSrgb(L: number, a: number, b: number, out: Triple = [0, 0, 0]): Triple {
  labToXyz(L, a, b, out);
  return xyzToLinearSrgb(out[0], out[1], out[2], out);
}

/**
 * One CIELAB colour to encoded sRGB 0-1, not clipped.
 * @example
 * labToSrgbColour(53.2408, 80.0925, 67.2032); // [1, 0, 0] to rounding
 */
export function labToSrgbColour(L: number, a: number, b: number): [number, number, number];
export function labToSrgbColour<T extends Triple>(L: number, a: number, b: number, out: T): T;
export function labToSrgbColour(L: number, a: number, b: number, out: Triple = [0, 0, 0]): Triple {
  labToLinearSrgb(L, a, b, out);
  for (let c = 0; c < 3; c++) {
    const v = out[c];
    out[c] = v < 0 ? -linearToSrgb(-v) : linearToSrgb(v);
  }
  return out;
}

function checkLayout(length: number, channels: number, allowed: readonly number[], what: string): number {
  if (!allowed.includes(channels)) {
    throw new RangeError(`${what}: channels must be one of ${allowed.join(', ')}, got ${channels}`);
  }
  if (length % channels !== 0) {
    throw new RangeError(`${what}: data length ${length} is not a multiple of ${channels} channels`);
  }
  return length / channels;
}

// L* of every grey code, so grey pixels skip the matrix and give a* = b* = 0 exactly.
const GREY8_L = (() => {
  const t = new Float64Array(256);
  for (let i = 0; i < 256; i++) t[i] = lightnessFromY(SRGB8_TO_LINEAR[i]);
  return t;
})();
let grey16L: Float64Array | undefined;
function grey16Lightness(): Float64Array {
  if (!grey16L) {
    const lin = srgb16ToLinearTable();
    grey16L = new Float64Array(65536);
    for (let i = 0; i < 65536; i++) grey16L[i] = lightnessFromY(lin[i]);
  }
  return grey16L;
}

/** L* of Y for the bulk paths: lightnessFromY with the fast cube root. */
function fastLightness(y: number): number {
  return y > EPS ? 116 * fastCbrt(y) - 16 : KAPPA * y;
}

/** Linear sRGB to CIELAB, written at index i of the planes L, a, b. */
function linearToLab(lr: number, lg: number, lb: number, L: Float32Array, a: Float32Array, b: Float32Array, i: number): void {
  const x = M00 * lr + M01 * lg + M02 * lb;
  const y = M10 * lr + M11 * lg + M12 * lb;
  const z = M20 * lr + M21 * lg + M22 * lb;
  const fx = x > EPS ? fastCbrt(x) : (KAPPA * x + 16) / 116;
  const fy = y > EPS ? fastCbrt(y) : (KAPPA * y + 16) / 116;
  const fz = z > EPS ? fastCbrt(z) : (KAPPA * z + 16) / 116;
  L[i] = 116 * fy - 16;
  a[i] = 500 * (fx - fy);
  b[i] = 200 * (fy - fz);
}

function integerRgbToLab(data: Uint8Array | Uint16Array, channels: number, lin: Float64Array, greyL: Float64Array, out: LabPlanes): void {
  const { L, a, b } = out;
  const n = L.length;
  for (let i = 0, j = 0; i < n; i++, j += channels) {
    const r = data[j],
      g = data[j + 1],
      bl = data[j + 2];
    if (r === g && g === bl) {
      L[i] = greyL[r];
      a[i] = 0;
      b[i] = 0;
    } else {
      linearToLab(lin[r], lin[g], lin[bl], L, a, b, i);
    }
  }
}

/**
 * Interleaved sRGB image data to CIELAB planes. Uint8 is 0-255, Uint16 0-65535, Float32 0-1.
 * One or two channels are grey (+ alpha) and give a* = b* = 0 exactly; three or four are RGB
 * (+ alpha, ignored).
 * @example
 * const lab = srgbToLab(new Uint8Array([255, 0, 0]), 3); // lab.L[0] = 53.24
 */
export function srgbToLab(data: PixelData, channels: 1 | 2 | 3 | 4): LabPlanes {
  const n = checkLayout(data.length, channels, [1, 2, 3, 4], 'srgbToLab');
  if (channels < 3) return { L: greyToLightness(data, channels), a: new Float32Array(n), b: new Float32Array(n) };
  const out: LabPlanes = { L: new Float32Array(n), a: new Float32Array(n), b: new Float32Array(n) };
  if (data instanceof Uint8Array) {
    integerRgbToLab(data, channels, SRGB8_TO_LINEAR, GREY8_L, out);
  } else if (data instanceof Uint16Array) {
    integerRgbToLab(data, channels, srgb16ToLinearTable(), grey16Lightness(), out);
  } else {
    for (let i = 0, j = 0; i < n; i++, j += channels) {
      linearToLab(srgbToLinear(data[j]), srgbToLinear(data[j + 1]), srgbToLinear(data[j + 2]), out.L, out.a, out.b, i);
    }
  }
  return out;
}

/**
 * The L* plane alone (relative luminance Y to L*) of grey or RGB image data, for callers that need
 * lightness only. Equal to srgbToLab(data, channels).L. Written into `out` when given (its first
 * pixel-count values; strip-wise callers reuse one buffer).
 * @example
 * greyToLightness(new Uint8Array([119]), 1); // Float32Array [50.03...]
 */
export function greyToLightness(data: PixelData, channels: 1 | 2 | 3 | 4, out?: Float32Array): Float32Array {
  const n = checkLayout(data.length, channels, [1, 2, 3, 4], 'greyToLightness');
  if (out && out.length < n) throw new RangeError(`greyToLightness: output holds ${out.length} values, expected at least ${n}`);
  const L = out ? out.subarray(0, n) : new Float32Array(n);
  if (data instanceof Float32Array) {
    for (let i = 0, j = 0; i < n; i++, j += channels) {
      const y =
        channels < 3
          ? srgbToLinear(data[j])
          : M10 * srgbToLinear(data[j]) + M11 * srgbToLinear(data[j + 1]) + M12 * srgbToLinear(data[j + 2]);
      L[i] = fastLightness(y);
    }
    return L;
  }
  const is8 = data instanceof Uint8Array;
  if (is8 && channels >= 3) {
    rgb8Lightness(data, channels, L);
    return L;
  }
  const lin = is8 ? SRGB8_TO_LINEAR : srgb16ToLinearTable();
  const greyL = is8 ? GREY8_L : grey16Lightness();
  for (let i = 0, j = 0; i < n; i++, j += channels) {
    const r = data[j];
    if (channels < 3) {
      L[i] = greyL[r];
    } else {
      const g = data[j + 1],
        b = data[j + 2];
      L[i] = r === g && g === b ? greyL[r] : fastLightness(M10 * lin[r] + M11 * lin[g] + M12 * lin[b]);
    }
  }
  return L;
}

// L* of recently seen 8-bit RGB triples, direct-mapped by a hash of the triple: [key, L*] side by side,
// the key as int32 and L* as float32 over one buffer. A scan holds far fewer distinct colours than
// pixels (a toned print lies near one curve through RGB), so most pixels find their L* here; the value
// is the float32 the conversion stores anyway, so results are unchanged.
const RGB8_SLOTS = 1 << 16;
const rgb8Cache = new ArrayBuffer(RGB8_SLOTS * 8);
new Int32Array(rgb8Cache).fill(-1);

function rgb8Lightness(data: Uint8Array, channels: number, L: Float32Array): void {
  const n = L.length;
  const keys = new Int32Array(rgb8Cache);
  const values = new Float32Array(rgb8Cache);
  for (let i = 0, j = 0; i < n; i++, j += channels) {
    const key = (data[j]! << 16) | (data[j + 1]! << 8) | data[j + 2]!;
    const slot = (Math.imul(key, 0x9e3779b1) >>> 16) << 1;
    if (keys[slot] === key) {
      L[i] = values[slot + 1]!;
    } else {
      L[i] = rgb8ToLightness(data[j]!, data[j + 1]!, data[j + 2]!);
      keys[slot] = key;
      values[slot + 1] = L[i]!;
    }
  }
}

function rgb8ToLightness(r: number, g: number, b: number): number {
  const lin = SRGB8_TO_LINEAR;
  return r === g && g === b ? GREY8_L[r]! : fastLightness(M10 * lin[r]! + M11 * lin[g]! + M12 * lin[b]!);
}

function checkOut(out: PixelData, n: number, channels: number, what: string): void {
  if (out.length !== n * channels) {
    throw new RangeError(`${what}: output holds ${out.length} values, expected ${n} pixels x ${channels} channels`);
  }
}

function labToIntegerRgb(lab: LabPlanes, out: Uint8Array | Uint16Array, channels: number, q: Quantiser): void {
  const { L, a, b } = lab;
  const n = L.length;
  const max = q.max;
  const thresholds = q.thresholds,
    first = q.first,
    bins = q.bins;
  // The quantiser's lookup (see srgb.ts' quantise) is written out three times: as a function call
  // it made this loop twice as slow.
  for (let i = 0, j = 0; i < n; i++, j += channels) {
    const l = L[i]!;
    const fy = (l + 16) / 116;
    const fx = fy + a[i]! / 500;
    const fz = fy - b[i]! / 200;
    const x = fx > F_EPS ? fx * fx * fx : (116 * fx - 16) / KAPPA;
    const y = l > 8 ? fy * fy * fy : l / KAPPA;
    const z = fz > F_EPS ? fz * fz * fz : (116 * fz - 16) / KAPPA;
    let v = N00 * x + N01 * y + N02 * z;
    let code: number;
    if (!(v > 0)) code = 0;
    else if (v >= 1) code = max;
    else for (code = first[(v * bins) | 0]!; v >= thresholds[code]!; ) code++;
    out[j] = code;
    v = N10 * x + N11 * y + N12 * z;
    if (!(v > 0)) code = 0;
    else if (v >= 1) code = max;
    else for (code = first[(v * bins) | 0]!; v >= thresholds[code]!; ) code++;
    out[j + 1] = code;
    v = N20 * x + N21 * y + N22 * z;
    if (!(v > 0)) code = 0;
    else if (v >= 1) code = max;
    else for (code = first[(v * bins) | 0]!; v >= thresholds[code]!; ) code++;
    out[j + 2] = code;
    if (channels === 4) out[j + 3] = max;
  }
}

/**
 * CIELAB planes to interleaved sRGB, written into `out` (Uint8 0-255, Uint16 0-65535 or Float32
 * 0-1). Each channel is clipped to the gamut and integer outputs are rounded; a fourth channel is
 * opaque alpha.
 * @example
 * labToSrgb(lab, new Uint8Array(lab.L.length * 3), 3);
 */
export function labToSrgb<T extends PixelData>(lab: LabPlanes, out: T, channels: 3 | 4): T {
  const n = lab.L.length;
  checkLayout(out.length, channels, [3, 4], 'labToSrgb');
  checkOut(out, n, channels, 'labToSrgb');
  if (out instanceof Uint8Array) {
    labToIntegerRgb(lab, out, channels, quantiser8());
  } else if (out instanceof Uint16Array) {
    labToIntegerRgb(lab, out, channels, quantiser16());
  } else {
    const rgb: [number, number, number] = [0, 0, 0];
    for (let i = 0, j = 0; i < n; i++, j += channels) {
      labToLinearSrgb(lab.L[i], lab.a[i], lab.b[i], rgb);
      out[j] = linearToSrgbClipped(rgb[0]);
      out[j + 1] = linearToSrgbClipped(rgb[1]);
      out[j + 2] = linearToSrgbClipped(rgb[2]);
      if (channels === 4) out[j + 3] = 1;
    }
  }
  return out;
}

/**
 * Renders an L* plane alone as neutral grey: one channel, the sRGB value whose L* is L (clipped
 * to 0-100, rounded for integer outputs).
 * @example
 * lightnessToGrey(new Float32Array([50]), new Uint8Array(1)); // Uint8Array [119]
 */
export function lightnessToGrey<T extends PixelData>(L: Float32Array, out: T): T {
  checkOut(out, L.length, 1, 'lightnessToGrey');
  const n = L.length;
  if (out instanceof Float32Array) {
    for (let i = 0; i < n; i++) out[i] = linearToSrgbClipped(yFromLightness(L[i]));
    return out;
  }
  const q = out instanceof Uint8Array ? quantiser8() : quantiser16();
  for (let i = 0; i < n; i++) out[i] = quantise(q, yFromLightness(L[i]));
  return out;
}
