/**
 * The pixel limit that guards against decompression bombs: a small file whose header promises
 * billions of pixels. The width and height are read from the header and checked before any pixel
 * is decoded.
 */
import { ErrorCodes, InputError, UsageError } from '../errors.js';

/**
 * 300 megapixels: room for a 100-megapixel scan with margin (a 10x8 inch print at 1200 dpi is
 * 115 MP), while refusing headers that claim gigapixels. Common practice for a guard like this;
 * libvips' own default is 268 MP (0x3FFF squared). At 16-bit RGB, 300 MP is 1.8 GB of samples.
 */
export const DEFAULT_MAX_PIXELS = 300_000_000;

/** The environment variable that raises (or lowers) the limit, in pixels (e.g. 600000000 or 600e6). */
export const MAX_PIXELS_ENV = 'KINHUE_MAX_PIXELS';

/**
 * The limit in force: the option if given, else KINHUE_MAX_PIXELS, else the default. A value that is
 * not a whole number of pixels from 1 to 2^53 - 1 (e.g. `1e99`, `-5`, `abc`) is refused with a
 * UsageError, so a typo can neither disable the guard nor make every scan fail.
 *
 * @example
 * resolveMaxPixels(); // 300000000 unless KINHUE_MAX_PIXELS is set
 * resolveMaxPixels(50e6); // 50000000
 */
export function resolveMaxPixels(option?: number, env: NodeJS.ProcessEnv = process.env): number {
  if (option !== undefined) {
    if (!Number.isSafeInteger(option) || option < 1) throw new RangeError(`maxPixels must be a whole number of 1 or more, not ${option}`);
    return option;
  }
  const raw = env[MAX_PIXELS_ENV];
  if (raw === undefined || raw.trim() === '') return DEFAULT_MAX_PIXELS;
  const value = Number(raw.trim());
  if (!Number.isSafeInteger(value) || value < 1) {
    throw new UsageError(
      `${MAX_PIXELS_ENV}=${raw.length > 40 ? `${raw.slice(0, 40)}...` : raw} is not a whole number of pixels`,
      `set it to a whole number such as ${MAX_PIXELS_ENV}=600000000 (600 megapixels), or unset it for the default of ${DEFAULT_MAX_PIXELS / 1e6} megapixels`,
    );
  }
  return value;
}

/**
 * sharp's input option for the limit in force. Every sharp call takes it, so sharp's own default
 * (268 megapixels) never decides what kinhue can read or write.
 *
 * @example
 * sharp(data, { raw, ...sharpLimit(job.maxPixels) });
 */
export function sharpLimit(maxPixels?: number): { limitInputPixels: number } {
  return { limitInputPixels: resolveMaxPixels(maxPixels) };
}

/**
 * Throws InputError KH_TOO_LARGE when width x height exceeds the limit.
 *
 * @example
 * checkPixelLimit('scan.tif', 20000, 20000, 300e6); // throws: 400 MP over the 300 MP limit
 */
export function checkPixelLimit(file: string, width: number, height: number, maxPixels: number): void {
  const count = width * height;
  if (count <= maxPixels) return;
  throw new InputError(
    ErrorCodes.TOO_LARGE,
    `image is ${width} x ${height} pixels (${megapixels(count)} MP), over the limit of ${megapixels(maxPixels)} MP`,
    {
      file,
      hint:
        `if you trust this file, raise the limit with the environment variable ${MAX_PIXELS_ENV}` +
        ` (e.g. ${MAX_PIXELS_ENV}=${Math.ceil(count / 1e6) * 1e6}); it needs about ${memoryEstimate(count)} of memory`,
    },
  );
}

function megapixels(count: number): string {
  return (count / 1e6).toFixed(count < 1e7 ? 2 : 0);
}

/** Memory for 16-bit RGB samples, the worst case decode keeps. */
function memoryEstimate(count: number): string {
  const bytes = count * 3 * 2;
  return bytes >= 1e9 ? `${(bytes / 1e9).toFixed(1)} GB` : `${Math.ceil(bytes / 1e6)} MB`;
}
