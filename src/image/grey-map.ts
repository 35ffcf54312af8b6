/**
 * A small grey plane written as an 8-bit grey PNG at a larger size, resized by libvips (bilinear) as it
 * streams to disk, so even a 100-megapixel map never sits in memory whole. Written atomically.
 */
import sharp from 'sharp';
import { writeAtomic } from '../files/index.js';
import { sharpLimit } from './limits.js';

/**
 * Writes `values` (width x height, 0-255) as an 8-bit grey PNG of outWidth x outHeight; the pixel
 * limit (KINHUE_MAX_PIXELS by default) applies to the plane sharp reads.
 * @example
 *   await writeGreyMap(conf8, 128, 96, 4000, 3000, 'out/photo.confidence.png');
 */
export async function writeGreyMap(
  values: Uint8Array,
  width: number,
  height: number,
  outWidth: number,
  outHeight: number,
  path: string,
  maxPixels?: number,
): Promise<void> {
  await writeAtomic(path, async (temp) => {
    await sharp(values, { raw: { width, height, channels: 1 }, ...sharpLimit(maxPixels) })
      .resize(outWidth, outHeight, { fit: 'fill', kernel: 'linear' })
      .toColourspace('b-w')
      .png({ compressionLevel: 6 })
      .toFile(temp);
  });
}
