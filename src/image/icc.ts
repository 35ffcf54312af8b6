/**
 * ICC profile helpers: what colour space a profile describes, libvips' own sRGB profile, and a
 * profile written to a temporary file (sharp takes output profiles by path).
 */
import { mkdtemp, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import sharp from 'sharp';
import { sharpLimit } from './limits.js';

/**
 * The data colour space signature of an ICC profile (header bytes 16-19, ICC.1:2010 section
 * 7.2.6), trimmed: 'RGB', 'GRAY', 'CMYK', 'Lab', ... or undefined when the buffer is too short.
 *
 * @example
 * iccColourSpace(profile); // 'RGB'
 */
export function iccColourSpace(icc: Buffer | undefined): string | undefined {
  if (!icc || icc.length < 128) return undefined;
  return icc.subarray(16, 20).toString('latin1').trim();
}

/** True when the profile can describe pixels with this many colour channels (1 grey, 3 RGB). */
export function iccFitsChannels(icc: Buffer | undefined, colourChannels: 1 | 3): boolean {
  const space = iccColourSpace(icc);
  return colourChannels === 1 ? space === 'GRAY' : space === 'RGB';
}

let srgbProfileCache: Promise<Buffer> | undefined;

/**
 * The sRGB profile libvips attaches to its own sRGB output (read once from a 1x1 image).
 *
 * @example
 * const icc = await srgbProfile(); // iccColourSpace(icc) === 'RGB'
 */
export function srgbProfile(): Promise<Buffer> {
  srgbProfileCache ??= (async () => {
    const png = await sharp(Buffer.from([128, 128, 128]), { raw: { width: 1, height: 1, channels: 3 }, ...sharpLimit() })
      .withIccProfile('srgb')
      .png()
      .toBuffer();
    const { icc } = await sharp(png, sharpLimit()).metadata();
    if (!icc) throw new Error('libvips did not attach its sRGB profile');
    return icc;
  })();
  return srgbProfileCache;
}

/**
 * Runs `fn` with the profile saved as a temporary .icc file, removed afterwards.
 *
 * @example
 * await withProfileFile(icc, (file) => sharp(input).withIccProfile(file).toBuffer());
 */
export async function withProfileFile<T>(icc: Buffer, fn: (file: string) => Promise<T>): Promise<T> {
  const dir = await mkdtemp(join(tmpdir(), 'kinhue-icc-'));
  try {
    const file = join(dir, 'profile.icc');
    await writeFile(file, icc);
    return await fn(file);
  } finally {
    await rm(dir, { recursive: true, force: true });
  }
}
